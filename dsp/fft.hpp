#pragma once
// Forward DFT of a real sequence, double precision, over KissFFT's header-only C++
// template (kissfft<double>). One object plans one size; it owns the plan (twiddles and
// factorisation), so there is no global cache to clean up.
//
// Definition (no scaling, negative exponent):
//   X[k] = sum_{t=0}^{n-1} x[t] exp(-2 pi i k t / n),   k = 0 .. n/2   (n/2 + 1 bins)
// n/2 is integer division, so an odd n gives (n+1)/2 bins and has no Nyquist bin.
// Scaling consequences: X[0] = n * mean(x); a sine of peak amplitude A exactly on bin k
// (0 < k < n/2) gives |X[k]| = A n / 2; a cosine on the Nyquist bin (even n) gives
// |X[n/2]| = A n. Bin k sits at k * fs / n hertz.
//
// Any n >= 1 is valid and costs O(n log n). The complex length c (n/2 for even n, whose
// samples are fed as interleaved pairs and separated by the real-input post-processing; n
// for odd n) runs directly on KissFFT's radix 2, 3, 4 and 5 butterflies when it has no
// other prime factor (lengths such as 384 * k, whole cycles of 1 kHz at 384 kHz). Any other
// c (a prime record length, say) goes through Bluestein's chirp: a circular convolution done
// by transforms of the smallest 5-smooth length L >= 2c - 1, about three such transforms a
// call, with the chirp and its spectrum kept in the plan (about 40 L bytes, and up to 48 L
// bytes of work a call). A generic radix-p butterfly, O(p) a point, is never run.
//
// Accuracy: the norm-wise error is about eps * log2(n) relative to ||X||_2 (Higham,
// Accuracy and Stability of Numerical Algorithms, 2nd ed., 2002, Thm 24.2; from memory);
// the chirp path adds the error of three length-L transforms.
//
// Thread safety: forward() is const and keeps no state in the plan (the butterflies used
// keep none; the work buffers are the calling thread's own, kept between its calls up to
// 4 MB), so one plan may be used by several threads at once.
#include <complex>
#include <cstddef>
#include <memory>
#include <span>
#include <vector>

namespace pinchoff::dsp {

class real_fft {
 public:
  /// Plans a transform of `n` real samples. Throws input_error when n == 0.
  explicit real_fft(std::size_t n);
  ~real_fft();
  real_fft(const real_fft& other);
  real_fft& operator=(const real_fft& other);
  real_fft(real_fft&&) noexcept;
  real_fft& operator=(real_fft&&) noexcept;

  /// Number of real input samples.
  std::size_t size() const noexcept { return n_; }
  /// Number of complex output bins, n/2 + 1.
  std::size_t bins() const noexcept { return n_ / 2 + 1; }

  /// Writes the n/2 + 1 bins of x into `out`. Requires x.size() == size() and
  /// out.size() == bins(); otherwise throws internal_error (a caller bug, not user input).
  void forward(std::span<const double> x, std::span<std::complex<double>> out) const;

  /// Same, returning a new vector of bins() values.
  std::vector<std::complex<double>> forward(std::span<const double> x) const;

  /// The largest prime factor of the length the plan transforms (c, or L through the chirp):
  /// at most 5 for every n, so every stage is a radix 2..5 butterfly (1 for n <= 2).
  std::size_t largest_radix() const noexcept;
  /// The length the plan transforms: c directly, or L >= 2c - 1 through the chirp.
  std::size_t transform_length() const noexcept;
  /// Whether the plan goes through the chirp (the complex length has a prime factor above 5).
  bool uses_chirp() const noexcept;

 private:
  struct plan;
  std::size_t n_;
  std::unique_ptr<plan> plan_;
};

/// The length a plan of n real samples transforms (real_fft(n).transform_length(), without
/// building the plan): c = n/2 (even n) or n (odd n) when c is 5-smooth, else the smallest
/// 5-smooth L >= 2c - 1.
std::size_t transform_length(std::size_t n);

/// Bytes of work one forward() call of a plan of n uses: none on the direct path of an even
/// n, copies in and out (2n complex) for an odd n, and through the chirp two length-L
/// buffers and the length-c ones. They are the calling thread's, kept for its next call
/// when they total at most 4 MB.
std::size_t forward_work_bytes(std::size_t n);

/// The largest prime factor of n (1 for n <= 1).
std::size_t largest_prime_factor(std::size_t n);

}  // namespace pinchoff::dsp
