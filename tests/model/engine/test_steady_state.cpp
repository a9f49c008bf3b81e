// Periodic steady state by shooting: checked against closed-form square-law results,
// hand small-signal gains, and a long brute-force settle of the same engine.
#include <doctest/doctest.h>

#include <cmath>
#include <complex>
#include <numbers>
#include <string>
#include <vector>

#include "fixtures/engine_stages.hpp"
#include "model/analysis/small_signal.hpp"
#include "model/engine/steady_state.hpp"

namespace test_steady_state {

namespace {

using namespace pinchoff;

// Naive DFT in long double (an oracle independent of any FFT code, as kissfft's own
// testcpp.cc does): peak amplitude of harmonic k of one period.
long double harmonic_amplitude(const std::vector<double>& y, int k) {
  const std::size_t n = y.size();
  long double re = 0.0L, im = 0.0L;
  for (std::size_t t = 0; t < n; ++t) {
    const long double a = 2.0L * std::numbers::pi_v<long double> * k * static_cast<long double>(t) / n;
    re += y[t] * std::cos(a);
    im -= y[t] * std::sin(a);
  }
  return 2.0L * std::sqrt(re * re + im * im) / n;
}

// Sine coefficient of the fundamental (its sign tells an inverting stage).
long double fundamental_sine(const std::vector<double>& y) {
  const std::size_t n = y.size();
  long double s = 0.0L;
  for (std::size_t t = 0; t < n; ++t)
    s += y[t] * std::sin(2.0L * std::numbers::pi_v<long double> * static_cast<long double>(t) / n);
  return 2.0L * s / n;
}

double db(long double ratio) { return 20.0 * std::log10(static_cast<double>(ratio)); }

constexpr double fs_hz = 384000.0;  // 8 x 48 kHz
constexpr int period = 384;         // 1 kHz

// Ideal square law (lambda = 0, no gate current), gate driven straight from the generator,
// source grounded, resistive load at the drain: VGSQ = 0.
constexpr std::string_view square_grounded = R"(
name = "square law, grounded source"
topology = "common-source"
[supply]
volts = 24
[jfet]
idss = "4m"
vp = -2.0
is = 0
[signal]
impedance = "0"
[drain]
resistor = "2.2k"
[output]
load = "10k"
)";

// The same law with self bias: a source resistor bypassed by a capacitor that is a short
// at 1 kHz (0.1 F: 1.6 mOhm, against about 180 Ohm at the source node), so the gate-source
// drive is the generator's; its time constant (about 18 s) needs the shooting step, and the
// mean VGS shifts under drive.
constexpr std::string_view square_bypassed = R"(
name = "square law, bypassed self bias"
topology = "common-source"
[supply]
volts = 24
[jfet]
idss = "8m"
vp = -3.0
is = 0
[signal]
impedance = "0"
[drain]
resistor = "1.5k"
[source]
resistor = "390"
bypass_cap = 0.1
[output]
load = "22k"
)";

// Channel-length modulation on, source grounded.
constexpr std::string_view clm_grounded = R"(
name = "lambda, grounded source"
topology = "common-source"
[supply]
volts = 15
[jfet]
idss = "3m"
vp = -1.5
lambda = 0.02
is = 0
[signal]
impedance = "0"
[drain]
resistor = "2.7k"
[output]
load = "47k"
)";

// Source follower, DC-coupled, loaded at the source.
constexpr std::string_view follower_dc = R"(
name = "follower, DC-coupled"
topology = "source-follower"
[supply]
volts = 20
[jfet]
idss = "6m"
vp = -2.0
is = 0
[signal]
impedance = "0"
[source]
resistor = "1k"
[output]
load = "3.3k"
)";

}  // namespace

