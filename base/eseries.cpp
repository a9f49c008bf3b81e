#include "base/eseries.hpp"

#include <array>
#include <cctype>
#include <cmath>
#include <string>

#include "base/error.hpp"

namespace pinchoff::base {
namespace {

// IEC 60063:2015, tables of the E12, E24 and E96 series.
constexpr std::array<double, 12> e12{1.0, 1.2, 1.5, 1.8, 2.2, 2.7, 3.3, 3.9, 4.7, 5.6, 6.8, 8.2};
constexpr std::array<double, 24> e24{1.0, 1.1, 1.2, 1.3, 1.5, 1.6, 1.8, 2.0, 2.2, 2.4, 2.7, 3.0,
                                     3.3, 3.6, 3.9, 4.3, 4.7, 5.1, 5.6, 6.2, 6.8, 7.5, 8.2, 9.1};
constexpr std::array<double, 96> e96{
    1.00, 1.02, 1.05, 1.07, 1.10, 1.13, 1.15, 1.18, 1.21, 1.24, 1.27, 1.30, 1.33, 1.37, 1.40, 1.43,
    1.47, 1.50, 1.54, 1.58, 1.62, 1.65, 1.69, 1.74, 1.78, 1.82, 1.87, 1.91, 1.96, 2.00, 2.05, 2.10,
    2.15, 2.21, 2.26, 2.32, 2.37, 2.43, 2.49, 2.55, 2.61, 2.67, 2.74, 2.80, 2.87, 2.94, 3.01, 3.09,
    3.16, 3.24, 3.32, 3.40, 3.48, 3.57, 3.65, 3.74, 3.83, 3.92, 4.02, 4.12, 4.22, 4.32, 4.42, 4.53,
    4.64, 4.75, 4.87, 4.99, 5.11, 5.23, 5.36, 5.49, 5.62, 5.76, 5.90, 6.04, 6.19, 6.34, 6.49, 6.65,
    6.81, 6.98, 7.15, 7.32, 7.50, 7.68, 7.87, 8.06, 8.25, 8.45, 8.66, 8.87, 9.09, 9.31, 9.53, 9.76};

// Splits value into decade * mantissa with mantissa in [1, 10); guards the rounding at
// exact decades (log10(1000) may land a hair below 3).
void split(double value, double& decade, double& mantissa) noexcept {
  decade = std::pow(10.0, std::floor(std::log10(value)));
  mantissa = value / decade;
  if (mantissa >= 10.0 * (1 - 1e-12)) {
    decade *= 10.0;
    mantissa = value / decade;
  } else if (mantissa < 1.0) {
    decade /= 10.0;
    mantissa = value / decade;
  }
}

constexpr double match_tol = 1e-9;

}  // namespace

std::span<const double> series_mantissas(eseries s) noexcept {
  switch (s) {
    case eseries::e12: return e12;
    case eseries::e24: return e24;
    case eseries::e96: return e96;
  }
  return e12;
}

eseries parse_series(std::string_view name) {
  std::string up;
  for (char c : name) up += static_cast<char>(std::toupper(static_cast<unsigned char>(c)));
  if (up == "E12") return eseries::e12;
  if (up == "E24") return eseries::e24;
  if (up == "E96") return eseries::e96;
  throw input_error("unknown resistor series '" + std::string(name) + "' (expected E12, E24 or E96)");
}

std::string_view series_name(eseries s) noexcept {
  switch (s) {
    case eseries::e12: return "E12";
    case eseries::e24: return "E24";
    case eseries::e96: return "E96";
  }
  return "E12";
}

double series_at_or_below(eseries s, double value) noexcept {
  double decade = 0, mant = 0;
  split(value, decade, mant);
  const auto m = series_mantissas(s);
  double best = std::round(m.back() * 100.0) * (decade / 1000.0);
  for (double v : m)
    if (v <= mant * (1 + match_tol)) best = std::round(v * 100.0) * (decade / 100.0);
  return best;
}

double series_at_or_above(eseries s, double value) noexcept {
  double decade = 0, mant = 0;
  split(value, decade, mant);
  for (double v : series_mantissas(s))
    if (v >= mant * (1 - match_tol)) return std::round(v * 100.0) * (decade / 100.0);
  return 10.0 * decade;
}

}  // namespace pinchoff::base
