// Shaped Gaussian noise (dsp/shaped_noise.hpp) against the density it is given: its exact
// variance against the closed-form integral of the density, and a long stream's Welch
// estimate (tests/support/welch.hpp) against the density within the estimate's own
// statistical error.
#include <cmath>
#include <memory>
#include <numbers>
#include <vector>

#include <doctest/doctest.h>

#include "dsp/shaped_noise.hpp"
#include "support/welch.hpp"

namespace test_shaped_noise {

namespace {
using namespace pinchoff;

// A white floor plus a first-order low-pass shelf: S(f) = s0 / (1 + (f / fc)^2) + s1.
struct test_density {
  double s0{4e-16}, fc{500.0}, s1{1e-18};
  double at(double f) const { return s0 / (1.0 + (f / fc) * (f / fc)) + s1; }
  // closed form: the integral from 0 to F is s0 fc atan(F / fc) + s1 F
  double integral(double lo, double hi) const {
    return s0 * fc * (std::atan(hi / fc) - std::atan(lo / fc)) + s1 * (hi - lo);
  }
};

std::shared_ptr<const dsp::noise_shape> shape_of(const test_density& d, double fs) {
  const std::size_t n = dsp::shaped_noise_length(fs);
  std::vector<double> s(n / 2 + 1);
  for (std::size_t k = 0; k < s.size(); ++k) s[k] = d.at(static_cast<double>(k) * fs / static_cast<double>(n));
  return std::make_shared<const dsp::noise_shape>(s, fs);
}
}  // namespace

TEST_CASE("shaped noise: its variance is the integral of the density it is given") {
  const test_density d;
  for (const double fs : {44100.0, 48000.0, 96000.0}) {
    CAPTURE(fs);
    const auto shape = shape_of(d, fs);
    CHECK(shape->rate_hz() / static_cast<double>(shape->length()) <= 3.0);
    // The bins sample the density from 0 to fs/2 (a trapezoid sum of it).
    const double expect = d.integral(0.0, fs / 2.0);
    // The sampled sum differs from the integral by the trapezoid rule's error on this grid
    // (far below 1e-5 for a corner 170 bins wide) and the taper's smoothing (the response
    // lasts 1/(2 pi fc) = 0.3 ms against a 0.17 s window): 1e-4 bounds both.
    CHECK(std::fabs(shape->variance() / expect - 1.0) < 1e-4);
  }
}

TEST_CASE("shaped noise: a long stream's spectrum matches the density (Welch)") {
  const test_density d;
  const double fs = 48000.0;
  auto shape = shape_of(d, fs);
  dsp::shaped_noise gen(shape, 7);
  std::vector<double> x(static_cast<std::size_t>(30 * fs));
  // In uneven pieces: the stream does not depend on how it is asked for.
  for (std::size_t at = 0, piece = 1; at < x.size(); at += piece, piece = piece * 3 % 10007 + 1)
    gen.generate(std::span<double>(x).subspan(at, std::min(piece, x.size() - at)));
  const test::welch_estimate w = test::welch(x, fs, 4096);
  REQUIRE(w.segments == 351);
  // Octave bands, 5 standard errors of each band's estimate (the test's bound).
  for (double centre = 31.25; centre <= 16000.0; centre *= 2.0) {
    const double lo = centre / std::numbers::sqrt2, hi = centre * std::numbers::sqrt2;
    int bins = 0;
    const double got = w.band_power(lo, hi, &bins);
    double expect = 0.0;  // the density at the same bin centres
    for (int k = 1; static_cast<double>(k) * w.df_hz <= hi; ++k)
      if (static_cast<double>(k) * w.df_hz >= lo) expect += d.at(k * w.df_hz) * w.df_hz;
    CAPTURE(centre);
    CAPTURE(bins);
    CAPTURE(got / expect);
    CHECK(std::fabs(got / expect - 1.0) < 5.0 * w.band_relative_error(bins));
  }
  // The whole stream's mean square against the variance. Its standard error, for Gaussian
  // noise of autocorrelation r over N samples: sqrt(2 sum_k r_k^2 / N) / r_0 (the sum over
  // every lag), computed from the density on the bins (Parseval: sum_k r_k^2 = (1/n) times
  // the sum over the circle of |A_k|^4, with A_k^2 = S_k fs / 2).
  double ms = 0.0;
  for (double v : x) ms += v * v;
  ms /= static_cast<double>(x.size());
  const std::size_t n = shape->length();
  double r2 = 0.0;
  for (std::size_t k = 1; k < n / 2; ++k) r2 += 2.0 * std::pow(d.at(k * fs / n) * fs / 2.0, 2);
  r2 += std::pow(d.at(fs / 2.0) * fs / 2.0, 2);
  r2 /= static_cast<double>(n);
  const double se = std::sqrt(2.0 * r2 / static_cast<double>(x.size())) / shape->variance();
  CAPTURE(ms / shape->variance());
  CAPTURE(se);
  CHECK(std::fabs(ms / shape->variance() - 1.0) < 5.0 * se);
}

TEST_CASE("shaped noise: a seed repeats its stream and two seeds differ") {
  const auto shape = shape_of(test_density{}, 48000.0);
  std::vector<double> a(5000), b(5000), c(5000);
  dsp::shaped_noise(shape, 11).generate(a);
  dsp::shaped_noise(shape, 11).generate(b);
  dsp::shaped_noise(shape, dsp::stream_seed(11, 1)).generate(c);
  CHECK(a == b);
  CHECK(a != c);
}

}  // namespace test_shaped_noise
