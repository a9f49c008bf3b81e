#pragma once
// Gaussian noise of a given power spectral density, streamed (render's modelled hiss).
//
// The shape: a linear-phase FIR of n taps (n a power of two) whose magnitude at the bins
// k * rate / n is A_k = sqrt(S_k * rate / 2), S_k the one-sided density wanted there
// (V^2/Hz): the inverse DFT of A (a real, even sequence), centred and tapered by a Hann
// window. Fed with white noise of unit variance, whose one-sided density is 2 / rate, it
// gives S_k at the bins (Parseval: the variance is sum h^2 = (1/n) sum over the whole
// circle of A_k^2, which is the integral of S from 0 to rate/2 as the bins sample it); the
// taper smooths the shape over about two bins, which changes nothing of a noise spectrum
// that varies slowly from bin to bin (a density that drops to 0 in one bin, at DC say,
// is smeared over its neighbours: give the DC bin its neighbour's value instead).
// `variance()` is the exact variance of the output.
//
// The filter runs by overlap-add: blocks of n white samples, transforms of 2n (KissFFT,
// complex, both directions). The white samples are Gaussian by the Box-Muller transform of
// xoshiro256** (Blackman & Vigna, "Scrambled linear pseudorandom number generators", ACM
// TOMS 47(4), 2021), seeded through splitmix64, so a seed gives the same noise on every
// platform and compiler (up to the last bits of the library's log, sin and cos). The
// first block is run and dropped at construction, so the output is stationary from its
// first sample.
#include <complex>
#include <cstddef>
#include <cstdint>
#include <memory>
#include <span>
#include <vector>

namespace pinchoff::dsp {

/// The filter length for a rate: the smallest power of two whose bins are at most 3 Hz
/// apart, at most 65536 (5.9 Hz at 384 kHz, 11.7 Hz at 768 kHz).
std::size_t shaped_noise_length(double rate_hz) noexcept;

/// The shaping filter, shared by every stream of one shape (its transforms are const).
class noise_shape {
 public:
  /// density_v2_hz: n/2 + 1 values, S at the bins k * rate_hz / n (k = 0 .. n/2), n a power
  /// of two from 4; every value finite and >= 0. Throws internal_error otherwise.
  noise_shape(std::span<const double> density_v2_hz, double rate_hz);
  ~noise_shape();
  std::size_t length() const noexcept { return n_; }
  double rate_hz() const noexcept { return rate_; }
  /// The variance of the noise it makes, V^2 (sum of the taps squared).
  double variance() const noexcept { return variance_; }
  const std::vector<double>& taps() const noexcept { return taps_; }

 private:
  friend class shaped_noise;
  struct plan;
  std::size_t n_;
  double rate_, variance_{};
  std::vector<double> taps_;
  std::vector<std::complex<double>> spectrum_;  // of the taps padded to 2n
  std::unique_ptr<plan> plan_;
};

/// One stream of noise of a shape, from its own seed.
class shaped_noise {
 public:
  shaped_noise(std::shared_ptr<const noise_shape> shape, std::uint64_t seed);
  /// Writes the next out.size() samples.
  void generate(std::span<double> out);
  const noise_shape& shape() const noexcept { return *shape_; }

 private:
  void next_block();
  double gaussian();
  std::shared_ptr<const noise_shape> shape_;
  std::uint64_t s_[4]{};
  double spare_{};
  bool has_spare_{false};
  std::vector<std::complex<double>> work_, freq_;
  std::vector<double> tail_, ready_;
  std::size_t used_{};
};

/// A seed for stream `index` of a job seeded `seed` (splitmix64 of both): streams of one
/// job never share their noise.
std::uint64_t stream_seed(std::uint64_t seed, std::uint64_t index) noexcept;

}  // namespace pinchoff::dsp
