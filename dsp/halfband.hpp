#pragma once
// Half-band lowpass FIR filters for changing the sample rate by two, designed by the Kaiser
// window method (Kaiser, "Nonrecursive digital filter design using the I0-sinh window
// function", Proc. IEEE ISCAS 1974), and their polyphase interpolator and decimator.
//
// A half-band filter has its cutoff at a quarter of its own sample rate. Its zero-phase
// impulse response is
//   h(0) = 1/2,   h(d) = 0 for even d != 0,   h(+-(2i+1)) = g_i,   i = 0 .. K-1,
// so it has 4K-1 taps (2K+1 of them non-zero) and a delay of 2K-1 samples at its own rate.
// Frequencies f are normalised to the filter's sample rate (cycles per sample, 0 .. 1/2):
//   H(f) = 1/2 + 2 sum_i g_i cos(2 pi (2i+1) f),   real (zero phase).
// Since cos(2 pi (2i+1) (1/2 - f)) = -cos(2 pi (2i+1) f), H(f) + H(1/2 - f) = 1 exactly:
// the passband error at f is the stopband magnitude at 1/2 - f, so one figure (the
// stopband attenuation A, in dB) fixes both, and the transition band is centred on 1/4.
// Windowing the ideal half-band (g_i = (-1)^i / (pi (2i+1))) keeps these properties.
//
// Cost: the interpolator computes each output pair with K multiplies (the taps are
// symmetric, so x[a] + x[b] is formed before the multiply) and one copy (the centre phase
// is a pure delay); the decimator likewise K + 1 multiplies per output sample.
#include <cstddef>
#include <span>
#include <vector>

namespace pinchoff::dsp {

/// Modified Bessel function of the first kind, order zero, by its power series
/// sum_k ((x/2)^k / k!)^2 (Abramowitz & Stegun 9.6.12), to double precision for |x| <= 50.
double bessel_i0(double x) noexcept;

/// Kaiser's window shape parameter for a stopband attenuation of `attenuation_db` (dB > 0):
/// 0.1102 (A - 8.7) above 50 dB, 0.5842 (A - 21)^0.4 + 0.07886 (A - 21) from 21 to 50 dB,
/// 0 below (Kaiser 1974; Oppenheim & Schafer, Discrete-Time Signal Processing, sec. 7.5;
/// from memory).
double kaiser_beta(double attenuation_db) noexcept;

/// Kaiser's length estimate N = (A - 7.95) / (14.36 df) + 1 for attenuation A (dB) and
/// transition width df (normalised, 0 < df < 1/2), rounded up (same sources, from memory).
int kaiser_length_estimate(double attenuation_db, double transition_width) noexcept;

/// A designed half-band filter (the gain-1 lowpass of the header comment).
struct halfband_design {
  std::vector<double> side_taps;  ///< g_0 .. g_{K-1}; the centre tap 1/2 is implied
  double kaiser_beta{};           ///< window shape used
  double stopband_edge{};         ///< normalised, in (1/4, 1/2); the passband edge is 1/2 minus it
  double stopband_peak_db{};      ///< max of 20 log10 |H| over [stopband_edge, 1/2], dB (< 0)

  int side_count() const noexcept { return static_cast<int>(side_taps.size()); }    ///< K
  int length() const noexcept { return 4 * side_count() - 1; }                      ///< taps
  int delay_samples() const noexcept { return 2 * side_count() - 1; }               ///< at its rate
};

/// Zero-phase amplitude H(f) of a half-band with side taps g, f in cycles per sample.
double halfband_amplitude(std::span<const double> side_taps, double f) noexcept;

/// The shortest Kaiser-window half-band found whose |H| stays at or below -attenuation_db
/// over [stopband_edge, 1/2] (and so within 10^(-A/20) of 1 over [0, 1/2 - stopband_edge]).
/// Kaiser's formulas give the start; the window parameter is tried from A to A + 6 dB in
/// 1 dB steps and the length is raised until a dense-grid check (at least 32 points per
/// ripple) passes; the shortest result wins. Requires 1/4 < stopband_edge < 1/2 and
/// 20 <= attenuation_db <= 200; throws input_error otherwise.
halfband_design design_halfband(double stopband_edge, double attenuation_db);

/// Upsampling by two: zero insertion followed by the half-band, scaled by 2 so the passband
/// gain is 1. Output sample 2n+j (j = 0, 1) is computed from inputs up to n, so the
/// processor is causal; its delay is 2K-1 samples at the output rate ((2K-1)/2 input
/// samples). Streaming: state is kept between calls, any block length, no allocation.
class halfband_interpolator {
 public:
  explicit halfband_interpolator(const halfband_design& design);

  /// Clears the history (as if preceded by silence).
  void reset() noexcept;
  /// Requires out.size() == 2 * in.size() (unchecked: the caller sizes the buffers).
  void process(std::span<const double> in, std::span<double> out) noexcept;

 private:
  std::vector<double> taps_;  // 2 g_i
  std::vector<double> line_;  // 2K-1 inputs of history, then the piece being processed
  std::size_t half_;          // K
};

/// Downsampling by two: the half-band followed by keeping the even-indexed samples. Output
/// n is computed from inputs up to 2n+1 (input 2n+1 is held for later outputs). Delay 2K-1
/// samples at the input rate ((2K-1)/2 output samples). Same streaming contract.
class halfband_decimator {
 public:
  explicit halfband_decimator(const halfband_design& design);

  void reset() noexcept;
  /// Requires in.size() == 2 * out.size() (unchecked).
  void process(std::span<const double> in, std::span<double> out) noexcept;

 private:
  std::vector<double> taps_;  // g_i
  std::vector<double> even_;  // 2K-1 even-indexed inputs of history, then the piece
  std::vector<double> odd_;   // K odd-indexed inputs of history, then the piece
  std::size_t half_;          // K
};

}  // namespace pinchoff::dsp
