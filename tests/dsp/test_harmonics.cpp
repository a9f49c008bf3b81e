// Tests of coherent harmonic analysis against closed forms: synthetic records with known
// harmonic amplitudes, and the Fourier series of the square and triangle waves.
#include <doctest/doctest.h>

#include <cmath>
#include <limits>
#include <numbers>
#include <vector>

#include "base/units.hpp"
#include "base/error.hpp"
#include "dsp/fft.hpp"
#include "dsp/harmonics.hpp"

namespace test_harmonics {

using namespace pinchoff::dsp;
using namespace pinchoff::base;

namespace {

struct line {
  double harmonic;  // frequency as a multiple of the fundamental (need not be an integer)
  double amplitude_vpk;
  double phase_rad;
};

// dc + sum of a_i sin(2 pi h_i f0 t + phi_i) over a record of n samples holding `cycles` periods.
std::vector<double> synthesise(std::size_t n, std::size_t cycles, double dc, const std::vector<line>& lines) {
  std::vector<double> x(n, dc);
  for (const line& l : lines) {
    for (std::size_t t = 0; t < n; ++t) {
      const double turns = l.harmonic * static_cast<double>(cycles) * static_cast<double>(t) / static_cast<double>(n);
      // Reduce the phase in turns before scaling by 2 pi, so long records keep full precision.
      x[t] += l.amplitude_vpk * std::sin(2.0 * std::numbers::pi * (turns - std::floor(turns)) + l.phase_rad);
    }
  }
  return x;
}

// Amplitude error allowed from the FFT's rounding: the norm-wise bound 4 eps (log2 n + 1)
// (see test_fft.cpp) spread over the bins gives about 8 eps (log2 n + 1) rms(x) per line,
// plus about eps per sample from generating the signal. 1e-13 V covers records of a few
// thousand samples with rms near 1 V by a factor of about 5.
constexpr double amplitude_tol_v = 1e-13;

}  // namespace

TEST_CASE("coherent analysis reproduces known harmonic amplitudes, THD and the DC term") {
  // closed form: a record built from exact lines reads them back; THD from the definition
  // THD = sqrt(sum Hn^2)/H1 (IEC 61000-2-2 usage, CHECKS.md).
  const std::size_t n = 3840, cycles = 10;  // 1 kHz at 384 kHz
  const double fs = 384000.0;
  const std::vector<line> lines = {
      {1, 1.0, 0.3}, {2, 1e-2, 1.1}, {3, 1e-3, -0.4}, {5, 1e-4, 2.0}, {8, 3e-6, 0.0}};
  const auto x = synthesise(n, cycles, 0.25, lines);
  const harmonic_analysis r = analyse_coherent(x, fs, cycles);

  CHECK(r.fundamental_hz == doctest::Approx(1000.0).epsilon(1e-15));
  CHECK(std::abs(r.fundamental_vpk - 1.0) <= amplitude_tol_v);
  CHECK(std::abs(r.dc_v - 0.25) <= amplitude_tol_v);
  REQUIRE(r.harmonics_vpk.size() == 9);
  CHECK(r.highest_harmonic == 10);

  struct row {
    const char* source;
    int harmonic;
    double vpk;
  };
  const row rows[] = {
      {"closed form: synthetic line", 2, 1e-2}, {"closed form: synthetic line", 3, 1e-3},
      {"closed form: absent line", 4, 0.0},     {"closed form: synthetic line", 5, 1e-4},
      {"closed form: absent line", 6, 0.0},     {"closed form: synthetic line", 8, 3e-6},
      {"closed form: absent line", 10, 0.0},
  };
  for (const row& rw : rows) {
    INFO(std::string(rw.source));
    CAPTURE(rw.harmonic);
    const auto i = static_cast<std::size_t>(rw.harmonic - 2);
    CHECK(std::abs(r.harmonics_vpk[i] - rw.vpk) <= amplitude_tol_v);
    if (rw.vpk > 0.0)  // 1e-13 V on a 3e-6 V line moves its level by 3e-7 dB
      CHECK(std::abs(r.harmonics_dbc[i] - 20.0 * std::log10(rw.vpk)) <= 1e-6);
    else
      CHECK(r.harmonics_dbc[i] < -200.0);  // only rounding (about 1e-16 V) is left there
  }

  const double thd = std::sqrt(1e-4 + 1e-6 + 1e-8 + 9e-12);
  CHECK(r.thd_ratio == doctest::Approx(thd).epsilon(1e-10));
  CHECK(r.thd_percent == doctest::Approx(100.0 * thd).epsilon(1e-10));
  CHECK(r.thd_db == doctest::Approx(20.0 * std::log10(thd)).epsilon(1e-10));
  CHECK(r.thd_r_ratio == doctest::Approx(thd / std::sqrt(1.0 + thd * thd)).epsilon(1e-10));
  // even: H2, H8; odd: H3, H5
  CHECK(r.even_odd_ratio == doctest::Approx((1e-4 + 9e-12) / (1e-6 + 1e-8)).epsilon(1e-8));
  CHECK(r.alias_dbc < -250.0);  // no non-harmonic line: rounding only
  CHECK(r.largest_spur_dbc < -250.0);
}

TEST_CASE("band-limited square and triangle waves give the THD of their Fourier series") {
  // Fourier series (any text on Fourier series; CHECKS.md): square wave = (4/pi) sum over odd
  // n of sin(n w t)/n, so Hn/H1 = 1/n; triangle = (8/pi^2) sum over odd n of (-1)^((n-1)/2)
  // sin(n w t)/n^2, so Hn/H1 = 1/n^2. Band-limited: only harmonics inside the bandwidth.
  struct row {
    const char* source;
    double f0_hz;
    int harmonics;         // N given to the analysis
    int top_harmonic;      // highest harmonic synthesised (beyond the bandwidth on purpose)
    int power;             // 1 square, 2 triangle
    double full_series;    // THD of the infinite series
  };
  const double sq_full = std::sqrt(std::numbers::pi * std::numbers::pi / 8.0 - 1.0);       // 48.343 %
  const double tri_full = std::sqrt(std::pow(std::numbers::pi, 4) / 96.0 - 1.0);          // 12.115 %
  const row rows[] = {
      {"Fourier series, square, N = 10 at 1 kHz", 1000.0, 10, 31, 1, sq_full},
      {"Fourier series, square, 20 kHz band at 100 Hz", 100.0, 400, 301, 1, sq_full},
      {"Fourier series, triangle, N = 10 at 1 kHz", 1000.0, 10, 31, 2, tri_full},
      {"Fourier series, triangle, 20 kHz band at 100 Hz", 100.0, 400, 301, 2, tri_full},
  };
  CHECK(100.0 * sq_full == doctest::Approx(48.343).epsilon(1e-5));   // CHECKS.md, 5 digits
  CHECK(100.0 * tri_full == doctest::Approx(12.115).epsilon(1e-4));  // CHECKS.md, 5 digits
  const double fs = 384000.0;
  for (const row& r : rows) {
    INFO(std::string(r.source));
    const std::size_t n = static_cast<std::size_t>(fs / r.f0_hz);  // one cycle
    std::vector<line> lines;
    for (int h = 1; h <= r.top_harmonic; h += 2) {
      const double sign = (r.power == 2 && (h / 2) % 2 == 1) ? -1.0 : 1.0;
      lines.push_back({static_cast<double>(h), sign / std::pow(static_cast<double>(h), r.power), 0.0});
    }
    const auto x = synthesise(n, 1, 0.0, lines);
    const harmonic_analysis a = analyse_coherent(x, fs, 1, {r.harmonics, 20000.0});
    // Expected: harmonics up to min(N, 20 kHz / f0).
    const int top = std::min(r.harmonics, static_cast<int>(20000.0 / r.f0_hz));
    CHECK(a.highest_harmonic == top);
    double sum = 0.0;
    for (int h = 3; h <= top; h += 2) sum += std::pow(static_cast<double>(h), -2.0 * r.power);
    CHECK(a.thd_ratio == doctest::Approx(std::sqrt(sum)).epsilon(1e-11));
    CHECK(a.even_odd_ratio < 1e-20);
    // The partial sum approaches the full series from below; the missing tail of
    // sum over odd n > top of n^-2p is below 1/((2p-1) 2 top^(2p-1)) (integral bound).
    const double tail = 1.0 / ((2.0 * r.power - 1.0) * 2.0 * std::pow(static_cast<double>(top), 2.0 * r.power - 1.0));
    CHECK(a.thd_ratio <= r.full_series);
    CHECK(a.thd_ratio * a.thd_ratio >= r.full_series * r.full_series - tail);
  }
}

TEST_CASE("non-harmonic lines show up in alias_dbc at their level; harmonics and out-of-band lines do not") {
  // closed form: power ratio of exact lines. 38400 samples hold 100 cycles of 1 kHz at
  // 384 kHz, so bins are 10 Hz apart and every line below sits exactly on a bin.
  const std::size_t n = 38400, cycles = 100;
  const double fs = 384000.0;
  struct row {
    const char* source;
    std::vector<line> extra;
    double alias_dbc, largest_dbc;
  };
  const row rows[] = {
      {"closed form: one line at -80 dBc, 7.77 kHz", {{7.77, 1e-4, 0.2}}, -80.0, -80.0},
      {"closed form: -80 and -90 dBc lines add in power",
       {{7.77, 1e-4, 0.2}, {0.33, std::pow(10.0, -4.5), 1.0}},
       10.0 * std::log10(1e-8 + 1e-9), -80.0},
      {"closed form: line above the 20 kHz band is ignored", {{7.77, 1e-4, 0.2}, {25.01, 1e-2, 0.0}}, -80.0, -80.0},
      {"closed form: H15 is a harmonic, not a spur", {{7.77, 1e-4, 0.2}, {15.0, 1e-2, 0.0}}, -80.0, -80.0},
  };
  for (const row& r : rows) {
    INFO(std::string(r.source));
    std::vector<line> lines = {{1, 0.5, 0.0}, {3, 0.5e-3, 0.0}};
    for (line l : r.extra) {
      l.amplitude_vpk *= 0.5;  // levels relative to the 0.5 V fundamental
      lines.push_back(l);
    }
    const auto x = synthesise(n, cycles, 0.0, lines);
    const harmonic_analysis a = analyse_coherent(x, fs, cycles);
    CHECK(std::abs(a.alias_dbc - r.alias_dbc) <= 1e-6);
    CHECK(std::abs(a.largest_spur_dbc - r.largest_dbc) <= 1e-6);
    CHECK(std::abs(a.harmonics_dbc[1] - (-60.0)) <= 1e-6);  // H3 unaffected
    CHECK(a.thd_ratio == doctest::Approx(1e-3).epsilon(1e-8).scale(0));  // H15 is beyond N = 10
  }
}

TEST_CASE("harmonics beyond the bandwidth or at and above Nyquist are marked as not counted") {
  struct row {
    const char* source;
    double fs_hz;
    std::size_t n, cycles;
    double bandwidth_hz;
    int highest;
  };
  const row rows[] = {
      {"definition: 7 x 3 kHz = 21 kHz is above the 20 kHz band", 384000.0, 1280, 10, 20000.0, 6},
      {"definition: 5 x 5 kHz is above Nyquist at 48 kHz", 48000.0, 480, 50, 1e9, 4},
      {"definition: 4 x 6 kHz sits on the Nyquist bin and is excluded", 48000.0, 400, 50, 1e9, 3},
      {"definition: 10 kHz fundamental, H2 outside 15 kHz band", 48000.0, 480, 100, 15000.0, 1},
  };
  for (const row& r : rows) {
    INFO(std::string(r.source));
    const auto x = synthesise(r.n, r.cycles, 0.0, {{1, 1.0, 0.0}, {2, 0.1, 0.0}, {3, 0.01, 0.0}});
    const harmonic_analysis a = analyse_coherent(x, r.fs_hz, r.cycles, {10, r.bandwidth_hz});
    CHECK(a.highest_harmonic == r.highest);
    for (int h = 2; h <= 10; ++h) {
      CAPTURE(h);
      const auto i = static_cast<std::size_t>(h - 2);
      CHECK(std::isnan(a.harmonics_vpk[i]) == (h > r.highest));
      CHECK(std::isnan(a.harmonics_dbc[i]) == (h > r.highest));
    }
    if (r.highest == 1) {
      CHECK(a.thd_ratio == 0.0);
      CHECK(a.thd_db == db_floor);
      CHECK(std::isnan(a.even_odd_ratio));
    }
  }
}

TEST_CASE("even/odd ratio is infinite with only even harmonics, and a silent record gives NaN") {
  const std::size_t n = 3840, cycles = 10;
  const auto even_only = synthesise(n, cycles, 0.0, {{1, 1.0, 0.0}, {2, 0.1, 0.0}, {4, 0.01, 0.0}});
  const harmonic_analysis a = analyse_coherent(even_only, 384000.0, cycles);
  // Odd bins hold rounding only, ~1e-16 V: the ratio is then huge rather than infinite.
  CHECK(a.even_odd_ratio > 1e20);

  const std::vector<double> silence(n, 0.0);
  const harmonic_analysis s = analyse_coherent(silence, 384000.0, cycles);
  CHECK(s.fundamental_vpk == 0.0);
  CHECK(std::isnan(s.thd_ratio));
  CHECK(std::isnan(s.alias_dbc));
  CHECK(std::isnan(s.harmonics_dbc[0]));
  CHECK(std::isnan(s.even_odd_ratio));  // no even and no odd energy
}

TEST_CASE("coherent analysis refuses impossible records and settings") {
  const std::vector<double> x(384, 0.0);
  CHECK_THROWS_AS(analyse_coherent(x, 0.0, 1), pinchoff::input_error);
  CHECK_THROWS_AS(analyse_coherent(x, 384000.0, 0), pinchoff::input_error);
  CHECK_THROWS_AS(analyse_coherent(x, 384000.0, 192), pinchoff::input_error);
  CHECK_THROWS_AS(analyse_coherent(x, 384000.0, 1, {0, 20000.0}), pinchoff::input_error);
  CHECK_THROWS_AS(analyse_coherent(x, 384000.0, 1, {10, 0.0}), pinchoff::input_error);
  const real_fft wrong(100);
  CHECK_THROWS_AS(analyse_coherent(wrong, x, 384000.0, 1), pinchoff::internal_error);
  CHECK_NOTHROW(analyse_coherent(real_fft(384), x, 384000.0, 1));
}

}  // namespace test_harmonics
