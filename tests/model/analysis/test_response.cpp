// Frequency response against closed forms of RC sections.
#include <cmath>
#include <numbers>

#include <doctest/doctest.h>

#include "model/circuit/network.hpp"
#include "model/circuit/operating_point.hpp"
#include "model/analysis/response.hpp"
#include "model/analysis/small_signal.hpp"
#include "support/stages.hpp"

namespace test_response {

using namespace pinchoff;
using namespace pinchoff::model;

namespace {
constexpr double two_pi = 2.0 * std::numbers::pi;
struct solved {
  network net;
  operating_point op;
};
solved solve(const std::string& text) {
  solved s;
  s.net = build_network(test::stage_from(text));
  s.op = solve_operating_point(s.net);
  return s;
}
}  // namespace

TEST_CASE("one coupling capacitor gives a first-order high-pass at 1/(2 pi R C)") {
  // Closed form: the gate draws no current (is = 0), so the input is a plain RC
  // high-pass with R = Rsig + RG; the source is grounded and the output DC-coupled.
  const std::string text =
      "[supply]\nvolts = 20\n[jfet]\nidss = \"2m\"\nvp = -2\nis = 0\n[signal]\nimpedance = \"10k\"\n"
      "[gate]\ncoupling_cap = \"47n\"\nresistor = \"1M\"\n[drain]\nresistor = \"4.7k\"\n";
  const solved s = solve(text);
  const response_result r = analyse_response(s.net, s.op, 1.0, 1e5, 50);
  const double fc = 1.0 / (two_pi * 47e-9 * (10e3 + 1e6));
  REQUIRE(r.corners.size() == 1);
  CHECK(r.corners[0].is_low);
  CHECK(r.corners[0].frequency_hz == doctest::Approx(fc).epsilon(1e-8));
  for (const response_point& p : r.points) {
    const double x = p.frequency_hz / fc;
    CHECK(std::abs(p.gain) == doctest::Approx(std::fabs(r.midband_gain) * x / std::sqrt(1 + x * x)).epsilon(1e-9));
  }
}

TEST_CASE("input and output coupling multiply: the -3 dB point of two poles") {
  // Closed form: H = H1 H2 with independent high-pass poles f1, f2 (the JFET's drain is a
  // current source, so the sections do not interact); |H|^2 = 1/2 at
  // f^2 = ((a + b) + sqrt((a + b)^2 + 4ab)) / 2 with a = f1^2, b = f2^2.
  const std::string text =
      "[supply]\nvolts = 20\n[jfet]\nidss = \"2m\"\nvp = -2\nis = 0\n[signal]\nimpedance = \"10k\"\n"
      "[gate]\ncoupling_cap = \"47n\"\nresistor = \"1M\"\n[drain]\nresistor = \"4.7k\"\n"
      "[output]\ncoupling_cap = \"1u\"\nload = \"20k\"\n";
  const solved s = solve(text);
  const response_result r = analyse_response(s.net, s.op, 1.0, 1e5, 20);
  const double f1 = 1.0 / (two_pi * 47e-9 * 1.01e6), f2 = 1.0 / (two_pi * 1e-6 * (4.7e3 + 20e3));
  const double a = f1 * f1, b = f2 * f2;
  const double f3 = std::sqrt(((a + b) + std::sqrt((a + b) * (a + b) + 4 * a * b)) / 2);
  REQUIRE(r.corners.size() == 1);
  CHECK(r.corners[0].frequency_hz == doctest::Approx(f3).epsilon(1e-8));
}

TEST_CASE("gate-source capacitance gives the input low-pass 1/(2 pi (Rsig || RG) Cgs)") {
  // Closed form: DC-coupled input, grounded source, cgd = 0: the gate node is an RC
  // low-pass from the generator; the drain follows it with gain -gm RD.
  const std::string text =
      "[supply]\nvolts = 20\n[jfet]\nidss = \"2m\"\nvp = -2\nis = 0\ncgs = \"10p\"\n[signal]\nimpedance = \"100k\"\n"
      "[gate]\nresistor = \"1M\"\n[drain]\nresistor = \"4.7k\"\n";
  const solved s = solve(text);
  const response_result r = analyse_response(s.net, s.op, 10.0, 1e7, 20);
  const double rpar = 100e3 * 1e6 / 1.1e6;
  REQUIRE(r.corners.size() == 1);
  CHECK_FALSE(r.corners[0].is_low);
  CHECK(r.corners[0].frequency_hz == doctest::Approx(1.0 / (two_pi * rpar * 10e-12)).epsilon(1e-8));
}

TEST_CASE("mid-band response equals the mid-band gain of the bias analysis") {
  // The same linearised circuit, with capacitor admittances at a frequency far from all
  // corners; agreement to 0.01 dB as required of the response command.
  const std::string preset = std::string(PINCHOFF_PRESETS_DIR) + "/bass-booster-9v.toml";
  const stage st = read_stage_file(preset);
  const network net = build_network(st);
  const operating_point op = solve_operating_point(net);
  const small_signal_figures ss = analyse_small_signal(net, op);
  const response_point p = response_at(net, op, 1000.0);
  CHECK(std::fabs(20 * std::log10(std::abs(p.gain) / std::fabs(ss.gain_midband))) < 0.01);
}

}  // namespace test_response