TEST_CASE("square-law stage: HD2 = A / (4 (VGSQ - VP)) and no third harmonic") {
  struct row {
    const char* source;
    std::string_view toml;
    double amplitude_v;
    double tol_db;
  };
  // Gray, Hurst, Lewis & Meyer, Analysis and Design of Analog Integrated Circuits,
  // distortion section (from memory; CHECKS.md): exact for an ideal square law. With the
  // grounded source the identity is exact up to Newton's tolerance (1e-10 V); with the
  // bypass the source ripple (about 1e-5 of the drive) allows 0.01 dB. VGSQ is the mean VGS
  // in the steady state (ENGINE.md: the bias shifts by the rise beta A^2 / 2 of the mean).
  const row rows[] = {
      {"GHLM square law, grounded source, 10 mV", square_grounded, 0.01, 1e-6},
      {"GHLM square law, grounded source, 200 mV", square_grounded, 0.2, 1e-6},
      {"GHLM square law, bypassed source, 20 mV", square_bypassed, 0.02, 0.01},
      {"GHLM square law, bypassed source, 100 mV", square_bypassed, 0.1, 0.01},
      {"GHLM square law, bypassed source, 400 mV", square_bypassed, 0.4, 0.01},
  };
  for (const row& r : rows) {
    const std::string source = r.source;
    CAPTURE(source);
    const model::network net = pinchoff::test::network_of(r.toml, r.source);
    const model::operating_point op = model::solve_operating_point(net);
    const model::steady_state_result ss = model::periodic_steady_state(net, op, fs_hz, r.amplitude_v, period);
    REQUIRE(ss.converged);
    CHECK(ss.engine.failed == 0);
    const long double h1 = harmonic_amplitude(ss.output_v, 1);
    const long double h2 = harmonic_amplitude(ss.output_v, 2);
    const long double h3 = harmonic_amplitude(ss.output_v, 3);
    const double expected = r.amplitude_v / (4.0 * (ss.mean_vgs_v - net.jfet().device.vp_v));
    CAPTURE(ss.mean_vgs_v);
    CHECK(std::fabs(db(h2 / h1) - db(expected)) <= r.tol_db);
    if (r.tol_db < 1e-3) {
      // Grounded source: H3 at numerical noise. An output error of at most gain * tol_v
      // against a fundamental of gain * A gives at most 20 log10(tol_v / A) dBc.
      CHECK(db(h3 / h1) <= db(1e-10L / r.amplitude_v));
    } else {
      // Bypassed source: the 2nd-harmonic current through the bypass (|Zc(2 f)|) mixes with
      // the drive: H3 ~ HD2 gm A |Zc(2f)| / (2 (VGSQ - VP)) (first-order perturbation,
      // computed), far below HD2; allow twice that.
      const double vgst = ss.mean_vgs_v - net.jfet().device.vp_v;
      const double gm = 2.0 * (8e-3 / 9.0) * vgst;
      const double zc2 = 1.0 / (2.0 * std::numbers::pi * 2000.0 * 0.1);
      const double h3_estimate = expected * gm * r.amplitude_v * zc2 / (2.0 * vgst);
      CHECK(db(h3 / h1) <= db(2.0L * h3_estimate));
    }
  }
  SUBCASE("under drive the mean VGS moves, as the identity needs") {
    const model::network net = pinchoff::test::network_of(square_bypassed, "bypassed");
    const model::operating_point op = model::solve_operating_point(net);
    const model::steady_state_result ss = model::periodic_steady_state(net, op, fs_hz, 0.4, period);
    // Mean current up by beta A^2 / 2 lowers the mean VGS (ENGINE.md): clearly measurable.
    CHECK(ss.mean_vgs_v < op.at.vgs_v - 1e-3);
  }
}

