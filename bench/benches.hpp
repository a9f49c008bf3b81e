#pragma once
// Benchmark entry points, one per measured unit; the bench program's main calls each.
// Each prints its own figures to stdout.

/// Oversampler cost at 48 kHz for factors 1-16: ns per base-rate sample and real-time
/// factor for upsampling, downsampling and the round trip.
void bench_oversampler();

/// DK engine cost per preset and drive: ns per oversampled sample, real-time factor at 8x
/// 48 kHz on one core, Newton evaluations, speed-up over the nodal reference solver.
void bench_engine();

/// The render pipeline at 48 kHz, 8x, with file I/O: real-time factor for mono on one core
/// and stereo on two threads, for each preset.
void bench_render();
