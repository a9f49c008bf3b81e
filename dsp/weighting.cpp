#include "dsp/weighting.hpp"

#include <cmath>

namespace pinchoff::dsp {
namespace {

// IEC 61672-1, Annex E (E.1, E.6): the A-weighting's four pole frequencies.
double a_unnormalised(double f) noexcept {
  constexpr double f1 = 20.598997, f2 = 107.65265, f3 = 737.86223, f4 = 12194.217;
  const double f2sq = f * f;
  return f4 * f4 * f2sq * f2sq /
         ((f2sq + f1 * f1) * std::sqrt((f2sq + f2 * f2) * (f2sq + f3 * f3)) * (f2sq + f4 * f4));
}

// ITU-R BS.468-4: the weighting network's response as a rational function of f (the
// coefficients of its usual realisation as h1 and h2, even and odd parts of the denominator).
double itu468_unnormalised(double f) noexcept {
  const double f2 = f * f, f3 = f2 * f, f4 = f2 * f2, f5 = f4 * f, f6 = f4 * f2;
  const double h1 = -4.737338981378384e-24 * f6 + 2.043828333606125e-15 * f4 - 1.363894795463638e-07 * f2 + 1.0;
  const double h2 = 1.306612257412824e-19 * f5 - 2.118150887518656e-11 * f3 + 5.559488023498642e-04 * f;
  return 1.246332637532143e-04 * f / std::sqrt(h1 * h1 + h2 * h2);
}

}  // namespace

double a_weighting_gain(double f_hz) noexcept {
  static const double at_1k = a_unnormalised(1000.0);
  return f_hz > 0.0 ? a_unnormalised(f_hz) / at_1k : 0.0;
}
double a_weighting_db(double f_hz) noexcept { return 20.0 * std::log10(a_weighting_gain(f_hz)); }

double itu468_weighting_gain(double f_hz) noexcept {
  static const double at_1k = itu468_unnormalised(1000.0);
  return f_hz > 0.0 ? itu468_unnormalised(f_hz) / at_1k : 0.0;
}
double itu468_weighting_db(double f_hz) noexcept { return 20.0 * std::log10(itu468_weighting_gain(f_hz)); }

}  // namespace pinchoff::dsp
