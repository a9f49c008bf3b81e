// Tests of the half-band building blocks: the Bessel function the Kaiser window needs, the
// structure and measured response of designed filters, and the polyphase interpolator and
// decimator against the plain convolution they stand for.
#include <doctest/doctest.h>

#include <cmath>
#include <complex>
#include <cstddef>
#include <numbers>
#include <vector>

#include "base/units.hpp"
#include "base/error.hpp"
#include "dsp/halfband.hpp"

namespace test_halfband {

using namespace pinchoff::dsp;
using namespace pinchoff::base;

namespace {

// The full causal impulse response h[t], t = 0 .. 4K-2, centre at 2K-1.
std::vector<double> full_taps(const halfband_design& d) {
  const int k = d.side_count();
  const int c = 2 * k - 1;
  std::vector<double> h(static_cast<std::size_t>(d.length()), 0.0);
  h[static_cast<std::size_t>(c)] = 0.5;
  for (int i = 0; i < k; ++i) {
    h[static_cast<std::size_t>(c + 2 * i + 1)] = d.side_taps[static_cast<std::size_t>(i)];
    h[static_cast<std::size_t>(c - 2 * i - 1)] = d.side_taps[static_cast<std::size_t>(i)];
  }
  return h;
}

// |sum_t h[t] exp(-2 pi i f t)| summed in long double: an oracle independent of the
// cosine recurrence in halfband_amplitude.
long double dtft_magnitude(const std::vector<double>& h, long double f) {
  std::complex<long double> s = 0;
  for (std::size_t t = 0; t < h.size(); ++t) {
    const long double a = -2.0L * std::numbers::pi_v<long double> * f * static_cast<long double>(t);
    s += static_cast<long double>(h[t]) * std::complex<long double>(std::cos(a), std::sin(a));
  }
  return std::abs(s);
}

}  // namespace

TEST_CASE("bessel_i0 matches tabulated values and its integral form") {
  struct row {
    const char* source;
    double x, i0;
  };
  const row rows[] = {
      {"A&S Table 9.8 (from memory), x = 0", 0.0, 1.0},
      {"A&S Table 9.8 (from memory), x = 0.5", 0.5, 1.0634833707413235},
      {"A&S Table 9.8 (from memory), x = 1", 1.0, 1.2660658777520083},
      {"A&S Table 9.8 (from memory), x = 2", 2.0, 2.2795853023360673},
      {"A&S Table 9.8 (from memory), x = 5", 5.0, 27.239871823604447},
      {"A&S Table 9.8 (from memory), x = 10", 10.0, 2815.7166284662545},
      {"A&S Table 9.8 (from memory), x = 20", 20.0, 43558282.559553533},
  };
  for (const row& r : rows) {
    CAPTURE(r.source);
    // The series sums positive terms: a few ulps of relative error.
    CHECK(bessel_i0(r.x) == doctest::Approx(r.i0).epsilon(1e-14));
    // A&S 9.6.16: I0(x) = (1/pi) int_0^pi exp(x cos t) dt. The trapezoid rule on this
    // smooth periodic integrand converges geometrically; 200 points are exact to rounding.
    long double sum = 0;
    const int m = 200;
    for (int j = 0; j < m; ++j)
      sum += std::exp(static_cast<long double>(r.x) * std::cos(std::numbers::pi_v<long double> * (j + 0.5L) / m));
    CHECK(bessel_i0(r.x) == doctest::Approx(static_cast<double>(sum / m)).epsilon(1e-14));
  }
}

TEST_CASE("a designed half-band has the half-band structure and meets its stopband, measured by a DTFT") {
  struct row {
    const char* source;
    double stopband_edge, attenuation_db;
  };
  const row rows[] = {
      {"closed form: half-band symmetry; 44.1 kHz first stage (24.1 / 88.2)", 24100.0 / 88200.0, 120.0},
      {"closed form: half-band symmetry; 48 kHz first stage (28 / 96)", 28000.0 / 96000.0, 120.0},
      {"closed form: half-band symmetry; wide transition (0.45)", 0.45, 100.0},
      {"closed form: half-band symmetry; 60 dB", 0.3, 60.0},
  };
  for (const row& r : rows) {
    CAPTURE(r.source);
    const halfband_design d = design_halfband(r.stopband_edge, r.attenuation_db);
    const std::vector<double> h = full_taps(d);
    // Length within a few taps of Kaiser's estimate (Kaiser 1974): the estimate is known to
    // be good to a few taps, and the search only shortens or lengthens from it.
    const int estimate = kaiser_length_estimate(r.attenuation_db, 2.0 * r.stopband_edge - 0.5);
    CHECK(std::abs(d.length() - estimate) <= 8);
    // Measured on an independent grid of 1501 points (about 40 a ripple for the longest filter here) plus the band edges. The design
    // check uses 32 points a ripple; a peak between grid points is missed by at most
    // 0.04 dB there, so allow 0.1 dB against the requested figure.
    const long double limit = std::pow(10.0L, -(r.attenuation_db - 0.1) / 20.0L);
    long double worst_stop = 0, worst_pass = 0;
    for (int j = 0; j <= 1500; ++j) {
      const long double f = r.stopband_edge + (0.5L - r.stopband_edge) * j / 1500.0L;
      worst_stop = std::max(worst_stop, dtft_magnitude(h, f));
      worst_pass = std::max(worst_pass, std::abs(dtft_magnitude(h, 0.5L - f) - 1.0L));
    }
    CHECK(worst_stop <= limit);
    // H(f) + H(1/2 - f) = 1 (closed form) puts the passband error at the same level.
    CHECK(worst_pass <= limit);
    CHECK(dtft_magnitude(h, 0.0L) == doctest::Approx(1.0).epsilon(static_cast<double>(limit)));
  }
}

TEST_CASE("design_halfband rejects edges outside the half-band range") {
  CHECK_THROWS_AS(design_halfband(0.25, 100.0), pinchoff::input_error);
  CHECK_THROWS_AS(design_halfband(0.5, 100.0), pinchoff::input_error);
  CHECK_THROWS_AS(design_halfband(0.3, 10.0), pinchoff::input_error);
}

TEST_CASE("the polyphase interpolator and decimator equal zero-stuffing and plain convolution") {
  // Oracle: y = 2 (h * u) with u the zero-stuffed input, and y[n] = (h * v)[2n], written out
  // directly. The polyphase forms skip zeros and fold symmetric taps, which changes the
  // order of additions: allow 1e-15 relative to the sum of |terms| (a few ulps).
  const halfband_design d = design_halfband(0.36, 110.0);
  const std::vector<double> h = full_taps(d);
  std::vector<double> x(601);  // more than one internal piece (256)
  for (std::size_t n = 0; n < x.size(); ++n) x[n] = std::sin(0.37 * static_cast<double>(n * n % 101)) + 0.1;

  SUBCASE("interpolator") {
    halfband_interpolator up(d);
    std::vector<double> y(2 * x.size());
    up.process(x, y);
    for (std::size_t m = 0; m < y.size(); ++m) {
      double ref = 0, scale = 0;
      for (std::size_t t = 0; t < h.size() && t <= m; ++t)
        if ((m - t) % 2 == 0) {
          ref += 2.0 * h[t] * x[(m - t) / 2];
          scale += std::abs(2.0 * h[t] * x[(m - t) / 2]);
        }
      CAPTURE(m);
      CHECK(std::abs(y[m] - ref) <= 1e-15 * scale + 1e-300);
    }
  }
  SUBCASE("decimator") {
    halfband_decimator down(d);
    std::vector<double> y(x.size() / 2);
    down.process(std::span<const double>(x).first(2 * y.size()), y);
    for (std::size_t n = 0; n < y.size(); ++n) {
      double ref = 0, scale = 0;
      for (std::size_t t = 0; t < h.size() && t <= 2 * n; ++t) {
        ref += h[t] * x[2 * n - t];
        scale += std::abs(h[t] * x[2 * n - t]);
      }
      CAPTURE(n);
      CHECK(std::abs(y[n] - ref) <= 1e-15 * scale + 1e-300);
    }
  }
}

}  // namespace test_halfband