TEST_CASE("tiny-drive gain equals the hand small-signal gain") {
  struct row {
    const char* source;
    std::string_view toml;
    double expected_gain;  // signed, V/V
  };
  // Hand formulas (Boylestad & Nashelsky ch. 7-8; Sedra & Smith; square law with
  // beta = IDSS / VP^2):
  std::vector<row> rows;
  {
    // Grounded source, VGS = 0: gm = 2 IDSS / |VP|, gain = -gm (RD || RL).
    const double gm = 2.0 * 4e-3 / 2.0, rth = 2.2e3 * 10e3 / 12.2e3;
    rows.push_back({"grounded source: -gm RD||RL", square_grounded, -gm * rth});
  }
  {
    // Self bias, fully bypassed: x = VGS - VP solves RS beta x^2 + x + VP = 0 (exact
    // quadratic of Shockley's law with VGS = -RS ID); gm = 2 beta x; gain = -gm RD||RL.
    const double beta = 8e-3 / 9.0, rs = 390.0, vp = -3.0;
    const double x = (-1.0 + std::sqrt(1.0 - 4.0 * rs * beta * vp)) / (2.0 * rs * beta);
    const double gm = 2.0 * beta * x, rth = 1.5e3 * 22e3 / 23.5e3;
    rows.push_back({"bypassed self bias: -gm RD||RL", square_bypassed, -gm * rth});
  }
  {
    // Lambda: Thevenin drain supply VTH, RTH; ID = IDSS (1 + lambda VDS), VDS = VTH - ID RTH
    // -> ID = IDSS (1 + lambda VTH) / (1 + IDSS lambda RTH); gm = 2 IDSS/|VP| (1 + lambda VDS),
    // gds = IDSS lambda; gain = -gm / (gds + 1/RTH).
    const double idss = 3e-3, vp = -1.5, lambda = 0.02;
    const double vth = 15.0 * 47e3 / (2.7e3 + 47e3), rth = 2.7e3 * 47e3 / (2.7e3 + 47e3);
    const double id = idss * (1.0 + lambda * vth) / (1.0 + idss * lambda * rth);
    const double vds = vth - id * rth;
    const double gm = 2.0 * idss / std::fabs(vp) * (1.0 + lambda * vds), gds = idss * lambda;
    rows.push_back({"channel-length modulation: -gm / (gds + 1/RTH)", clm_grounded, -gm / (gds + 1.0 / rth)});
  }
  {
    // Follower: source load RS' = RS || RL; x solves RS' beta x^2 + x + VP = 0;
    // gain = gm RS' / (1 + gm RS').
    const double beta = 6e-3 / 4.0, rsl = 1e3 * 3.3e3 / 4.3e3, vp = -2.0;
    const double x = (-1.0 + std::sqrt(1.0 - 4.0 * rsl * beta * vp)) / (2.0 * rsl * beta);
    const double gm = 2.0 * beta * x;
    rows.push_back({"follower: gm RS' / (1 + gm RS')", follower_dc, gm * rsl / (1.0 + gm * rsl)});
  }
  for (const row& r : rows) {
    const std::string source = r.source;
    CAPTURE(source);
    const model::network net = pinchoff::test::network_of(r.toml, r.source);
    const model::operating_point op = model::solve_operating_point(net);
    const double a = 1e-3;
    const model::steady_state_result ss = model::periodic_steady_state(net, op, fs_hz, a, period);
    REQUIRE(ss.converged);
    const double gain = static_cast<double>(fundamental_sine(ss.output_v)) / a;
    CAPTURE(gain);
    CAPTURE(r.expected_gain);
    CHECK(gain * r.expected_gain > 0.0);  // same sign
    CHECK(std::fabs(db(std::fabs(gain)) - db(std::fabs(r.expected_gain))) <= 0.01);
  }
}

TEST_CASE("shooting gives the periodic state a long brute-force settle reaches") {
  // Booster-like stage with long coupling time constants (22 ms at the gate, 47 ms at the
  // output), driven into gate conduction so the coupling capacitor's charge shifts. The
  // brute force runs 3 s (over 60 of the longest time constants: e^-60 of the start error).
  constexpr std::string_view stage = R"(
name = "long time constants"
topology = "common-source"
[supply]
volts = 9
resistance = "100"
capacitance = "10u"
[jfet]
idss = "5m"
vp = -1.8
lambda = 0.005
cgs = "3p"
cgd = "1.5p"
[signal]
impedance = "2k"
[gate]
coupling_cap = "22n"
resistor = "1M"
[drain]
resistor = "3.3k"
[source]
resistor = "390"
bypass_cap = "4.7u"
[output]
coupling_cap = "470n"
load = "100k"
)";
  const double rate = 96000.0;
  const int p = 96;  // 1 kHz
  const model::network net = pinchoff::test::network_of(stage, "long");
  const model::operating_point op = model::solve_operating_point(net);
  for (double amp : {0.2, 4.0}) {
    CAPTURE(amp);
    model::dk_engine eng(net, op, rate);
    const model::steady_state_result ss = model::periodic_steady_state(eng, amp, p);
    REQUIRE(ss.converged);
    CHECK_FALSE(ss.used_settling);
    CHECK(ss.periods_simulated < 30);

    model::dk_engine brute(net, op, rate);
    std::vector<double> last(static_cast<std::size_t>(p));
    for (int k = 0; k < 3000; ++k)
      for (int n = 0; n < p; ++n) last[static_cast<std::size_t>(n)] = brute.process(amp * std::sin(2.0 * std::numbers::pi * n / p));
    double worst = 0.0;
    for (int n = 0; n < p; ++n) worst = std::max(worst, std::fabs(last[static_cast<std::size_t>(n)] - ss.output_v[static_cast<std::size_t>(n)]));
    CHECK(worst <= 1e-9);
    CHECK((brute.state() - eng.state()).cwiseAbs().maxCoeff() <= 1e-9);
    if (amp > 1.0) CHECK(ss.mean_vgs_v < op.at.vgs_v - 0.1);  // the gate conduction shifted the bias
  }
  SUBCASE("the settling fallback reaches the same state") {
    model::steady_state_options o;
    o.max_shooting_iterations = 0;
    model::dk_engine a(net, op, rate), b(net, op, rate);
    const model::steady_state_result shot = model::periodic_steady_state(a, 4.0, p);
    const model::steady_state_result settled = model::periodic_steady_state(b, 4.0, p, o);
    CHECK(settled.used_settling);
    CHECK(settled.converged);
    CHECK(settled.periods_simulated > 100);
    double worst = 0.0;
    for (int n = 0; n < p; ++n) worst = std::max(worst, std::fabs(shot.output_v[static_cast<std::size_t>(n)] - settled.output_v[static_cast<std::size_t>(n)]));
    CHECK(worst <= 1e-9);
  }
}

