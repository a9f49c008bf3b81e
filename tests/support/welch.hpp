#pragma once
// Welch's power spectral density estimate (Welch, IEEE Trans. Audio Electroacoust. 15(2),
// 70-73, 1967) for the checks of modelled noise: non-overlapping Hann-windowed segments of
// `segment` samples, each bin p_k = 2 |X_k|^2 / (fs sum w^2) (one-sided, V^2/Hz), averaged
// over the segments.
//
// Its statistical error, for Gaussian noise whose density is smooth over a few bins: each
// bin of one segment is exponentially distributed (a chi-square of 2 degrees of freedom),
// so K segments give a relative standard error of 1/sqrt(K) a bin. Adjacent bins of one
// Hann segment are correlated: the window's squared spectrum has the coefficients 3/8,
// -1/4, 1/16 (w^2 = 3/8 - 1/2 cos + 1/8 cos 2), so the correlation of X_k with X_{k+1}
// is -2/3 and with X_{k+2} is 1/6, and of their powers 4/9 and 1/36 (for Gaussian X the
// covariance of |X_i|^2 and |X_j|^2 is |cov(X_i, X_j)|^2); none farther. The sum of B
// adjacent bins then has a relative standard error of at most sqrt((1 + 8/9 + 1/18) / (B K)).
#include <cmath>
#include <cstddef>
#include <numbers>
#include <span>
#include <vector>

#include "dsp/fft.hpp"

namespace pinchoff::test {

struct welch_estimate {
  double fs_hz{}, df_hz{};
  int segments{};
  std::vector<double> density;  ///< V^2/Hz at k * df_hz, k = 0 .. segment/2

  /// The power in the bins from lo_hz to hi_hz (bin centres), V^2, and how many bins.
  double band_power(double lo_hz, double hi_hz, int* bins = nullptr) const {
    double p = 0.0;
    int b = 0;
    for (std::size_t k = 1; k + 1 < density.size(); ++k) {
      const double f = static_cast<double>(k) * df_hz;
      if (f >= lo_hz && f <= hi_hz) p += density[k] * df_hz, ++b;
    }
    if (bins) *bins = b;
    return p;
  }
  /// The relative standard error of band_power over `bins` bins (see the file comment).
  double band_relative_error(int bins) const {
    return std::sqrt((1.0 + 8.0 / 9.0 + 1.0 / 18.0) / (static_cast<double>(bins) * segments));
  }
};

inline welch_estimate welch(std::span<const double> x, double fs_hz, std::size_t segment) {
  welch_estimate w;
  w.fs_hz = fs_hz;
  w.df_hz = fs_hz / static_cast<double>(segment);
  w.density.assign(segment / 2 + 1, 0.0);
  const dsp::real_fft fft(segment);
  std::vector<double> win(segment), buf(segment);
  double sum_w2 = 0.0;
  for (std::size_t t = 0; t < segment; ++t) {
    win[t] = 0.5 - 0.5 * std::cos(2.0 * std::numbers::pi * static_cast<double>(t) / static_cast<double>(segment));
    sum_w2 += win[t] * win[t];
  }
  for (std::size_t s = 0; (s + 1) * segment <= x.size(); ++s) {
    for (std::size_t t = 0; t < segment; ++t) buf[t] = x[s * segment + t] * win[t];
    const auto X = fft.forward(buf);
    for (std::size_t k = 0; k < X.size(); ++k) w.density[k] += 2.0 * std::norm(X[k]) / (fs_hz * sum_w2);
    ++w.segments;
  }
  for (double& d : w.density) d /= w.segments;
  return w;
}

}  // namespace pinchoff::test
