// IEC 60063 preferred values.
#include <algorithm>
#include <cmath>

#include <doctest/doctest.h>

#include "base/units.hpp"
#include "base/eseries.hpp"

namespace test_eseries {

using namespace pinchoff::base;

TEST_CASE("E12 and E24 are the tables of IEC 60063") {
  // IEC 60063 (values as listed in CHECKS.md).
  const double e12[] = {1.0, 1.2, 1.5, 1.8, 2.2, 2.7, 3.3, 3.9, 4.7, 5.6, 6.8, 8.2};
  const double e24_extra[] = {1.1, 1.3, 1.6, 2.0, 2.4, 3.0, 3.6, 4.3, 5.1, 6.2, 7.5, 9.1};
  const auto t12 = series_mantissas(eseries::e12);
  REQUIRE(t12.size() == 12);
  for (std::size_t i = 0; i < 12; ++i) CHECK(t12[i] == e12[i]);
  const auto t24 = series_mantissas(eseries::e24);
  REQUIRE(t24.size() == 24);
  for (double v : e12) CHECK(std::find(t24.begin(), t24.end(), v) != t24.end());
  for (double v : e24_extra) CHECK(std::find(t24.begin(), t24.end(), v) != t24.end());
}

TEST_CASE("E24 values that differ from rounding 10^(i/24) are kept as printed") {
  // CHECKS.md: 2.7 3.0 3.3 3.6 3.9 4.3 4.7 8.2 differ from rounding 10^(i/24).
  const auto t24 = series_mantissas(eseries::e24);
  int differing = 0;
  for (std::size_t i = 0; i < 24; ++i) {
    const double rounded = std::round(10.0 * std::pow(10.0, double(i) / 24.0)) / 10.0;
    if (std::fabs(rounded - t24[i]) > 1e-9) ++differing;
  }
  CHECK(differing == 8);
}

TEST_CASE("E96 has 96 ascending values each within 1 % of 10^(i/96)") {
  // IEC 60063 E96 (table from memory); the series is geometric with ratio 10^(1/96)
  // rounded to three figures, so each value lies within half a step of 10^(i/96).
  const auto t = series_mantissas(eseries::e96);
  REQUIRE(t.size() == 96);
  for (std::size_t i = 0; i < 96; ++i) {
    CAPTURE(i);
    CHECK(std::fabs(t[i] / std::pow(10.0, double(i) / 96.0) - 1.0) < 0.01);
    if (i > 0) CHECK(t[i] > t[i - 1]);
  }
  CHECK(t[0] == 1.00);
  CHECK(t[68] == 5.11);  // IEC 60063 E96 (from memory)
  CHECK(t[95] == 9.76);
}

TEST_CASE("nearest standard values below and above") {
  CHECK(series_at_or_below(eseries::e12, 545.6) == doctest::Approx(470).epsilon(1e-12));
  CHECK(series_at_or_above(eseries::e12, 545.6) == doctest::Approx(560).epsilon(1e-12));
  CHECK(series_at_or_below(eseries::e24, 545.6) == doctest::Approx(510).epsilon(1e-12));
  CHECK(series_at_or_above(eseries::e24, 9500) == doctest::Approx(10000).epsilon(1e-12));
  CHECK(series_at_or_below(eseries::e24, 1050) == doctest::Approx(1000).epsilon(1e-12));
  CHECK(series_at_or_below(eseries::e24, 4700) == doctest::Approx(4700).epsilon(1e-12));
  CHECK(series_at_or_above(eseries::e24, 4700) == doctest::Approx(4700).epsilon(1e-12));
  CHECK(series_at_or_below(eseries::e96, 0.95) == doctest::Approx(0.931).epsilon(1e-12));
}

}  // namespace test_eseries
