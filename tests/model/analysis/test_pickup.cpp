// A magnetic pickup and its cable at the first stage: the resonance of its inductance with
// the capacitance across it (the pickup's, the cable's and the stage's input), its peak, and
// the DC point, against their closed forms.
#include <algorithm>
#include <cmath>
#include <complex>
#include <numbers>
#include <string>

#include <doctest/doctest.h>

#include "model/analysis/bias.hpp"
#include "model/analysis/response.hpp"
#include "model/analysis/small_signal.hpp"
#include "model/circuit/network.hpp"
#include "model/circuit/nodal.hpp"
#include "model/circuit/operating_point.hpp"
#include "model/circuit/stage_file.hpp"
#include "support/stages.hpp"

namespace test_pickup {

using namespace pinchoff;
using namespace pinchoff::model;

namespace {
constexpr double two_pi = 2.0 * std::numbers::pi;
// A single-coil-like pickup (common practice: 2.5 H, 6 kΩ) with 200 pF of its own and 3 m
// of cable at 100 pF/m (common practice): 500 pF in all.
constexpr double r_coil = 6e3, l_coil = 2.5, c_across = 500e-12;

// The RLC divider of a coil R + sL into C || Rl (Rl: the stage's input resistance, the gate
// resistor): H(s) = 1 / (1 + R/Rl + s (L/Rl + R C) + s^2 L C). Its magnitude's maximum, from
// d|H|^2/d(w^2) = 0 (the second-order low-pass's peak, closed form):
//   w_pk^2 = [(1 + R/Rl) - (L/Rl + R C)^2 / (2 L C)] / (L C),
// and |H|^2 there from the same polynomial.
struct rlc_peak {
  double f_hz, peak_db;  // peak re the divider's DC gain Rl / (R + Rl)
};
rlc_peak rlc_divider_peak(double r, double l, double c, double rl) {
  const double a0 = 1.0 + r / rl, a1 = l / rl + r * c, a2 = l * c;
  const double w2 = (a0 - a1 * a1 / (2.0 * a2)) / a2;
  const double den = (a0 - a2 * w2) * (a0 - a2 * w2) + a1 * a1 * w2;
  return {std::sqrt(w2) / two_pi, 10.0 * std::log10(a0 * a0 / den)};
}

// A common-source stage whose input capacitance is exactly cgs: the source grounded (the
// channel's current at vgs = 0) and cgd = 0, so no Miller term; is = 0 so the gate sees its
// resistor alone. Its gain is flat (no capacitor at the drain), so the response's peak re
// mid-band is the source's.
std::string pickup_into_cs(const std::string& cgs, const std::string& rg) {
  return "[supply]\nvolts = 12\n[jfet]\nidss = \"2m\"\nvp = -1.5\nlambda = 0.004\nis = 0\ncgs = \"" + cgs +
         "\"\ncgd = 0\n[gate]\nresistor = \"" + rg + "\"\n[drain]\nresistor = \"2.2k\"\n[output]\nload = \"1M\"\n"
         "[signal]\nkind = \"pickup\"\nresistance = \"6k\"\ninductance = 2.5\ncapacitance = \"200p\"\ncable = 3\n";
}
}  // namespace

TEST_CASE("a pickup's resonance and peak match the RLC divider's closed form, unloaded and loaded") {
  // Unloaded: a gate resistor of 100 GΩ and no input capacitance leave the pickup's own RLC
  // (its 1/(2 pi sqrt(L C)) 4.50 kHz, Q = sqrt(L/C)/R = 11.8). Loaded: a 1 MΩ gate resistor and
  // 100 pF of input capacitance (cgs) damp it and pull it down by sqrt(C / (C + Cin)).
  struct row {
    const char* source;
    const char* cgs;
    const char* rg;
    double cin, rl;
  };
  const row rows[]{
      {"closed form: unloaded RLC divider", "10f", "100G", 10e-15, 100e9},
      {"closed form: loaded by 1 MΩ and 100 pF", "100p", "1M", 100e-12, 1e6},
  };
  for (const row& r : rows) {
    CAPTURE(r.source);
    const stage st = test::stage_from(pickup_into_cs(r.cgs, r.rg));
    const network net = build_network(st);
    const operating_point op = solve_operating_point(net);
    const rlc_peak expect = rlc_divider_peak(r_coil, l_coil, c_across + r.cin, r.rl);
    const response_result resp = analyse_response(net, op, 10.0, 1e5, 2);
    REQUIRE(resp.resonance.has_value());
    CAPTURE(expect.f_hz);
    CAPTURE(resp.resonance->frequency_hz);
    // The 0.1 % on the frequency; the peak's height to 0.01 dB.
    CHECK(resp.resonance->frequency_hz == doctest::Approx(expect.f_hz).epsilon(1e-3));
    CHECK(resp.resonance->peak_db == doctest::Approx(expect.peak_db).epsilon(1e-3));
    // The same at the stage's input, what bias reports as the source's loaded resonance.
    const input_figures in = analyse_input(net, op);
    REQUIRE(in.resonance.has_value());
    CHECK(in.resonance->frequency_hz == doctest::Approx(expect.f_hz).epsilon(1e-3));
    CHECK(in.resonance->peak_db == doctest::Approx(expect.peak_db).epsilon(1e-3));
    // The resonance itself, where the divider turns through quadrature: H = 1 / (j w a1) at
    // w^2 = (1 + R/Rl) / (L C) (the closed form above with its real part zero). Unloaded
    // (R/Rl = 6e-8) that is Thomson's 1 / (2 pi sqrt(L C)); loaded, the input capacitance
    // shifts it by sqrt(C / (C + Cin)). The stage's gain is flat and real, so the response's
    // phase re mid-band is the divider's.
    const double f_quad = std::sqrt((1.0 + r_coil / r.rl) / (l_coil * (c_across + r.cin))) / two_pi;
    const std::complex<double> g_mid = resp.midband_gain;
    CHECK(std::arg(response_at(net, op, f_quad).gain / g_mid) == doctest::Approx(-std::numbers::pi / 2).epsilon(1e-6));
    // Half power either side of the peak: |H|^2 = peak^2 / 2 there (checked on the network).
    REQUIRE(resp.resonance->below_hz.has_value());
    REQUIRE(resp.resonance->above_hz.has_value());
    for (double f : {*resp.resonance->below_hz, *resp.resonance->above_hz}) {
      const double g = std::abs(response_at(net, op, f).gain);
      CHECK(20.0 * std::log10(resp.resonance->peak_gain / g) == doctest::Approx(10.0 * std::log10(2.0)).epsilon(1e-6));
    }
  }
}

TEST_CASE("a pickup's mid-band is its pass band below the resonance: the coil's resistance alone") {
  // Mid-band: the coil a short, the capacitance across it open (README "Sources"): the gain
  // is the stage's times the divider Rg / (R + Rg); the response at 50 Hz (L's reactance
  // 785 Ω, C's 6.4 MΩ) lies within 0.05 dB of it. Closed form: the resistive divider.
  const stage st = test::stage_from(pickup_into_cs("10p", "1M"));
  const network net = build_network(st);
  const operating_point op = solve_operating_point(net);
  const small_signal_figures ss = analyse_small_signal(net, op);
  const jfet_linear lin = linearise(net, op);
  const double stage_gain = -lin.gm_s / (1.0 / 2.2e3 + 1.0 / 1e6 + lin.gds_s);
  CHECK(ss.gain_midband == doctest::Approx(stage_gain * 1e6 / (1e6 + r_coil)).epsilon(1e-9));
  const double g50 = std::abs(response_at(net, op, 50.0).gain);
  CHECK(std::fabs(20.0 * std::log10(g50 / std::fabs(ss.gain_midband))) < 0.05);
}

TEST_CASE("the DC point with a pickup is the one with its coil's resistance alone") {
  // An inductor is a short at DC (common practice): a pickup with no coupling capacitor and a
  // gate biased by a divider, so DC flows through the coil, has the operating point of the
  // same stage driven through a resistive source of the coil's resistance.
  const std::string body = "[supply]\nvolts = 9\n[jfet]\nidss = \"3m\"\nvp = -2\nlambda = 0.004\n"
                           "[gate]\nresistor = \"1M\"\nbias_top = \"2.2M\"\nbias_bottom = \"1M\"\n"
                           "[drain]\nresistor = \"2.7k\"\n[source]\nresistor = \"1.5k\"\n[signal]\n";
  const network with_coil =
      build_network(test::stage_from(body + "kind = \"pickup\"\nresistance = \"6k\"\ninductance = 2.5\ncapacitance = \"500p\"\n"));
  const network resistive = build_network(test::stage_from(body + "impedance = \"6k\"\n"));
  const operating_point a = solve_operating_point(with_coil), b = solve_operating_point(resistive);
  CHECK(a.at.vgs_v == doctest::Approx(b.at.vgs_v).epsilon(1e-12));
  CHECK(a.at.vds_v == doctest::Approx(b.at.vds_v).epsilon(1e-12));
  CHECK(a.at.id_a == doctest::Approx(b.at.id_a).epsilon(1e-12));
  // The divider's current flows through the coil to the generator (at 0 V): about 1.7 µA,
  // 10 mV across the coil's 6 kΩ, so the check bites.
  const double i_coil = a.x[inductor_current_unknown(with_coil, 0)];
  CHECK(std::fabs(i_coil) > 1e-6);
  CHECK(node_v(a.x, with_coil.jfet().gate) == doctest::Approx(-6e3 * i_coil).epsilon(1e-9).scale(0));
  CHECK(node_v(a.x, with_coil.input_node) == doctest::Approx(node_v(b.x, resistive.input_node)).epsilon(1e-12));
}

TEST_CASE("a pickup's cable adds its capacitance per metre") {
  // 3 m at the default 100 pF/m (common practice) and 5 m at 60 pF/m, beside the pickup's own.
  const std::string body = "[supply]\nvolts = 9\n[jfet]\nidss = \"3m\"\nvp = -2\n[gate]\nresistor = \"1M\"\n"
                           "[drain]\nresistor = \"2.7k\"\n[source]\nresistor = \"1.5k\"\n[signal]\nkind = \"pickup\"\n"
                           "resistance = \"6k\"\ninductance = 2.5\ncapacitance = \"150p\"\n";
  CHECK(test::stage_from(body + "cable = 3\n").pickup.total_capacitance_f() == doctest::Approx(450e-12).epsilon(1e-12).scale(0));
  CHECK(test::stage_from(body + "cable = 5\ncable_capacitance = \"60p\"\n").pickup.total_capacitance_f() ==
        doctest::Approx(450e-12).epsilon(1e-12).scale(0));
}

}  // namespace test_pickup
