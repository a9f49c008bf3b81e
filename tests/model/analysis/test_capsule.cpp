// A condenser capsule at the gate: its high-pass with the gate resistor, and the loss of the
// capacitive divider it forms with the stray and the stage's input capacitance, against
// their closed forms.
#include <cmath>
#include <numbers>
#include <string>

#include <doctest/doctest.h>

#include "base/error.hpp"
#include "model/analysis/compare.hpp"
#include "model/analysis/response.hpp"
#include "model/analysis/small_signal.hpp"
#include "model/circuit/network.hpp"
#include "model/circuit/operating_point.hpp"
#include "model/circuit/stage_file.hpp"
#include "support/stages.hpp"

namespace test_capsule {

using namespace pinchoff;
using namespace pinchoff::model;

namespace {
constexpr double two_pi = 2.0 * std::numbers::pi;
constexpr double c_capsule = 50e-12, c_stray = 10e-12, cgs = 6e-12, cgd = 2e-12, rg = 10e9;

// is = 0: the gate junction's leakage (a few TΩ at reverse bias) would sit beside the
// 10 GΩ gate resistor; the closed forms have the resistor alone.
const std::string jfet = "[jfet]\nidss = \"6m\"\nvp = -1.5\nlambda = 0.004\ncgs = \"6p\"\ncgd = \"2p\"\nis = 0\n";
const std::string capsule = "[signal]\nkind = \"capsule\"\ncapacitance = \"50p\"\nstray = \"10p\"\nsensitivity = \"12m\"\n"
                            "[gate]\nresistor = \"10G\"\n";

struct row {
  const char* source;
  std::string text;
  bool follower;
};
}  // namespace

TEST_CASE("a capsule's high-pass corner and in-band divider loss match their closed forms") {
  // Closed forms (Miller's theorem, Sedra & Smith sec. 9.3; the capacitive divider):
  //   A    = the stage's gain from gate to the node cgs or cgd returns to:
  //          follower A = gm R / (1 + gm R), R = Rs || rds (drain at AC ground);
  //          common source A = -gm (Rd || rds), source grounded;
  //   Cin  = cgs (1 - A) + cgd (follower), cgs + cgd (1 - A) (common source);
  //   fc   = 1 / (2 pi Rg (Ccaps + Cstray + Cin));
  //   gain in band = A Ccaps / (Ccaps + Cstray + Cin).
  // The network adds what the forms leave out: the Rg high-pass at 1 kHz ((fc/1k)^2 / 2,
  // about 1e-7) and the junction currents into the channel nodes (w cgs / gm at 1 kHz, about
  // 1e-5): a relative tolerance of 1e-4 covers both.
  const row rows[]{
      {"closed form: source follower, Miller with (1 - A) on cgs",
       "topology = \"source-follower\"\n[supply]\nvolts = 24\n" + jfet + capsule + "[source]\nresistor = \"2.2k\"\n", true},
      {"closed form: common source, Miller with (1 + |A|) on cgd",
       "[supply]\nvolts = 24\n" + jfet + capsule + "[drain]\nresistor = \"4.7k\"\n", false},
  };
  for (const row& r : rows) {
    CAPTURE(r.source);
    const stage st = test::stage_from(r.text);
    const network net = build_network(st);
    const operating_point op = solve_operating_point(net);
    const jfet_linear lin = linearise(net, op);
    double a = 0.0, cin = 0.0;
    if (r.follower) {
      const double rs = 1.0 / (1.0 / 2.2e3 + lin.gds_s);
      a = lin.gm_s * rs / (1.0 + lin.gm_s * rs);
      cin = cgs * (1.0 - a) + cgd;
    } else {
      a = -lin.gm_s / (1.0 / 4.7e3 + lin.gds_s);
      cin = cgs + cgd * (1.0 - a);
    }
    const double c_total = c_capsule + c_stray + cin;
    const double fc = 1.0 / (two_pi * rg * c_total);
    const double in_band = a * c_capsule / c_total;
    CAPTURE(a);
    CAPTURE(cin);

    const small_signal_figures ss = analyse_small_signal(net, op);
    CHECK(ss.gain_midband == doctest::Approx(in_band).epsilon(1e-4).scale(0));
    bool found = false;
    for (const cap_corner& c : ss.corners)
      if (c.role == cap_role::capsule) {
        found = true;
        CHECK(c.farad == doctest::Approx(c_total).epsilon(1e-4).scale(0));
        CHECK(c.r_seen_ohm == doctest::Approx(rg).epsilon(1e-9));
        CHECK(c.corner_hz == doctest::Approx(fc).epsilon(1e-4).scale(0));
      }
    CHECK(found);

    const response_result resp = analyse_response(net, op, 1.0, 1e5, 11);
    CHECK(resp.midband_gain == doctest::Approx(in_band).epsilon(1e-4).scale(0));
    REQUIRE_FALSE(resp.corners.empty());
    CHECK(resp.corners.front().is_low);
    CHECK(resp.corners.front().frequency_hz == doctest::Approx(fc).epsilon(1e-4).scale(0));
    // Well above the corner the response is flat at the in-band gain: never a loss "re
    // mid-band" at every frequency.
    const response_point p = response_at(net, op, 10e3);
    CHECK(std::abs(p.gain) == doctest::Approx(std::fabs(in_band)).epsilon(1e-4).scale(0));
  }
}

TEST_CASE("a capsule is the first stage's coupling: the generator reaches the gate through it") {
  // The network's topology: generator -> capsule -> gate, stray from the gate to ground
  // (README "Sources"); a resistive source of the same file has neither.
  const stage st = test::stage_from("topology = \"source-follower\"\n[supply]\nvolts = 24\n" + jfet + capsule +
                                    "[source]\nresistor = \"2.2k\"\n");
  const network net = build_network(st);
  int capsules = 0, strays = 0;
  for (const net_capacitor& c : net.capacitors) {
    if (c.role == cap_role::capsule) {
      ++capsules;
      CHECK(c.a == net.generator_node);
      CHECK(c.b == net.jfet().gate);
      CHECK(c.farad == doctest::Approx(c_capsule).epsilon(1e-15).scale(0));
    }
    if (c.role == cap_role::capsule_stray) {
      ++strays;
      CHECK(c.a == net.jfet().gate);
      CHECK(c.b == 0);
    }
  }
  CHECK(capsules == 1);
  CHECK(strays == 1);
  CHECK(net.midband_hz == doctest::Approx(1000.0).epsilon(1e-15));
  CHECK(st.capsule.sensitivity_v_per_pa == doctest::Approx(12e-3).epsilon(1e-15));
}

TEST_CASE("the bundled microphone preset's response, checked by hand") {
  // presets/phantom-mic-follower.toml: a source follower (idss 6 mA, vp -1.5 V, lambda
  // 0.004 /V, cgs 6 pF, cgd 2 pF), capsule 50 pF with 5 pF stray and 1 GΩ to ground,
  // source resistor 1.5 kΩ, 10 µF into a 2 kΩ load, drain on the P48 rail (3.4 kΩ, 47 µF).
  // Where each check value comes from:
  //   gm, gds: the square law (Shichman & Hodges 1968) at the solved vgs and vds:
  //            gm = 2 idss/|vp| (1 - vgs/vp)(1 + lambda vds), gds = lambda idss (1 - vgs/vp)^2;
  //   A      = gm R / (1 + gm R), R = 1.5k || 2k || 1/gds (the drain is AC ground);
  //   C_in   = cgs (1 - A) + cgd (Miller's theorem, Sedra & Smith sec. 9.3);
  //   gain in band = A 50p / (50p + 5p + C_in) (the capacitive divider);
  //   f1     = 1 / (2 pi 1G (50p + 5p + C_in)) (the capsule's high-pass);
  //   f2     = 1 / (2 pi 10u (2k + 1.5k || 1/(gm + gds))) (the output coupling's);
  //   the low -3 dB point of the two independent high-pass poles:
  //            f^2 = ((a + b) + sqrt((a + b)^2 + 4ab)) / 2, a = f1^2, b = f2^2.
  const stage st = read_stage_file(std::string(PINCHOFF_PRESETS_DIR) + "/phantom-mic-follower.toml");
  REQUIRE(st.has_capsule());
  const network net = build_network(st);
  const operating_point op = solve_operating_point(net);
  const double vgs = op.at.vgs_v, vds = op.at.vds_v;
  const double idss = 6e-3, vp = -1.5, lambda = 0.004;
  const double gm = 2.0 * idss / 1.5 * (1.0 - vgs / vp) * (1.0 + lambda * vds);
  const double gds = lambda * idss * (1.0 - vgs / vp) * (1.0 - vgs / vp);
  const double r = 1.0 / (1.0 / 1.5e3 + 1.0 / 2e3 + gds);
  const double a = gm * r / (1.0 + gm * r);
  const double c_total = 50e-12 + 5e-12 + 6e-12 * (1.0 - a) + 2e-12;
  const double in_band = a * 50e-12 / c_total;
  const double f1 = 1.0 / (two_pi * 1e9 * c_total);
  const double f2 = 1.0 / (two_pi * 10e-6 * (2e3 + 1.0 / (1.0 / 1.5e3 + gm + gds)));
  const double aa = f1 * f1, bb = f2 * f2;
  const double f3 = std::sqrt(((aa + bb) + std::sqrt((aa + bb) * (aa + bb) + 4.0 * aa * bb)) / 2.0);
  CAPTURE(vgs);
  CAPTURE(vds);
  CAPTURE(f1);
  CAPTURE(f2);

  const response_result resp = analyse_response(net, op, 10.0, 100e3, 5);
  // The hand forms leave out the rail's reservoir (seen through gds, 1/gds of megohms
  // against 3.4 kΩ) and the junctions' leakage: below 1e-4 of the gain.
  CHECK(resp.midband_gain == doctest::Approx(in_band).epsilon(1e-4).scale(0));
  REQUIRE_FALSE(resp.corners.empty());
  CHECK(resp.corners.front().is_low);
  // The two poles are not quite independent: below the capsule's corner the gate's own
  // impedance is its capacitance, so cgs carries about cgs / C_total (0.1) of the source's
  // swing back to the gate, which raises the 1/gm part (about 340 Ω) of f2's resistance by
  // up to 10 %: at most 1.5 % of f2 and of the -3 dB point. (The network gives 0.12 %.)
  CHECK(resp.corners.front().frequency_hz == doctest::Approx(f3).epsilon(1.5e-2).scale(0));
  // From 100 Hz to 20 kHz the response stays within 0.1 dB of the in-band gain: the flat
  // band a microphone's datasheet shows (the old preset read a flat -0.62 dB "re mid-band").
  for (double f : {100.0, 1e3, 10e3, 20e3}) {
    CAPTURE(f);
    const response_point p = response_at(net, op, f);
    CHECK(std::fabs(20.0 * std::log10(std::abs(p.gain) / std::fabs(in_band))) < 0.1);
  }
}

TEST_CASE("a capsule stage's maximum SPL at 0.5 % and 1 % THD follows the square law's HD2") {
  // Gray, Hurst, Lewis & Meyer, distortion of a square-law device (from memory; CHECKS.md):
  // a gate driven by VGSQ + A cos wt gives HD2 = A / (4 (VGSQ - VP)) and no H3. Here VGSQ = 0
  // (the gate resistor to ground, the source grounded), lambda = 0, no junction current and
  // no junction capacitance, a resistive drain load: THD = HD2, so THD reaches T at
  // A = 4 T (0 - VP) = 8 T volts. The capsule's high-pass with the 10 GΩ gate resistor
  // (w R C = 3142 at 1 kHz) passes 1 - 5e-8 of its voltage: A is the capsule's voltage.
  // dB SPL: 20 log10(p / 20 µPa), p = A / sqrt 2 / sensitivity (IEC 60268-4 usage).
  const stage st = test::stage_from(
      "[supply]\nvolts = 30\n[jfet]\nidss = \"4m\"\nvp = -2\nis = 0\n[drain]\nresistor = \"2k\"\n"
      "[signal]\nkind = \"capsule\"\ncapacitance = \"50p\"\nsensitivity = \"12m\"\n[gate]\nresistor = \"10G\"\n");
  compare_settings s;
  s.mode = compare_mode::at_drive;
  const max_spl_figures m = find_max_spl(st, s);
  REQUIRE(m.half_percent.found);
  REQUIRE(m.one_percent.found);
  auto spl_at = [](double a_vpk) { return 20.0 * std::log10(a_vpk / std::sqrt(2.0) / 12e-3 / 20e-6); };
  // The search stops within 1e-4 of the THD (relative): 1e-4 of the drive, 0.001 dB.
  CHECK(m.half_percent.drive_vpk == doctest::Approx(8.0 * 0.005).epsilon(2e-4).scale(0));
  CHECK(m.one_percent.drive_vpk == doctest::Approx(8.0 * 0.01).epsilon(2e-4).scale(0));
  CHECK(m.half_percent_db_spl == doctest::Approx(spl_at(0.04)).epsilon(0.002 / 100));
  CHECK(m.one_percent_db_spl == doctest::Approx(spl_at(0.08)).epsilon(0.002 / 100));
  // 0.08 V / sqrt 2 / 12 mV/Pa = 4.714 Pa: 107.45 dB SPL, worked by hand.
  CHECK(m.one_percent_db_spl == doctest::Approx(107.45).epsilon(0.01 / 107));
  // A resistive source has no sound pressure to rate.
  CHECK_THROWS_AS(find_max_spl(test::stage_from("[supply]\nvolts = 30\n[jfet]\nidss = \"4m\"\nvp = -2\n[drain]\nresistor = \"2k\"\n"
                                                "[gate]\nresistor = \"1M\"\n"),
                               s),
                  internal_error);
}

TEST_CASE("a sound pressure level and a capsule's voltage convert both ways") {
  // IEC 60268-4 usage: 0 dB SPL = 20 µPa rms, so 94 dB SPL = 1.0024 Pa; a 12 mV/Pa capsule
  // gives 12.03 mV rms there, 17.01 mV peak (worked by hand).
  const capsule_part c{50e-12, 0.0, 12e-3};
  CHECK(capsule_drive_vpk(c, 94.0) == doctest::Approx(12e-3 * 20e-6 * std::pow(10.0, 94.0 / 20.0) * std::sqrt(2.0)).epsilon(1e-12));
  CHECK(capsule_drive_vpk(c, 94.0) == doctest::Approx(17.01e-3).epsilon(1e-3).scale(0));
  for (double l : {0.0, 40.0, 94.0, 120.0, 194.0}) CHECK(capsule_level_db_spl(c, capsule_drive_vpk(c, l)) == doctest::Approx(l).epsilon(1e-12));
}

}  // namespace test_capsule
