// A source follower's bootstrapped gate resistor and a common-source stage's drain-to-gate
// feedback resistor: the DC point, the gain and the input resistance against their hand
// formulas, the input resistance measured in the time domain by the reference solver, and
// the DK engine against that solver sample by sample.
#include <cmath>
#include <complex>
#include <numbers>
#include <string>
#include <vector>

#include <doctest/doctest.h>

#include "base/error.hpp"
#include "model/analysis/small_signal.hpp"
#include "model/circuit/network.hpp"
#include "model/circuit/operating_point.hpp"
#include "model/circuit/stage_file.hpp"
#include "model/engine/transient_reference.hpp"
#include "support/engine_vs_reference.hpp"
#include "support/stages.hpp"

namespace test_gate_extras {

using namespace pinchoff;
using namespace pinchoff::model;

namespace {

constexpr double fs_hz = 384000.0;  // 8 x 48 kHz

// Square-law parts (is = 0: no junction current, so the gate draws nothing at DC and the
// closed forms hold exactly).
constexpr double idss = 4e-3, vp = -2.0;

// A source follower on 12 V: gate resistor rg from the gate to its foot, the foot to ground
// through rb (or a divider), the bootstrap capacitor from the source to the foot.
std::string follower(double rg, const std::string& foot, const std::string& bootstrap, double lambda,
                     const std::string& signal = "") {
  return "topology = \"source-follower\"\n[supply]\nvolts = 12\n" + signal + "[jfet]\nidss = \"4m\"\nvp = -2\nis = 0\nlambda = " +
         test::num(lambda) + "\n[gate]\ncoupling_cap = \"1u\"\nresistor = " + test::num(rg) + "\n" + foot + bootstrap +
         "[source]\nresistor = \"2.2k\"\n";
}

// A common-source stage on 12 V: rf from the drain to the gate, rg from the gate to ground,
// the source resistor bypassed.
std::string feedback_stage(double rf, double lambda, const std::string& signal = "") {
  return "[supply]\nvolts = 12\n" + signal + "[jfet]\nidss = \"4m\"\nvp = -2\nis = 0\nlambda = " + test::num(lambda) +
         "\n[gate]\ncoupling_cap = \"1u\"\nresistor = \"1M\"\nfeedback = " + test::num(rf) +
         "\n[drain]\nresistor = \"3.3k\"\n[source]\nresistor = \"1.5k\"\nbypass_cap = \"1000u\"\n";
}

// The peak of a sine of known frequency in y[from..] by its discrete Fourier sum over whole
// periods (the reference solver's output at the generator's frequency).
double amplitude_at(const std::vector<double>& y, std::size_t from, double f_hz) {
  std::complex<double> sum{};
  for (std::size_t n = from; n < y.size(); ++n)
    sum += y[n] * std::polar(1.0, -2.0 * std::numbers::pi * f_hz * static_cast<double>(n) / fs_hz);
  return 2.0 * std::abs(sum) / static_cast<double>(y.size() - from);
}

// The reference solver's output amplitude for a 1 kHz sine of 10 mV: 24 periods, the last
// 16 analysed (the coupling capacitors' slow settling lies far below 1 kHz).
double reference_amplitude(const std::string& text) {
  const network net = build_network(test::stage_from(text));
  const operating_point op = solve_operating_point(net);
  transient_reference ref(net, op, fs_hz);
  const int period = static_cast<int>(fs_hz / 1000.0);
  std::vector<double> y;
  for (int n = 0; n < 24 * period; ++n) y.push_back(ref.process(0.01 * std::sin(2.0 * std::numbers::pi * 1000.0 * n / fs_hz)));
  CHECK(ref.stats().failed == 0);
  return amplitude_at(y, static_cast<std::size_t>(8 * period), 1000.0);
}

}  // namespace

TEST_CASE("a bootstrapped follower's DC point, gain and input resistance match the hand formulas") {
  // DC (hand analysis of self-bias, common practice): no gate current, so the gate and the
  // foot sit at 0 V through rg and rb; VGS = -ID RS with ID = IDSS (1 - VGS/VP)^2 (square
  // law, lambda = 0), the root with VP < VGS < 0 found by bisection.
  const double rs = 2.2e3, rg = 1e6, rb = 100e3;
  const stage st = test::stage_from(follower(rg, "bias_bottom = \"100k\"\n", "bootstrap = \"10u\"\n", 0.0));
  const network net = build_network(st);
  const operating_point op = solve_operating_point(net);
  double lo = 0.0, hi = -vp / rs;  // VGS from 0 to VP
  for (int i = 0; i < 200; ++i) {
    const double id = 0.5 * (lo + hi), vgs = -id * rs;
    (idss * (1.0 - vgs / vp) * (1.0 - vgs / vp) > id ? lo : hi) = id;
  }
  CHECK(op.at.id_a == doctest::Approx(lo).epsilon(1e-7).scale(0));
  CHECK(std::fabs(op.at.vg_v) <= 1e-9);  // volts, absolute: no gate current, so no drop across the gate resistor
  CHECK(op.at.vs_v == doctest::Approx(lo * rs).epsilon(1e-7));

  // Mid-band (the bootstrap capacitor a short, so the foot is the source): at the source,
  // gm (vg - vs) + (vg - vs)/rg = vs (gds + 1/rs + 1/rb), so
  //   A = vs/vg = (gm + 1/rg) / (gm + 1/rg + gds + 1/rs + 1/rb),
  // and rg, with vg at one end and A vg at the other, takes (1 - A) vg / rg: the input
  // resistance is rg / (1 - A) (Miller's theorem, J. M. Miller, Sci. Papers Bur. Standards
  // 15, 1920; the bootstrap's textbook form, Horowitz & Hill, The Art of Electronics,
  // 3rd ed., sec. 2.2.5, from memory); without the bootstrap it would be rg + rb.
  for (const double lambda : {0.0, 0.02}) {
    CAPTURE(lambda);
    const network n = build_network(test::stage_from(follower(rg, "bias_bottom = \"100k\"\n", "bootstrap = \"10u\"\n", lambda)));
    const operating_point o = solve_operating_point(n);
    const jfet_linear lin = linearise(n, o);
    const double a = (lin.gm_s + 1.0 / rg) / (lin.gm_s + 1.0 / rg + lin.gds_s + 1.0 / rs + 1.0 / rb);
    const small_signal_figures ss = analyse_small_signal(n, o);
    CHECK(ss.gain_midband == doctest::Approx(a).epsilon(1e-9));
    CHECK(ss.zin_ohm == doctest::Approx(rg / (1.0 - a)).epsilon(1e-7));
    CHECK(ss.zin_ohm > 3.0 * (rg + rb));  // what the bootstrap is for
  }

  // With a divider for the foot (bias_top to the supply, bias_bottom to ground): the same
  // form with the divider's two resistors on the source.
  const double rt = 1e6, rbb = 1e6;
  const network div = build_network(
      test::stage_from(follower(rg, "bias_top = \"1M\"\nbias_bottom = \"1M\"\n", "bootstrap = \"10u\"\n", 0.01)));
  const operating_point od = solve_operating_point(div);
  const jfet_linear ld = linearise(div, od);
  const double ad = (ld.gm_s + 1.0 / rg) / (ld.gm_s + 1.0 / rg + ld.gds_s + 1.0 / rs + 1.0 / rt + 1.0 / rbb);
  CHECK(analyse_small_signal(div, od).zin_ohm == doctest::Approx(rg / (1.0 - ad)).epsilon(1e-7));
  CHECK(od.at.vg_v == doctest::Approx(6.0).epsilon(1e-9));  // the divider's midpoint, no gate current
}

TEST_CASE("a bootstrapped follower's input resistance, measured in the time domain by the reference solver") {
  // A 10 MΩ source resistance in front of the stage divides the signal by zin/(zin + rsig)
  // (the series-input divider); the reference solver's output amplitude with and without it
  // gives zin, which must match the small-signal solve's rg/(1 - A) (the 1 µF coupling
  // capacitor's 160 Ω in series with tens of megohms is a part in 1e10 of the magnitude).
  const double rsig = 10e6;
  const std::string direct = follower(1e6, "bias_bottom = \"100k\"\n", "bootstrap = \"10u\"\n", 0.01);
  const std::string behind =
      follower(1e6, "bias_bottom = \"100k\"\n", "bootstrap = \"10u\"\n", 0.01, "[signal]\nimpedance = \"10M\"\n");
  const double r = reference_amplitude(behind) / reference_amplitude(direct);
  const double zin_measured = rsig * r / (1.0 - r);
  const network net = build_network(test::stage_from(direct));
  const double zin_small_signal = analyse_small_signal(net, solve_operating_point(net)).zin_ohm;
  CAPTURE(zin_measured);
  CAPTURE(zin_small_signal);
  CHECK(zin_measured == doctest::Approx(zin_small_signal).epsilon(2e-3));
}

TEST_CASE("drain-to-gate feedback: the DC point, gain and Miller-divided input resistance match the hand formulas") {
  // DC (combination bias, hand analysis, common practice): no gate current, so the gate sits
  // on the divider rf, rg from the drain: VG = VD rg/(rg + rf); the drain resistor carries the
  // channel current and the divider's: VD = (VDD - RD ID) / (1 + RD/(rf + rg)); VGS = VG - ID
  // RS and ID = IDSS (1 - VGS/VP)^2 (lambda = 0). VGS is linear in ID, so the root with VP <
  // VGS < 0 is bracketed by the currents where VGS = 0 and VGS = VP.
  const double vdd = 12.0, rd = 3.3e3, rs = 1.5e3, rg = 1e6, rf = 2.2e6;
  const network net = build_network(test::stage_from(feedback_stage(rf, 0.0)));
  const operating_point op = solve_operating_point(net);
  const double k = rg / (rg + rf) / (1.0 + rd / (rf + rg));
  auto vgs_of = [&](double id) { return (vdd - rd * id) * k - id * rs; };
  double lo = vdd * k / (rd * k + rs), hi = (vdd * k - vp) / (rd * k + rs);  // VGS = 0, VGS = VP
  for (int i = 0; i < 200; ++i) {
    const double id = 0.5 * (lo + hi), vgs = vgs_of(id);
    (idss * (1.0 - vgs / vp) * (1.0 - vgs / vp) > id ? lo : hi) = id;
  }
  const double vd = (vdd - rd * lo) / (1.0 + rd / (rf + rg));
  CAPTURE(lo);
  CHECK(op.at.id_a == doctest::Approx(lo).epsilon(1e-7).scale(0));
  CHECK(op.at.vd_v == doctest::Approx(vd).epsilon(1e-7));
  CHECK(op.at.vg_v == doctest::Approx(vd * rg / (rg + rf)).epsilon(1e-7));
  CHECK(op.at.region == jfet_region::saturation);

  // Mid-band (source bypassed, gate coupling a short, ideal generator): at the drain,
  // gm vg + gds vd + vd/rd + (vd - vg)/rf = 0, so A = vd/vg = (1/rf - gm) / (gds + 1/rd + 1/rf);
  // rf, with vg at one end and A vg at the other, takes (1 - A) vg / rf, so the input
  // resistance is rg || rf/(1 + |A|) (Miller's theorem, J. M. Miller, Sci. Papers Bur.
  // Standards 15, 1920).
  for (const double lambda : {0.0, 0.02}) {
    CAPTURE(lambda);
    const network n = build_network(test::stage_from(feedback_stage(rf, lambda)));
    const operating_point o = solve_operating_point(n);
    const jfet_linear lin = linearise(n, o);
    const double a = (1.0 / rf - lin.gm_s) / (lin.gds_s + 1.0 / rd + 1.0 / rf);
    CHECK(a < -1.0);
    const small_signal_figures ss = analyse_small_signal(n, o);
    CHECK(ss.gain_midband == doctest::Approx(a).epsilon(1e-9));
    const double miller = rf / (1.0 + std::fabs(a));
    CHECK(ss.zin_ohm == doctest::Approx(1.0 / (1.0 / rg + 1.0 / miller)).epsilon(1e-7));
  }
}

TEST_CASE("drain-to-gate feedback: the input resistance measured by the reference solver") {
  // As for the bootstrap: a 1 MΩ source resistance divides the signal by zin/(zin + rsig).
  const double rsig = 1e6;
  const double r = reference_amplitude(feedback_stage(2.2e6, 0.01, "[signal]\nimpedance = \"1M\"\n")) /
                   reference_amplitude(feedback_stage(2.2e6, 0.01));
  const double zin_measured = rsig * r / (1.0 - r);
  const network net = build_network(test::stage_from(feedback_stage(2.2e6, 0.01)));
  const double zin_small_signal = analyse_small_signal(net, solve_operating_point(net)).zin_ohm;
  CAPTURE(zin_measured);
  CAPTURE(zin_small_signal);
  CHECK(zin_measured == doctest::Approx(zin_small_signal).epsilon(2e-3));
}

TEST_CASE("bootstrap, feedback and gate leakage in the DK engine: the reference solver's samples to 1e-9 V") {
  // Both solvers discretise the same network with the trapezoidal rule; the bootstrap
  // capacitor is one more state, the feedback resistor one more conductance, and a gate's
  // reverse leakage a constant current in the gate-source junction of both.
  // The leakage cases: 10 nA (a hot part) leaves a DC-coupled gate through a 10 MΩ source
  // and a 100 MΩ gate resistor in parallel, lifting it by 91 mV; and the same leakage on a
  // gate behind 1 µF on 100 MΩ, lifting it by 1 V. With it, a gate held at 1 V by a 1 GΩ
  // divider behind 1 µF, no leakage. Behind the capacitor, the gate resistor holds a state
  // with a 100 s time constant (3.8e7 samples) and a volt of DC across it, where an engine
  // carrying its states as absolute values parts from the exact DC point by 2-8e-9 V
  // (rounding of 1e-16 amplified by 1/(1 - 5e-8)); the offsets from the DC point the engine
  // carries keep it there (model/engine/dk_engine.hpp).
  const std::string leaky =
      "topology = \"source-follower\"\n[supply]\nvolts = 12\n[signal]\nimpedance = \"10M\"\n[jfet]\nidss = \"4m\"\n"
      "vp = -2\nis = 0\nlambda = 0.01\ngate_leakage = \"10n\"\n[gate]\nresistor = \"100M\"\n[source]\nresistor = \"2.2k\"\n";
  const std::string leaky_behind_cap =
      "topology = \"source-follower\"\n[supply]\nvolts = 12\n[signal]\nimpedance = \"10k\"\n[jfet]\nidss = \"4m\"\n"
      "vp = -2\nis = 0\nlambda = 0.01\ngate_leakage = \"10n\"\n[gate]\ncoupling_cap = \"1u\"\nresistor = \"100M\"\n"
      "[source]\nresistor = \"2.2k\"\n";
  const std::string divider_behind_cap =
      "topology = \"source-follower\"\n[supply]\nvolts = 12\n[signal]\nimpedance = \"10k\"\n[jfet]\nidss = \"4m\"\n"
      "vp = -2\nlambda = 0.01\n[gate]\ncoupling_cap = \"1u\"\nbias_top = \"11G\"\nbias_bottom = \"1G\"\n"
      "[source]\nresistor = \"2.2k\"\n";
  const std::string rows[]{follower(1e6, "bias_bottom = \"100k\"\n", "bootstrap = \"10u\"\n", 0.01),
                           feedback_stage(2.2e6, 0.01), leaky, leaky_behind_cap, divider_behind_cap};
  for (const std::string& text : rows) {
    const network net = build_network(test::stage_from(text));
    for (const double amp : {0.05, 3.0}) {
      CAPTURE(text);
      CAPTURE(amp);
      const test::side_by_side c = test::engine_against_reference(net, amp, 1000.0, 1536, fs_hz);
      CHECK(c.worst_output_v <= 1e-9);
      CHECK(c.worst_ports_v <= 1e-9);
      CHECK(c.engine_failed == 0);
      CHECK(c.reference_failed == 0);
      CHECK(c.output_peak_v > 1e-3);
    }
  }
}

TEST_CASE("a bootstrap belongs to a follower with a gate resistor's foot, feedback to a common-source stage") {
  // The stage file's rules (README "Stage file"): each refused at its own key.
  const std::string cs = "[supply]\nvolts = 12\n[jfet]\nidss = \"4m\"\nvp = -2\n[drain]\nresistor = \"3.3k\"\n[source]\n"
                         "resistor = \"1.5k\"\n";
  struct row {
    std::string text;
    const char* words;
  };
  const row rows[]{
      {cs + "[gate]\ncoupling_cap = \"1u\"\nresistor = \"1M\"\nbias_bottom = \"100k\"\nbootstrap = \"10u\"\n",
       "belongs to a source follower"},
      {follower(1e6, "", "bootstrap = \"10u\"\n", 0.0), "needs a DC path for the gate resistor's foot"},
      {"topology = \"source-follower\"\n[supply]\nvolts = 12\n[jfet]\nidss = \"4m\"\nvp = -2\n[gate]\nbias_top = \"1M\"\n"
       "bias_bottom = \"1M\"\nbootstrap = \"10u\"\n[source]\nresistor = \"2.2k\"\n",
       "needs gate.resistor"},
      {follower(1e6, "bias_bottom = \"100k\"\n", "feedback = \"2.2M\"\n", 0.0), "carries no signal to feed back"},
  };
  for (const row& r : rows) {
    CAPTURE(r.text);
    try {
      (void)test::stage_from(r.text);
      FAIL("accepted");
    } catch (const input_error& e) {
      CHECK(std::string(e.what()).find(r.words) != std::string::npos);
      CHECK(std::string(e.what()).find("test.toml:") == 0);
    }
  }
  // bias_bottom alone is a foot to ground only under a bootstrap; otherwise a half divider.
  CHECK_THROWS_WITH_AS(test::stage_from(follower(1e6, "bias_bottom = \"100k\"\n", "", 0.0)),
                       doctest::Contains("needs both gate.bias_top and gate.bias_bottom"), input_error);
}

}  // namespace test_gate_extras