TEST_CASE("hard drive into every test stage finishes with finite results") {
  for (const auto& st : pinchoff::test::engine_stages) {
    const std::string name = st.name;
    CAPTURE(name);
    const auto [net, op] = pinchoff::test::solve(st);
    model::steady_state_options o;
    o.periods_out = 2;
    const model::steady_state_result ss = model::periodic_steady_state(net, op, fs_hz, 20.0, period, o);
    CHECK(ss.converged);
    CHECK(ss.engine.failed == 0);
    CHECK(ss.output_v.size() == 2u * period);
    bool finite = std::isfinite(ss.mean_vgs_v) && std::isfinite(ss.mean_vds_v) && std::isfinite(ss.state_change_v);
    for (double y : ss.output_v) finite = finite && std::isfinite(y);
    CHECK(finite);
    // The two returned periods are the same period.
    double worst = 0.0;
    for (int n = 0; n < period; ++n)
      worst = std::max(worst, std::fabs(ss.output_v[static_cast<std::size_t>(n)] - ss.output_v[static_cast<std::size_t>(n + period)]));
    CHECK(worst <= 1e-9);
  }
}

TEST_CASE("at tiny drive the simulation follows the small-signal response under the bilinear map") {
  // The trapezoidal rule is the bilinear transform s = (2/T)(1 - z^-1)/(1 + z^-1)
  // (Oppenheim & Schafer, Discrete-Time Signal Processing, sec. 7.1): a linear(ised)
  // network simulated at rate 1/T answers a sine of frequency f exactly as the analog
  // network answers frequency fw = tan(pi f T) / (pi T). Checked against the complex
  // small-signal solve (every capacitor as sC) through the coupling, bypass and junction
  // capacitances; at 1 mV the distortion terms move the fundamental by about 1e-6.
  struct row {
    const char* source;
    int samples_per_period;  // f = 384 kHz / this
  };
  const row rows[] = {{"20 Hz: coupling and bypass corners", 19200}, {"1 kHz: mid-band", 384}, {"16 kHz: junction capacitances", 24}};
  for (std::string_view toml : {pinchoff::test::booster_9v, pinchoff::test::pchannel_9v}) {
    const model::network net = pinchoff::test::network_of(toml, "stage");
    const model::operating_point op = model::solve_operating_point(net);
    const model::jfet_linear lin = model::linearise(net, op);
    for (const row& r : rows) {
      const std::string source = r.source;
      CAPTURE(source);
      const double a = 1e-3;
      const model::steady_state_result ss = model::periodic_steady_state(net, op, fs_hz, a, r.samples_per_period);
      REQUIRE(ss.converged);
      // Complex gain of the simulation: the input is a sin(w n), the fundamental's DFT bin Y1.
      const std::size_t n = ss.output_v.size();
      std::complex<long double> y1 = 0.0L;
      for (std::size_t t = 0; t < n; ++t)
        y1 += static_cast<long double>(ss.output_v[t]) *
              std::polar(1.0L, -2.0L * std::numbers::pi_v<long double> * static_cast<long double>(t) / n);
      y1 *= 2.0L / n;
      const std::complex<double> h_sim(static_cast<double>((std::complex<long double>(0.0L, 1.0L) * y1 / static_cast<long double>(a)).real()),
                                       static_cast<double>((std::complex<long double>(0.0L, 1.0L) * y1 / static_cast<long double>(a)).imag()));
      const double f = fs_hz / r.samples_per_period;
      const double fw = std::tan(std::numbers::pi * f / fs_hz) / (std::numbers::pi / fs_hz);
      model::ac_setup setup;
      setup.midband = false;
      setup.s = {0.0, 2.0 * std::numbers::pi * fw};
      setup.generator_v = 1.0;
      const std::complex<double> h_ac = model::solve_small_signal(net, lin, setup)[net.output_node];
      CAPTURE(h_sim);
      CAPTURE(h_ac);
      CHECK(std::abs(h_sim - h_ac) <= 1e-5 * std::abs(h_ac));
    }
  }
}

}  // namespace test_steady_state
