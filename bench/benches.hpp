#pragma once
// Benchmark entry points, one per measured unit; the bench program's main calls each.
// Each prints its own figures to stdout.

/// Oversampler cost at 48 kHz for factors 1-16: ns per base-rate sample and real-time
/// factor for upsampling, downsampling and the round trip.
void bench_oversampler();

/// DK engine cost per oversampled sample for each preset at 8x 48 kHz: real-time factor,
/// Newton evaluations per sample and the speed-up over the nodal reference solver.
void bench_engine();

/// The DK engine's general path on chains of 2-6 stages at 0.01-10 V peak: real-time factor,
/// cost per JFET against the one-JFET path and speed-up over the reference, each against its
/// target; a two-stage chain at 8x and 16x; the same circuit twice against it once.
void bench_multi_device();

/// A 25-point sweep of every preset at 1 kHz (target under 0.5 s) and at 20 Hz (its time as a
/// ratio to 1 kHz, target 4x, and its cost a simulated sample against 1 kHz, target 2x).
void bench_sweep();

/// The render pipeline at 48 kHz, 8x, with file I/O: real-time factor for mono on one core
/// and stereo on two threads, for each preset.
void bench_render();
