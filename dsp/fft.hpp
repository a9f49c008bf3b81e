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
// Any n >= 1 is valid. KissFFT factors n into 4, 2, 3, 5 and then generic odd radices;
// lengths such as 384 * k (whole cycles of 1 kHz at 384 kHz) factor well. A large prime
// factor p costs O(p) per output in its stage, so keep sizes smooth for speed.
// Even n uses the half-length complex transform plus KissFFT's real-input post-processing;
// odd n uses the full-length complex transform.
//
// Accuracy: the norm-wise error is about eps * log2(n) relative to ||X||_2 (Higham,
// Accuracy and Stability of Numerical Algorithms, 2nd ed., 2002, Thm 24.2; from memory).
//
// Thread safety: forward() is const but KissFFT keeps a mutable scratch buffer for radices
// above 5, so one object must not be used by two threads at once; give each thread a copy.
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

 private:
  struct plan;
  std::size_t n_;
  std::unique_ptr<plan> plan_;
};

}  // namespace pinchoff::dsp
