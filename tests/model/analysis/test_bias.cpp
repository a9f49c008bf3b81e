// bias's exact -3 dB points against closed forms of RC sections.
#include <cmath>
#include <numbers>

#include <doctest/doctest.h>

#include "model/analysis/bias.hpp"
#include "support/stages.hpp"

namespace test_bias {

using namespace pinchoff;
using namespace pinchoff::model;

TEST_CASE("bias gives the exact lower -3 dB point, not the sum of corners") {
  // Two high-passes, the input one (47 nF into Rsig + RG = 1.01 MOhm, 3.35 Hz) and the output
  // one (1 uF into Rd + RL; the gate draws nothing, is = 0, grounded source, lambda 0): the
  // product of two first-order sections at f1 and f2 is -3 dB where
  // (1 + (f1/f)^2)(1 + (f2/f)^2) = 2 (closed form of the cascade, solved below), which lies
  // below the hand estimate f1 + f2.
  const std::string text =
      "[supply]\nvolts = 40\n[jfet]\nidss = \"2m\"\nvp = -2\nis = 0\n[signal]\nimpedance = \"10k\"\n"
      "[gate]\ncoupling_cap = \"47n\"\nresistor = \"1M\"\n[drain]\nresistor = \"10k\"\n"
      "[output]\ncoupling_cap = \"1u\"\nload = \"10k\"\n";
  const bias_figures b = analyse_bias(test::stage_from(text));
  const double two_pi = 2.0 * std::numbers::pi;
  const double f1 = 1.0 / (two_pi * 47e-9 * 1.01e6), f2 = 1.0 / (two_pi * 1e-6 * 20e3);
  // x = f^2: x^2 - (f1^2 + f2^2) x - f1^2 f2^2 = 0.
  const double p = f1 * f1 + f2 * f2;
  const double f = std::sqrt(0.5 * (p + std::sqrt(p * p + 4.0 * f1 * f1 * f2 * f2)));
  REQUIRE(b.low_3db_hz.has_value());
  CHECK(*b.low_3db_hz == doctest::Approx(f).epsilon(1e-7));
  CHECK(b.ss.low_corner_estimate_hz == doctest::Approx(f1 + f2).epsilon(1e-9));
  CHECK(*b.low_3db_hz < b.ss.low_corner_estimate_hz);
  CHECK_FALSE(b.high_3db_hz.has_value());  // no capacitance above: flat to the band's top
}

}  // namespace test_bias
