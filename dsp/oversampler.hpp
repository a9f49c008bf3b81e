#pragma once
// Integer-factor oversampling (2x, 4x, 8x, 16x, 32x, 64x) for running a nonlinear model at a higher
// rate: upsample the base-rate signal, process at factor * base rate, downsample back.
//
// Method: a cascade of log2(factor) polyphase half-band FIR stages (dsp/halfband.hpp),
// each designed in code by the Kaiser window method (Kaiser 1974; formulas from Oppenheim &
// Schafer, from memory), with a different filter per stage: the higher a stage's rate, the
// wider its transition band and the shorter its filter (Lyons, "Optimizing the half-band
// filters in multistage decimation and interpolation", 2016). Stage s (s = 1 .. log2 factor)
// runs at 2^s * base rate on its high side.
//
// Design targets (base rate fb, audio band 0 .. 20 kHz):
// - Passband 0 .. 20 kHz, flat within 0.01 dB for base rates 44.1 to 192 kHz. Above 20 kHz
//   the response is not held flat: content between 20 kHz and fb/2 lies in the first
//   stage's transition band and is partly removed by a round trip (at 96 kHz and above,
//   most of the band above 20 kHz).
// - Images that upsampling leaves above fb/2 (which a following nonlinearity could fold
//   back) and components that downsampling would alias into 0 .. 20 kHz rejected by at
//   least 100 dB. A component within 20 kHz of a multiple of 2^(s-1) fb is what stage s
//   must reject, so stage s has its stopband edge at 2^(s-1) fb - 20 kHz and, being a
//   half-band, its passband edge at 20 kHz: at 44.1 kHz the first stage's transition band is
//   20 .. 24.1 kHz; the later ones are far wider.
// - Up- then downsampling with nothing between returns the input within -100 dB. Every stage
//   adds its passband error (10^(-A/20) at most) twice; at A = 100 dB a 16x round trip
//   could be off by 8e-5 (-82 dB). So every stage is designed for A = 120 dB, which also
//   leaves 20 dB of margin on the image and alias figure.
// Tap counts found (stage 1 first; each a half-band of 4K-1 taps, K multiplies per output
// pair; each stage's measured stopband peak is -120.2 to -121.2 dB):
//   44.1 kHz: 171, 31, 23, 23, 19, 19    48 kHz: 99, 31, 23, 23, 19, 19
//   96 kHz:    31, 23, 23, 19, 19, 19   192 kHz: 23, 23, 19, 19, 19, 19
// (Later stages stop shrinking at 19-23 taps: even with the widest transition band a
// half-band allows, Kaiser's estimate asks for 17 taps at 120 dB.)
// Measured (tests/dsp/test_oversampler.cpp, 44.1 and 48 kHz, every factor 2x to 64x): passband
// within 7.5e-5 dB up, down and round trip; images above fb/2 and in-band alias residue at
// most -120.2 dB; round-trip residual of an in-band multi-tone at most -105.7 dB.
//
// Latency: stage s delays by (2K_s - 1)/2 samples of its low rate, (2K_s - 1)/2^s base
// samples, in each direction. Those sums are fractions of a base sample. So that callers can
// compensate with a whole-sample shift, the downsampler adds a pure delay of p < factor
// high-rate samples before its first stage, making the round trip (upsample then
// downsample) a whole number of base-rate samples. Figures (base-rate samples, exact):
//   factor                1     2        4         8          16          32           64
//   44.1 kHz  up          0   42.5     46.25     47.625     48.3125     48.59375     48.734375
//             down        0   42.5     46.75     48.375     48.6875     49.40625     49.265625
//             round trip  0   85       93        96         97          98           98
//   48 kHz    up          0   24.5     28.25     29.625     30.3125     30.59375     30.734375
//             down        0   24.5     28.75     30.375     30.6875     31.40625     31.265625
//             round trip  0   49       57        60         61          62           62
//   96 kHz    round trip  0   15       21        24         25          25           26
//   192 kHz   round trip  0   11       17        19         20          21           21
// Other rates: call the accessors; latency depends on the base rate because the filters do.
//
// Why a half-band cascade rather than libsoxr: the latency here follows exactly from the
// tap counts, so the round trip is a fixed, documented whole number of samples that a caller
// compensates with an integer shift; only power-of-two factors are needed, which half-bands
// serve at the lowest cost (every other tap is zero and the rest are symmetric); it adds no
// dependency to the list in the design; and every stage can be designed and tested on its
// own. The cost is small: 70 to 90 multiplies a base sample each way at 8x.
//
// Streaming: state is kept between calls; any block length (including 0 and 1); no
// allocation after construction (work is done in chunks through two buffers sized in the
// constructor). Double precision throughout. Upsampler and downsampler have separate state,
// so one object serves one channel's round trip. Factor 1 passes samples through unchanged.
#include <span>
#include <vector>

#include "dsp/halfband.hpp"

namespace pinchoff::dsp {

class oversampler {
 public:
  /// Stopband attenuation each stage is designed for (see the header comment).
  static constexpr double stage_attenuation_db = 120.0;
  /// Top of the band that is kept flat and alias-free.
  static constexpr double passband_edge_hz = 20000.0;

  /// factor: 1, 2, 4, 8, 16, 32 or 64. base_rate_hz: above 40 kHz (so that a transition band
  /// exists above 20 kHz) and at most 1 MHz. Throws input_error otherwise.
  oversampler(int factor, double base_rate_hz);

  int factor() const noexcept { return factor_; }
  double base_rate_hz() const noexcept { return base_rate_hz_; }
  /// The stage designs, lowest rate (stage 1) first; empty for factor 1.
  const std::vector<halfband_design>& stage_designs() const noexcept { return designs_; }

  /// Delay of upsample(): output sample m (at factor * fb) corresponds to input time
  /// m / factor - upsample_latency. Exact (a multiple of 1/factor).
  double upsample_latency_base_samples() const noexcept { return up_latency_; }
  /// Delay of downsample(), including the padding delay. Exact.
  double downsample_latency_base_samples() const noexcept { return down_latency_; }
  /// Round trip, upsample then downsample: a whole number of base-rate samples.
  int latency_base_samples() const noexcept { return latency_; }
  /// Multiplies per base-rate sample for upsample() plus downsample() (from the tap counts).
  double multiplies_per_base_sample() const noexcept;

  /// Clears all filter state (as if preceded by silence).
  void reset() noexcept;

  /// Requires out.size() == factor() * in.size(); throws internal_error otherwise.
  void upsample(std::span<const double> in, std::span<double> out);
  /// Requires in.size() == factor() * out.size(); throws internal_error otherwise.
  void downsample(std::span<const double> in, std::span<double> out);

 private:
  int factor_;
  double base_rate_hz_;
  std::vector<halfband_design> designs_;
  std::vector<halfband_interpolator> up_;    // stage 1 first
  std::vector<halfband_decimator> down_;     // stage 1 first (run last)
  std::vector<double> pad_line_;             // downsampler's padding delay: the last samples held
  std::vector<double> scratch_a_;
  std::vector<double> scratch_b_;
  double up_latency_{0.0};
  double down_latency_{0.0};
  int latency_{0};
};

}  // namespace pinchoff::dsp
