// The shooting's chord steps (the monodromy of the last tracked period reused while Newton
// converges fast) against tracking every period, and on a one-JFET stage against a long
// plain settle of the same engine: the periodic solution is a property of the circuit and the drive, not of
// how it is found (Aprille & Trick 1972), so all three must give the same period to within
// the acceptance (tol_v = 1e-10 V on the start state; 1e-9 V allowed on the output).
#include <doctest/doctest.h>

#include <algorithm>
#include <cmath>
#include <numbers>
#include <string>
#include <vector>

#include "base/error.hpp"
#include "base/units.hpp"
#include "model/circuit/network.hpp"
#include "model/circuit/operating_point.hpp"
#include "model/circuit/stage_file.hpp"
#include "model/engine/steady_state.hpp"

namespace test_steady_state_reuse {

namespace {

using namespace pinchoff;

model::network preset_network(const char* name) {
  return model::build_network(model::read_stage_file(std::string(PINCHOFF_PRESETS_DIR) + "/" + name));
}

double worst_difference(const std::vector<double>& a, const std::vector<double>& b) {
  double worst = 0.0;
  for (std::size_t n = 0; n < std::min(a.size(), b.size()); ++n) worst = std::max(worst, std::fabs(a[n] - b[n]));
  return a.size() == b.size() ? worst : 1e300;
}

// The steady state with and without reuse, and a plain settle of `settle_periods` periods
// (none: not compared).
void check_same_state(const model::network& net, double amplitude_v, int period, int settle_periods) {
  const model::operating_point op = model::solve_operating_point(net);
  const double rate = 96000.0;
  model::steady_state_options reuse, every;
  every.reuse_monodromy = false;
  model::dk_engine a(net, op, rate), b(net, op, rate);
  const model::steady_state_result fast = model::periodic_steady_state(a, amplitude_v, period, reuse);
  const model::steady_state_result tracked = model::periodic_steady_state(b, amplitude_v, period, every);
  REQUIRE(fast.converged);
  REQUIRE(tracked.converged);
  CHECK_FALSE(fast.used_settling);
  CAPTURE(fast.periods_tracked);
  CAPTURE(tracked.periods_tracked);
  CHECK(fast.periods_tracked < tracked.periods_tracked);
  CHECK(tracked.periods_tracked == tracked.periods_simulated);
  CHECK(worst_difference(fast.output_v, tracked.output_v) <= 1e-9);
  CHECK((a.state() - b.state()).cwiseAbs().maxCoeff() <= 1e-9);

  if (settle_periods == 0) return;
  model::dk_engine brute(net, op, rate);
  std::vector<double> last(static_cast<std::size_t>(period));
  for (int k = 0; k < settle_periods; ++k)
    for (int n = 0; n < period; ++n)
      last[static_cast<std::size_t>(n)] = brute.process(amplitude_v * std::sin(2.0 * std::numbers::pi * n / period));
  CHECK(worst_difference(fast.output_v, last) <= 1e-9);
  CHECK((brute.state() - a.state()).cwiseAbs().maxCoeff() <= 1e-9);
}

}  // namespace

TEST_CASE("chord steps reach the state of full Newton and of a long settle: one JFET") {
  const model::network net = preset_network("bass-booster-9v.toml");
  REQUIRE(net.devices() == 1);
  // 1 kHz at 96 kHz; the slowest mode (47 uF bypass, 1 uF into 100k) settles within 3000
  // periods to far below 1e-9 V.
  for (double amp : {0.05, 1.0}) {
    CAPTURE(amp);
    check_same_state(net, amp, 96, 3000);
  }
}

TEST_CASE("chord steps reach the state of full Newton and of a long settle: a three-stage chain") {
  const model::network net = preset_network("three-stage-overdrive-9v.toml");
  REQUIRE(net.devices() == 3);
  // Against full Newton only: a plain settle of the chain has not reached the periodic
  // state after 6000 periods (its output still 4e-7 V off at 10 mV drive).
  for (double amp : {0.01, 0.5}) {
    CAPTURE(amp);
    check_same_state(net, amp, 96, 0);
  }
}

TEST_CASE("a two-stage boost at +5 dBu, where the damped Newton stalls, converges by shooting") {
  // The damped steps stall here (the estimated distance grows for two full steps on the
  // way); full Newton steps from the best start converge. Before, the settling fallback
  // ran 772 periods at 1 kHz, 8x.
  const model::network net = preset_network("two-stage-boost-9v.toml");
  const model::operating_point op = model::solve_operating_point(net);
  model::dk_engine eng(net, op, 384000.0);
  const model::steady_state_result ss = model::periodic_steady_state(eng, base::vpk_from_dbu(5.0), 1153, [] {
    model::steady_state_options o;
    o.cycles = 3;
    return o;
  }());
  CHECK(ss.converged);
  CHECK_FALSE(ss.used_settling);
  CHECK(ss.distance_v <= 1e-10);
  CHECK(ss.periods_simulated < 60);
}

TEST_CASE("the monodromy over a period is the same with and without the wide kernels") {
  // sensitivity <- (d x_n / d x_{n-1}) sensitivity over 96 samples of a hard sine, on a
  // one-JFET stage (8 padded rows) and a chain (24): the two kernel sets differ only in
  // rounding (fused multiply-adds, and the sample loops' own). The chain in the wide loop
  // with the same Newton as the portable one (torn and factored steps): the loop that keeps
  // (I - F Jf)^-1 in full takes other iterates, and Jf at another iterate within the
  // Newton tolerance moves the monodromy by more than rounding (its own check against
  // finite differences is in test_multi_device.cpp).
  for (const char* name : {"bass-booster-9v.toml", "three-stage-overdrive-9v.toml"}) {
    CAPTURE(name);
    const model::network net = preset_network(name);
    const model::operating_point op = model::solve_operating_point(net);
    model::dk_options wide, portable;
    wide.full_inverse = false;
    portable.wide_kernels = false;
    model::dk_engine a(net, op, 96000.0, wide), b(net, op, 96000.0, portable);
    const int ns = a.states();
    Eigen::MatrixXd sa = Eigen::MatrixXd::Identity(ns, ns), sb = sa;
    for (int n = 0; n < 96; ++n) {
      const double g = 0.8 * std::sin(2.0 * std::numbers::pi * n / 96.0);
      a.process_tracked(g, sa);
      b.process_tracked(g, sb);
    }
    CHECK(sa.allFinite());
    const double scale = std::max(1.0, sb.cwiseAbs().maxCoeff());
    CHECK((sa - sb).cwiseAbs().maxCoeff() <= 1e-11 * scale);
  }
}

TEST_CASE("the settling fallback stops at its sample budget and says it did not converge") {
  // Without shooting the bass booster at 4 V settles over hundreds of periods (the 47 uF
  // bypass); a budget of ten 96-sample periods ends it unconverged after the first period
  // and ten settling ones.
  const model::network net = preset_network("bass-booster-9v.toml");
  const model::operating_point op = model::solve_operating_point(net);
  model::steady_state_options o;
  o.max_shooting_iterations = 0;
  o.max_settle_samples = 96 * 10;
  model::dk_engine eng(net, op, 96000.0);
  const model::steady_state_result ss = model::periodic_steady_state(eng, 4.0, 96, o);
  CHECK(ss.used_settling);
  CHECK_FALSE(ss.converged);
  CHECK(ss.periods_simulated == 11);
  CHECK(ss.distance_v > o.tol_v);
}

TEST_CASE("shooting started from a nearby drive's state and monodromy reaches the same periodic state") {
  // Where shooting starts, and which monodromy its first steps use, changes only how many
  // periods it takes (Aprille & Trick 1972: the periodic solution of a stable stage is
  // unique). The drive 2.5 dB up from a solved one, started from that one's periodic state
  // and final monodromy (the chord and Broyden steps on it), against the same drive from
  // the DC state tracking every period: within the acceptance, on one JFET and on a chain
  // deep in clipping, and with fewer tracked periods.
  for (const char* name : {"bass-booster-9v.toml", "three-stage-overdrive-9v.toml"}) {
    for (double amp : {0.05, 1.0}) {
      CAPTURE(name);
      CAPTURE(amp);
      const model::network net = preset_network(name);
      const model::operating_point op = model::solve_operating_point(net);
      const double rate = 96000.0;
      const int period = 97;
      model::steady_state_options cold, every;
      cold.cycles = every.cycles = 3;
      every.reuse_monodromy = false;
      model::dk_engine e0(net, op, rate), e1(net, op, rate), e2(net, op, rate);
      const model::steady_state_result below = model::periodic_steady_state(e0, amp / 1.3335, period, cold);
      REQUIRE(below.converged);
      REQUIRE(below.monodromy.rows() == e0.states());
      model::steady_state_options warm = cold;
      warm.start_from = below.periodic_state;
      warm.start_monodromy = below.monodromy;
      const model::steady_state_result a = model::periodic_steady_state(e1, amp, period, warm);
      const model::steady_state_result b = model::periodic_steady_state(e2, amp, period, every);
      REQUIRE(a.converged);
      REQUIRE(b.converged);
      CHECK_FALSE(a.used_settling);
      CHECK(worst_difference(a.output_v, b.output_v) <= 1e-9);
      CHECK((a.periodic_state - b.periodic_state).cwiseAbs().maxCoeff() <= 1e-9);
      CAPTURE(a.periods_tracked);
      CAPTURE(b.periods_tracked);
      CHECK(a.periods_tracked < b.periods_tracked);
    }
  }
}

TEST_CASE("a start monodromy of the wrong size is refused as an internal error") {
  const model::network net = preset_network("bass-booster-9v.toml");
  const model::operating_point op = model::solve_operating_point(net);
  model::dk_engine eng(net, op, 96000.0);
  model::steady_state_options o;
  o.start_monodromy = Eigen::MatrixXd::Identity(eng.states() + 1, eng.states() + 1);
  CHECK_THROWS_AS(model::periodic_steady_state(eng, 0.1, 96, o), pinchoff::internal_error);
}

}  // namespace test_steady_state_reuse
