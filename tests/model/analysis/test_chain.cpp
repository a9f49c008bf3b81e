// Chains of stages against closed forms: the mid-band gain of two stages as the product of
// each stage's gain with the interstage divider and loading (the cascade of two-port gains,
// Sedra & Smith, Microelectronic Circuits, the cascade amplifier, from memory), the engine's
// tiny-drive gain against it, a pot's divider against its hand formula, and a treble cut
// across a drain resistor against 1/(2 pi R C).
#include <cmath>
#include <numbers>
#include <string>

#include <doctest/doctest.h>

#include "model/analysis/response.hpp"
#include "model/analysis/small_signal.hpp"
#include "model/analysis/sweep.hpp"
#include "model/circuit/network.hpp"
#include "model/circuit/operating_point.hpp"
#include "model/circuit/stage.hpp"
#include "model/device/jfet.hpp"
#include "support/stages.hpp"

namespace test_chain {

using namespace pinchoff;
using namespace pinchoff::model;

namespace {

constexpr double two_pi = 2.0 * std::numbers::pi;
double par(double a, double b) { return a * b / (a + b); }

// Two self-biased common-source stages on an ideal supply. The second stage's gate draws no
// current (is = 0) and neither JFET has junction capacitance; every large capacitor is 10 mF,
// so at 1 kHz none moves the gain's magnitude by more than 1e-8. (With 1 F, the trapezoidal
// companions' 770 kS beside the 1 MOhm gate resistor cost the engine 1e-6 in rounding.)
std::string two_stages(const std::string& between) {
  return R"(
name = "two stages"
[supply]
volts = 15
[signal]
impedance = "10k"
[output]
load = "47k"
[[stage]]
[stage.jfet]
idss = "6m"
vp = -2
lambda = 0.01
is = 0
[stage.gate]
coupling_cap = "10m"
resistor = "1M"
[stage.drain]
resistor = "3.3k"
[stage.source]
resistor = "680"
bypass_cap = "10m"
[stage.output]
coupling_cap = "10m"
[[stage]]
between = )" + between + R"(
[stage.jfet]
idss = "4m"
vp = -1.5
lambda = 0.02
is = 0
[stage.gate]
resistor = "220k"
[stage.drain]
resistor = "4.7k"
[stage.source]
resistor = "560"
bypass_cap = "10m"
[stage.output]
coupling_cap = "10m"
)";
}

struct stage_lin {
  double gm, rds;
};
stage_lin linear_at(const network& net, const operating_point& op, int k) {
  const terminal_point t = terminals_of(net, op.x, k);
  const channel_eval ch = drain_current(net.jfets[static_cast<std::size_t>(k)].device, t.vgs_v, t.vds_v);
  return {ch.gm_s, 1.0 / ch.gds_s};
}

}  // namespace

TEST_CASE("two stages: the mid-band gain is the product of the stage gains with the divider and loading") {
  const double rser = 22e3, rsh = 100e3;
  const stage st = test::stage_from(two_stages("[ { series = \"22k\" }, { shunt = \"100k\" } ]"));
  const network net = build_network(st);
  const operating_point op = solve_operating_point(net);
  const small_signal_figures ss = analyse_small_signal(net, op);
  const stage_lin a = linear_at(net, op, 0), b = linear_at(net, op, 1);

  // Hand analysis: each stage -gm (Rd || rds || what follows); the network between is a
  // divider into the second gate's resistor.
  const double rg2 = 220e3;
  const double z_between = rser + par(rsh, rg2);
  const double a1 = -a.gm * par(par(3.3e3, a.rds), z_between);
  const double divider = par(rsh, rg2) / z_between;
  const double a2 = -b.gm * par(par(4.7e3, b.rds), 47e3);
  const double input = 1e6 / (1e6 + 10e3);
  const double expect = input * a1 * divider * a2;
  CAPTURE(expect);
  CHECK(ss.gain_midband == doctest::Approx(expect).epsilon(1e-9));
  REQUIRE(ss.stages.size() == 2);
  CHECK(ss.stages[0].gain == doctest::Approx(a1 * divider).epsilon(1e-9));
  CHECK(ss.stages[1].gain == doctest::Approx(a2).epsilon(1e-9));
  // The second stage loads the first only through the network: its input impedance is the
  // chain's own, set by the first gate resistor.
  CHECK(ss.zin_ohm == doctest::Approx(1e6).epsilon(1e-9));
  CHECK(ss.zout_ohm == doctest::Approx(par(4.7e3, b.rds)).epsilon(1e-9));

  // The engine, driven with a 0.1 mV sine at 1 kHz, gives the same gain to 1e-6.
  sweep_settings s;
  s.frequency_hz = 1000.0;
  s.drives_vpk = {1e-4};  // second-order products (stage 1 H2 through stage 2) stay below 1e-7 of the fundamental
  s.harmonics = 5;
  const sweep_result r = run_sweep(st, s);
  REQUIRE(r.points.size() == 1);
  CHECK(r.points[0].newton.failed == 0);
  CHECK(r.points[0].output_vpk / 1e-4 == doctest::Approx(std::fabs(expect)).epsilon(1e-6));
}

