#pragma once
// The exponential sine sweep and its deconvolution: a stage's linear response and its
// harmonic distortion from one recording (A. Farina, "Simultaneous measurement of impulse
// response and distortion with a swept-sine technique", AES 108th Convention, Paris, 2000,
// preprint 5093).
//
// The sweep (Farina 2000, eq. 2): from f1 to f2 in T seconds,
//   x(t) = A sin(2 pi f1 L (exp(t / L) - 1)),   L = T / ln(f2 / f1),
// its instantaneous frequency f1 exp(t / L); a raised-cosine fade (as dsp/tone.hpp's) of
// fade_seconds at each end. Its length is round(T rate) samples. The phase is reduced in
// long double, as the tone's.
//
// Deconvolution: the recording y and the played sweep x are transformed at a common length
// N (5-smooth, at least len y + len x + L ln 11 rate, so nothing wraps onto the linear part),
// D = Y / X within [f1, f2] (tapered to 0 over a third of an octave inside each end: a
// raised cosine in log frequency; 0 outside), and h = IDFT(D). For a system that is linear
// and time-invariant, h is its impulse response band-limited to [f1, f2], starting at the
// recording's latency. A memoryless nonlinearity's n-th harmonic is the sweep advanced by
// L ln n (Farina 2000, eq. 5: the harmonic's instantaneous frequency n f1 exp(t/L) =
// f1 exp((t + L ln n)/L)), so its impulse response lies L ln n before the linear one, where
// the transform wraps it to the end of h.
//
// Reading (the windows in time: 1 around the centre, raised-cosine edges over the outer half
// of the part before the centre and of the part after it):
// - linear: from the peak of |h| (the latency, to the sample) minus min(L ln 2 / 2, 0.25 s)
//   to plus min(T, 2 s); its DTFT at f, with the peak's delay removed, is the response at f.
//   A latency known to a fraction of a sample is removed instead as the linear phase it is.
// - harmonic n (2..10): around the peak position minus L ln n, reaching halfway to the
//   windows of n - 1 and n + 1; the magnitude of its DTFT at n f is the n-th harmonic's
//   level at the excitation frequency f re the fundamental of a unit-gain system, i.e. for a
//   memoryless y = x + a2 x^2 driven at peak A, |H2(2 f)| = a2 A / 2 (closed form of
//   x^2 = A^2 (1 - cos 2 phi) / 2).
// The response is trusted from f1 2^(1/2) to f2 / 2^(1/3): inside the tapers, and at the low
// end a sixth of an octave more, where the taper's impulse response rings longer than the
// part of the window before the peak (at 25 Hz of a 20 Hz start the phase read 1.5 degrees
// off, measured; from 28 Hz under 1 degree). A harmonic's where n f lies in that band too.
#include <complex>
#include <cstddef>
#include <span>
#include <vector>

namespace pinchoff::dsp {

struct exp_sweep_plan {
  double start_hz{20.0};     ///< f1 > 0
  double end_hz{20000.0};    ///< f2: f1 < f2 < rate / 2, f2 >= 4 f1 (two octaves at least)
  double seconds{5.0};       ///< T, from 0.5 s; at most max_sweep_frames samples
  double rate_hz{48000.0};
  double level_dbfs{-20.0};  ///< <= 0
  double fade_seconds{0.01}; ///< >= 0, at most a tenth of T
};

/// The longest sweep made or read: 2^21 samples (43.7 s at 48 kHz), which bounds the
/// deconvolution's work near 0.5 GB.
inline constexpr std::size_t max_sweep_frames = std::size_t{1} << 21;

/// Throws setting_error naming the field ("start_hz", "end_hz", "seconds", "rate_hz",
/// "level_dbfs", "fade_seconds").
void validate(const exp_sweep_plan& plan);
/// L = T / ln(f2 / f1), in seconds.
double sweep_rate_constant_s(const exp_sweep_plan& plan);
/// The samples of the sweep (validates first).
std::vector<double> exp_sweep_samples(const exp_sweep_plan& plan);

/// The deconvolved recording and where its parts lie.
struct sweep_deconvolution {
  double rate_hz{};
  double start_hz{}, end_hz{};  ///< the sweep's f1, f2
  double rate_constant_s{};     ///< L
  double sweep_seconds{};       ///< T
  std::vector<double> h;        ///< length N
  std::size_t linear_index{};   ///< the peak of |h|: the latency in samples
  /// Band in which the linear response is trusted: f1 2^(1/2) to f2 / 2^(1/3).
  double trusted_low_hz() const noexcept;
  double trusted_high_hz() const noexcept;
  /// Where harmonic n's impulse response lies in h (fractional; wrapped into [0, N)).
  double harmonic_position(int n) const noexcept;
};

/// Deconvolves `recording` (the system's output, at the sweep's rate) by `sweep` (what was
/// played, made with `plan`). Throws input_error when the recording is shorter than the
/// sweep, longer than 2 max_sweep_frames, or holds no response (silence).
sweep_deconvolution deconvolve_sweep(std::span<const double> recording, std::span<const double> sweep,
                                     const exp_sweep_plan& plan);

/// The linear response at each frequency (complex, output re input; the latency removed).
std::vector<std::complex<double>> linear_response(const sweep_deconvolution& d, std::span<const double> frequency_hz);
/// The same with a latency given in samples (fractional, >= 0) removed exactly, as the linear
/// phase exp(j 2 pi f latency / fs), instead of the peak's whole sample; the window in time
/// stays around the peak, so only the phase's reference moves.
std::vector<std::complex<double>> linear_response(const sweep_deconvolution& d, std::span<const double> frequency_hz,
                                                  double latency_samples);
/// How far from the peak (samples, each way) the linear window is flat: a latency given
/// further from the peak than this is not the response's.
double linear_window_flat_samples(const sweep_deconvolution& d) noexcept;

/// Harmonic n's level re the fundamental at each excitation frequency f (|H_n(n f)| over
/// |H_1(f)|, a ratio); NaN where n f lies outside the trusted band.
std::vector<double> harmonic_ratio(const sweep_deconvolution& d, int n, std::span<const double> frequency_hz);

}  // namespace pinchoff::dsp
