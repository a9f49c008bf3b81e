// Networks of more than one JFET through every solver that handles them: the nodal DC
// point, the nodal reference transient, the DK engine's general path and the shooting
// steady state. Checked against closed forms (symmetry of independent copies, the gm model
// of cascaded common-source stages) and against each other.
#include <doctest/doctest.h>

#include <algorithm>
#include <cmath>
#include <numbers>
#include <string>
#include <utility>
#include <vector>

#include "base/error.hpp"
#include "model/engine/dk_engine.hpp"
#include "model/circuit/operating_point.hpp"
#include "model/analysis/small_signal.hpp"
#include "model/engine/steady_state.hpp"
#include "model/engine/transient_reference.hpp"
#include "fixtures/multi_device_networks.hpp"
#include "support/engine_vs_reference.hpp"

namespace test_multi_device {

namespace {

using namespace pinchoff;

constexpr double fs_hz = 384000.0;  // 8 x 48 kHz

double sine(double amplitude_v, double f_hz, int n) { return amplitude_v * std::sin(2.0 * std::numbers::pi * f_hz * n / fs_hz); }

// Fundamental of one period by a naive DFT in long double (an oracle independent of the
// FFT code): peak amplitude, and the sine coefficient whose sign tells an inverting network.
struct fundamental {
  double amplitude, sine_part;
};
fundamental fundamental_of(const std::vector<double>& y) {
  const std::size_t n = y.size();
  long double s = 0.0L, c = 0.0L;
  for (std::size_t t = 0; t < n; ++t) {
    const long double a = 2.0L * std::numbers::pi_v<long double> * static_cast<long double>(t) / n;
    s += y[t] * std::sin(a);
    c += y[t] * std::cos(a);
  }
  return {static_cast<double>(2.0L * std::sqrt(s * s + c * c) / n), static_cast<double>(2.0L * s / n)};
}

double parallel(std::initializer_list<double> rs) {
  double g = 0.0;
  for (double r : rs) g += 1.0 / r;
  return 1.0 / g;
}

}  // namespace

TEST_CASE("two independent copies of a stage: each JFET sits at the single stage's DC point") {
  // Closed form by construction: the copies share only ideal sources and ground, so each
  // solves the single stage's equations. Tolerance: the nodal Newton's step tolerance
  // (1e-9 V + 1e-9 |v|, model/circuit/nodal.hpp), currents to the same relative figure.
  const model::network one = test::stiff_booster();
  REQUIRE(one.devices() == 1);
  const model::network two = test::twin_of(one, 1);
  REQUIRE(two.devices() == 2);
  const model::operating_point op1 = model::solve_operating_point(one);
  const model::operating_point op2 = model::solve_operating_point(two);
  const model::terminal_point ref = op1.at;
  for (int k = 0; k < 2; ++k) {
    CAPTURE(k);
    const model::terminal_point t = model::terminals_of(two, op2.x, k);
    auto close_v = [](double a, double b) { return std::fabs(a - b) <= 2e-9 + 2e-9 * std::fabs(b); };
    CHECK(close_v(t.vg_v, ref.vg_v));
    CHECK(close_v(t.vs_v, ref.vs_v));
    CHECK(close_v(t.vd_v, ref.vd_v));
    CHECK(std::fabs(t.id_a - ref.id_a) <= 2e-9 * std::fabs(ref.id_a));
    CHECK(t.region == ref.region);
  }
  CHECK(ref.region == model::jfet_region::saturation);
  CHECK_THROWS_AS(model::terminals_of(two, op2.x, 2), internal_error);
}

TEST_CASE("two independent copies of a stage: the general DK path gives the single engine's samples") {
  // The same circuit twice, solved by the k = 2 path (LU of I - F Jf) against the k = 1 path
  // (closed-form 2x2): both accept on a bound of 1e-10 V on the port voltages, so outputs
  // agree well inside the 1e-9 V held between the engine and the reference solver.
  const model::network one = test::stiff_booster();
  for (int copy = 0; copy < 2; ++copy) {
    for (double amp : {0.02, 3.0, 12.0}) {
      CAPTURE(copy);
      CAPTURE(amp);
      const model::network two = test::twin_of(one, copy);
      model::dk_engine single(one, fs_hz), twin(two, fs_hz);
      CHECK(twin.devices() == 2);
      CHECK(std::fabs(twin.dc_output_v() - single.dc_output_v()) <= 1e-9);
      double worst_y = 0.0, worst_ports = 0.0;
      for (int n = 0; n < 1536; ++n) {
        const double u = sine(amp, 1000.0, n);
        worst_y = std::max(worst_y, std::fabs(twin.process(u) - single.process(u)));
        for (int k = 0; k < 2; ++k)
          worst_ports = std::max(worst_ports, (twin.ports_v(k) - single.ports_v()).cwiseAbs().maxCoeff());
      }
      CAPTURE(worst_y);
      CAPTURE(worst_ports);
      CHECK(worst_y <= 1e-9);
      CHECK(worst_ports <= 1e-9);
      CHECK(twin.stats().failed == 0);
    }
  }
}

TEST_CASE("two cascaded stages: the DK engine follows the nodal reference to 1e-9 V") {
  // Same circuit, same device model, same trapezoidal rule (model/engine/transient_reference.hpp):
  // the two solvers must give the same samples to 1e-9 V, as for every one-JFET stage.
  const model::network net = test::two_stage_network();
  SUBCASE("small drive") {
    const test::side_by_side c = test::engine_against_reference(net, 0.01, 1000.0, 600, fs_hz);
    CAPTURE(c.worst_output_v);
    CHECK(c.worst_output_v <= 1e-9);
    CHECK(c.worst_ports_v <= 1e-9);
    CHECK(c.engine_failed == 0);
    CHECK(c.reference_failed == 0);
  }
  SUBCASE("deep in clipping: gate conduction and cutoff in both stages") {
    const test::side_by_side c = test::engine_against_reference(net, 6.0, 1000.0, 600, fs_hz);
    test::check_within_1e9(c);
    for (int k = 0; k < 2; ++k) {
      CAPTURE(k);
      const std::size_t j = static_cast<std::size_t>(k);
      CAPTURE(c.min_vgst_v[j]);
      CAPTURE(c.max_vgs_v[j]);
      CHECK(c.min_vgst_v[j] < -0.5);  // channel cut off
      CHECK(c.max_vgs_v[j] > 0.45);   // gate junction conducting
    }
  }
}

TEST_CASE("three JFETs (the second stage doubled in parallel): the DK engine follows the nodal reference") {
  // A third device on the second stage's nodes takes the engine's three-JFET kernel; the
  // same 1e-9 V agreement with the reference solver as above, in clipping.
  model::network net = test::two_stage_network();
  net.jfets.push_back(net.jfets[1]);
  REQUIRE(net.devices() == 3);
  const model::operating_point op = model::solve_operating_point(net);
  // Parallel identical devices share the current: each carries what one would at the same
  // terminal voltages (closed form by construction).
  const model::terminal_point t1 = model::terminals_of(net, op.x, 1), t2 = model::terminals_of(net, op.x, 2);
  CHECK(t1.id_a == t2.id_a);
  model::dk_engine eng(net, op, fs_hz);
  model::transient_reference ref(net, op, fs_hz);
  double worst = 0.0;
  for (int n = 0; n < 600; ++n) {
    const double u = sine(6.0, 1000.0, n);
    worst = std::max(worst, std::fabs(eng.process(u) - ref.process(u)));
    for (int k = 0; k < 3; ++k) worst = std::max(worst, (eng.ports_v(k) - ref.ports_v(k)).cwiseAbs().maxCoeff());
  }
  CAPTURE(worst);
  CHECK(worst <= 1e-9);
  CHECK(eng.stats().failed == 0);
  CHECK(ref.stats().failed == 0);
}

TEST_CASE("two cascaded stages: shooting converges and the tiny-drive gain is the product of the stage gains") {
  // Mid-band gain of a common-source stage with its source bypassed, from the gm model:
  // A = -gm (RD || ro || RL), ro = 1/gds (Sedra & Smith, Microelectronic Circuits, the CS
  // amplifier with ro; from memory). Cascade: the input divider Rg1 / (Rs + Rg1), stage 1
  // loaded by Rg2, stage 2 by the load. Gate junctions are reverse biased (their conductance
  // is checked to be negligible). At 1 kHz every coupling and bypass capacitor is a short to
  // better than 1e-4 dB and the junction capacitances an open (corners in the MHz); the
  // simulation at 1 mV peak must match to 0.01 dB.
  const test::two_stage_values vals;
  const model::network net = test::two_stage_network(vals);
  const model::operating_point op = model::solve_operating_point(net);
  double gm[2], gds[2];
  for (int k = 0; k < 2; ++k) {
    const model::net_jfet& q = net.jfets[static_cast<std::size_t>(k)];
    const double vg = model::node_v(op.x, q.gate), vs = model::node_v(op.x, q.source), vd = model::node_v(op.x, q.drain);
    const model::channel_eval ch = model::drain_current(q.device, vg - vs, vd - vs);
    gm[k] = ch.gm_s;
    gds[k] = ch.gds_s;
    CHECK(model::region_of(q.device, vg - vs, vd - vs) == model::jfet_region::saturation);
    CHECK(model::junction_current(q.device, vg - vs, net.vt_v).g_s < 1e-15);
    CHECK(model::junction_current(q.device, vg - vd, net.vt_v).g_s < 1e-15);
  }
  const double divider = vals.r_gate1 / (vals.r_signal + vals.r_gate1);
  const double a1 = -gm[0] * parallel({vals.r_drain1, 1.0 / gds[0], vals.r_gate2});
  const double a2 = -gm[1] * parallel({vals.r_drain2, 1.0 / gds[1], vals.r_load});
  const double expected = divider * a1 * a2;
  CAPTURE(a1);
  CAPTURE(a2);

  model::steady_state_options opt;
  const model::steady_state_result r = model::periodic_steady_state(net, op, fs_hz, 1e-3, 384, opt);
  CHECK(r.converged);
  CHECK_FALSE(r.used_settling);
  CHECK(r.engine.failed == 0);
  const fundamental f1 = fundamental_of(r.output_v);
  const double gain = f1.amplitude / 1e-3;
  CAPTURE(gain);
  CAPTURE(expected);
  CHECK(f1.sine_part > 0.0);  // two inversions: in phase with the drive
  CHECK(std::fabs(20.0 * std::log10(gain / expected)) <= 0.01);

  SUBCASE("and at a drive that clips both stages") {
    // 1 V peak: stage 1 swings its drain rail to rail, stage 2 conducts at the gate and
    // cuts off. Shooting alone converges here (8 Newton updates when measured); harder
    // drive can need the settling fallback, which is allowed but not wanted here.
    const model::steady_state_result hard = model::periodic_steady_state(net, op, fs_hz, 1.0, 384, opt);
    CAPTURE(hard.distance_v);
    CAPTURE(hard.shooting_iterations);
    CHECK(hard.converged);
    CHECK_FALSE(hard.used_settling);
    CHECK(hard.distance_v <= opt.tol_v);
    CHECK(hard.engine.failed == 0);
  }
}

// The tracked monodromy of `eng` over a period of a 1 kHz sine at `amp` (from three periods
// in), against central differences of the period map over the states (h = 1e-6 V): the
// largest difference of an entry, and the largest entry.
std::pair<double, double> monodromy_against_differences(model::dk_engine& eng, double amp) {
  const int ns = eng.states();
  eng.reset();
  for (int n = 0; n < 3 * 384; ++n) eng.process(sine(amp, 1000.0, n));
  const Eigen::VectorXd x0 = eng.state();
  Eigen::MatrixXd m = Eigen::MatrixXd::Identity(ns, ns);
  for (int n = 0; n < 384; ++n) eng.process_tracked(sine(amp, 1000.0, n), m);
  Eigen::MatrixXd fd(ns, ns);
  const double h = 1e-6;
  for (int c = 0; c < ns; ++c) {
    Eigen::VectorXd end[2];
    for (int side = 0; side < 2; ++side) {
      Eigen::VectorXd x = x0;
      x[c] += side == 0 ? h : -h;
      eng.set_state(x);
      for (int n = 0; n < 384; ++n) eng.process(sine(amp, 1000.0, n));
      end[side] = eng.state();
    }
    fd.col(c) = (end[0] - end[1]) / (2.0 * h);
  }
  return {(m - fd).cwiseAbs().maxCoeff(), m.cwiseAbs().maxCoeff()};
}

TEST_CASE("two cascaded stages: the tracked monodromy equals finite differences of the period map") {
  // process_tracked multiplies A + C Jf (I - F Jf)^-1 D sample by sample (Aprille & Trick
  // 1972); central differences of the period map over the states are the oracle (common
  // practice). Their noise is about tol_v / h = 1e-4 per entry (each sample's solution is
  // exact to 1e-10 V, h = 1e-6 V), so the tolerance is 5e-4 on entries of size up to ~80.
  const model::network net = test::two_stage_network();
  const model::operating_point op = model::solve_operating_point(net);
  model::dk_engine eng(net, op, fs_hz);
  for (double amp : {0.01, 2.0}) {
    CAPTURE(amp);
    const std::pair<double, double> diff = monodromy_against_differences(eng, amp);
    const double worst = diff.first, largest = diff.second;  // (not a structured binding: CAPTURE takes it in a lambda)
    CAPTURE(worst);
    CHECK(worst <= 5e-4);
    CHECK(largest > 1.0);  // not a trivial map
    CHECK(eng.stats().failed == 0);
  }
}

TEST_CASE("three and four cascaded stages: the tracked monodromy equals finite differences of the period map") {
  // As above, on the chains that take the loop keeping (I - F Jf)^-1 in full (its M is
  // what process_tracked multiplies by, dk_general.cpp process_n; at a point accepted after
  // a rescue step, M of the point's own Jf), with and without a DC-coupled follower, at
  // 0.01 and 2 V peak. Same oracle and tolerance.
  for (const int k : {3, 4}) {
    test::cascade_options o;
    o.dc_follower = k == 4;
    o.rail_filters = true;
    const model::network net = test::cascade(k, o);
    const model::operating_point op = model::solve_operating_point(net);
    model::dk_engine eng(net, op, fs_hz);
    if (model::detail::wide_kernels_available()) CHECK(std::string(eng.sample_loop()) == "AVX2+FMA, M in full");
    for (double amp : {0.01, 2.0}) {
      CAPTURE(k);
      CAPTURE(amp);
      const std::pair<double, double> diff = monodromy_against_differences(eng, amp);
      const double worst = diff.first, largest = diff.second;
      CAPTURE(worst);
      CHECK(worst <= 5e-4);
      CHECK(largest > 1.0);  // not a trivial map
      CHECK(eng.stats().failed == 0);
    }
  }
}

}  // namespace test_multi_device