TEST_CASE("a pot between stages divides as its law says") {
  // Linear: the wiper-to-ground part is x R. Log (audio): 10 % at half rotation, two straight
  // segments (common practice).
  CHECK(pot_fraction(pot_taper::linear, 0.3) == doctest::Approx(0.3));
  CHECK(pot_fraction(pot_taper::log, 0.5) == doctest::Approx(0.1).epsilon(1e-12).scale(0));
  CHECK(pot_fraction(pot_taper::log, 0.25) == doctest::Approx(0.05).epsilon(1e-12).scale(0));
  CHECK(pot_fraction(pot_taper::log, 0.75) == doctest::Approx(0.55));
  CHECK(pot_fraction(pot_taper::log, 1.0) == doctest::Approx(1.0));
  CHECK(pot_fraction(pot_taper::log, 0.0) == 0.0);

  for (const auto& row : {std::pair<std::string, double>{"[ { pot = \"100k\", position = 0.3 } ]", 0.3},
                          {"[ { pot = \"100k\", position = 0.75, taper = \"log\" } ]", 0.55}}) {
    const std::string& between = row.first;
    const double x = row.second;  // plain locals: clang 14 cannot capture structured bindings
    CAPTURE(between);
    const stage st = test::stage_from(two_stages(between));
    const network net = build_network(st);
    const operating_point op = solve_operating_point(net);
    ac_setup mid;
    mid.generator_v = 1.0;
    const Eigen::VectorXcd v = solve_small_signal(net, linearise_all(net, op), mid);
    // Hand formula: the wiper's part of the pot in parallel with the gate resistor, under
    // the rest of the track.
    const double bottom = par(x * 100e3, 220e3), top = (1.0 - x) * 100e3;
    const double expect = bottom / (bottom + top);
    CHECK((v[net.stages[1].input] / v[net.stages[0].output]).real() == doctest::Approx(expect).epsilon(1e-12));
  }
  // Fully down, no signal reaches the second stage, and its gain is not a number.
  const stage off = test::stage_from(two_stages("[ { pot = \"100k\", position = 0 } ]"));
  const network net = build_network(off);
  const small_signal_figures ss = analyse_small_signal(net, solve_operating_point(net));
  CHECK(ss.gain_midband == 0.0);
  CHECK(std::isnan(ss.stages[1].gain));
}

TEST_CASE("a treble cut across the drain resistor has its corner at 1/(2 pi R C)") {
  // A grounded-source stage on 40 V (ID = IDSS, VD = 20 V; no bypass to shelve), lambda 0 (rds infinite), no junction
  // capacitance, a DC-coupled output into 1 GOhm: the drain node sees Rd || RL alone, so
  // the upper -3 dB point is 1 / (2 pi (Rd || RL) C) exactly, within 1e-5 of 1/(2 pi Rd C).
  const std::string text =
      "[supply]\nvolts = 40\n[jfet]\nidss = \"2m\"\nvp = -2\nis = 0\n[gate]\nresistor = \"1M\"\n"
      "[drain]\nresistor = \"10k\"\nshunt_cap = \"1n\"\n[output]\nload = \"1G\"\n";
  const network net = build_network(test::stage_from(text));
  const operating_point op = solve_operating_point(net);
  const response_result r = analyse_response(net, op, 10.0, 1e5, 20);
  REQUIRE(r.corners.size() == 1);
  CHECK_FALSE(r.corners[0].is_low);
  const double fc = 1.0 / (two_pi * par(10e3, 1e9) * 1e-9);
  CHECK(r.corners[0].frequency_hz == doctest::Approx(fc).epsilon(1e-7));
  CHECK(r.corners[0].frequency_hz == doctest::Approx(1.0 / (two_pi * 10e3 * 1e-9)).epsilon(2e-5));
}

TEST_CASE("a DC-coupled follower biases with the stage before it") {
  // The follower's gate is the first drain: its DC voltage is the first stage's VD, and the
  // follower's source sits |VGS| above it (the chain is solved as one circuit).
  const std::string text = R"(
[supply]
volts = 12
[output]
load = "10k"
[[stage]]
[stage.jfet]
idss = "3m"
vp = -1.2
[stage.gate]
resistor = "1M"
[stage.drain]
resistor = "4.7k"
[stage.source]
resistor = "470"
[[stage]]
topology = "source-follower"
[stage.jfet]
idss = "8m"
vp = -2.5
[stage.source]
resistor = "2.2k"
[stage.output]
coupling_cap = "10u"
)";
  const stage st = test::stage_from(text);
  const network net = build_network(st);
  const operating_point op = solve_operating_point(net);
  const terminal_point t1 = terminals_of(net, op.x, 0), t2 = terminals_of(net, op.x, 1);
  CHECK(t2.vg_v == doctest::Approx(t1.vd_v).epsilon(1e-12));
  // Closed form of the follower: ID = VS / RS on the square law (lambda 0) at VGS = VG - VS.
  const double id = t2.vs_v / 2.2e3;
  CHECK(id == doctest::Approx(8e-3 * std::pow(1.0 - t2.vgs_v / -2.5, 2)).epsilon(1e-9).scale(0));
  // And the first stage's drain current is the supply's drop over its drain resistor.
  CHECK((12.0 - t1.vd_v) / 4.7e3 == doctest::Approx(t1.id_a).epsilon(1e-9).scale(0));
}

}  // namespace test_chain
