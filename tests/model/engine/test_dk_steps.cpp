// The steps both DK solvers share (model/engine/dk_steps.hpp) and the engine's statistics
// (dk_stats.hpp), each against its closed form: the junction limiting of a Newton step
// against the SPICE2 limiting formula, the sub-stepping's sequence of parts, the warm
// start's Adams-Bashforth weights, and the sum of two runs' statistics.
#include <doctest/doctest.h>

#include <algorithm>
#include <array>
#include <cmath>
#include <vector>

#include "model/engine/dk_stats.hpp"
#include "model/engine/dk_steps.hpp"

namespace test_dk_steps {

namespace {

using namespace pinchoff;

// A junction with n Vt = 26 mV and the critical voltage at 0.6 V (set directly: the
// limiting reads only these two).
model::detail::device_consts junction_26mv() {
  model::detail::device_consts d;
  d.nvt_v = 0.026;
  d.inv_nvt = 1.0 / d.nvt_v;
  d.vcrit_v = 0.6;
  return d;
}

// A sub-stepping path whose parts converge only when they span at most `widest` of the
// sample's change of p: it records every part it is asked to solve.
struct recording_path {
  explicit recording_path(double w) : widest(w) {}
  double widest;
  double at{0.0};
  std::vector<double> asked;
  std::vector<bool> last_flags;
  int restarts{0}, taken{0}, held{0};
  void restart() {
    ++restarts;
    at = 0.0;
  }
  bool step_to(double frac, bool last, int& evals) {
    asked.push_back(frac);
    last_flags.push_back(last);
    ++evals;
    if (frac - at > widest + 1e-15) return false;
    at = frac;
    return true;
  }
  void take() { ++taken; }
  void hold() { ++held; }
};

}  // namespace

TEST_CASE("junction limiting cuts a large forward step to the logarithmic one of SPICE2") {
  // Nagel 1975 (SPICE2, UCB ERL-M520, pnjlim; from memory): above vcrit, a forward step of
  // more than 2 n Vt from v_old > 0 ends at v_old + n Vt ln(1 + (v_new - v_old) / n Vt);
  // from v_old <= 0 at n Vt ln(v_new / n Vt). The whole port step is scaled so the junction
  // lands there.
  const model::detail::device_consts d = junction_26mv();
  const double nvt = d.nvt_v;

  // Gate-source junction from 0.65 V by +1 V, the gate-drain junction unmoved at 0 V.
  const double a1 = model::detail::junction_step_scale(d, 0.65, 0.65, 1.0, 1.0);
  CHECK(a1 == doctest::Approx(nvt * std::log(1.0 + 1.0 / nvt)).epsilon(1e-14));

  // From reverse bias (-0.5 V) to +1 V: the second form; the drain junction far reverse.
  const double a2 = model::detail::junction_step_scale(d, -0.5, 4.5, 1.5, 1.5);
  CHECK(a2 == doctest::Approx((nvt * std::log(1.0 / nvt) + 0.5) / 1.5).epsilon(1e-14));

  // The gate-drain junction (vgs - vds) limited alone: vds from -0.65 V by -1 V.
  const double a3 = model::detail::junction_step_scale(d, 0.0, -0.65, 0.0, -1.0);
  CHECK(a3 == doctest::Approx(nvt * std::log(1.0 + 1.0 / nvt)).epsilon(1e-14));

  // Both junctions limited: the larger cut wins.
  const double a4 = model::detail::junction_step_scale(d, 0.65, 0.0, 2.0, 1.0);
  const double gs = nvt * std::log(1.0 + 2.0 / nvt) / 2.0, gd = nvt * std::log(1.0 + 1.0 / (nvt)) / 1.0;
  CHECK(a4 == doctest::Approx(std::min(gs, gd)).epsilon(1e-14));
}

TEST_CASE("junction limiting leaves a step alone below vcrit or within 2 n Vt, and cuts at most to 1/1000") {
  const model::detail::device_consts d = junction_26mv();
  CHECK(model::detail::junction_step_scale(d, 0.1, 0.1, 0.45, 0.45) == 1.0);    // lands at 0.55 V < vcrit
  CHECK(model::detail::junction_step_scale(d, 0.62, 0.62, 0.05, 0.05) == 1.0);  // 50 mV < 2 n Vt = 52 mV
  CHECK(model::detail::junction_step_scale(d, -3.0, -3.0, 0.5, 0.5) == 1.0);    // reverse, stays below
  // A 1 MV step would be cut to 4.6e-7 of itself; the scale stops at 1e-3.
  CHECK(model::detail::junction_step_scale(d, 0.65, 0.65, 1e6, 1e6) == 1e-3);
}

TEST_CASE("sub-stepping halves the parts until each converges, and the last part ends exactly at the sample") {
  // Parts of 1/8 of the step converge, wider ones fail: level 1 (halves) fails at its first
  // part, level 2 (quarters) too, level 3 solves all eight.
  recording_path path(1.0 / 8.0);
  model::dk_stats st;
  int evals = 0;
  model::detail::substep(path, 6, st, evals);
  const std::vector<double> expected{0.5, 0.25, 0.125, 0.25, 0.375, 0.5, 0.625, 0.75, 0.875, 1.0};
  REQUIRE(path.asked.size() == expected.size());
  for (std::size_t k = 0; k < expected.size(); ++k) CHECK(path.asked[k] == expected[k]);
  for (std::size_t k = 0; k + 1 < expected.size(); ++k) CHECK_FALSE(path.last_flags[k]);
  CHECK(path.last_flags.back());
  CHECK(path.restarts == 3);
  CHECK(path.taken == 1);
  CHECK(path.held == 0);
  CHECK(evals == 10);
  CHECK(st.substepped == 1);
  CHECK(st.failed == 0);
}

TEST_CASE("sub-stepping that no level settles holds the sample and counts it as failed") {
  recording_path path(1.0 / 64.0);  // needs level 6; only 2 allowed
  model::dk_stats st;
  int evals = 0;
  model::detail::substep(path, 2, st, evals);
  CHECK(path.asked.size() == 2);  // the first part of each level
  CHECK(path.taken == 0);
  CHECK(path.held == 1);
  CHECK(st.substepped == 0);
  CHECK(st.failed == 1);

  recording_path none(1.0);
  model::dk_stats st0;
  model::detail::substep(none, 0, st0, evals);  // no sub-steps allowed: held at once
  CHECK(none.asked.empty());
  CHECK(none.held == 1);
  CHECK(st0.failed == 1);
}

TEST_CASE("the warm start's weights are the Adams-Bashforth coefficients of orders 0 to 3") {
  // Hairer, Norsett & Wanner, Solving ODEs I, sec. III.1 (from memory): order 1 (Euler)
  // 1; order 2: 3/2, -1/2; order 3: 23/12, -16/12, 5/12. Each sums to 1 (exact for a
  // constant derivative); order 0 takes the last solution as it is.
  using model::detail::warm_start_weights;
  CHECK(warm_start_weights(0) == std::array<double, 3>{0.0, 0.0, 0.0});
  CHECK(warm_start_weights(1) == std::array<double, 3>{1.0, 0.0, 0.0});
  CHECK(warm_start_weights(2) == std::array<double, 3>{1.5, -0.5, 0.0});
  const std::array<double, 3> w3 = warm_start_weights(3);
  CHECK(w3[0] == doctest::Approx(23.0 / 12.0).epsilon(1e-15));
  CHECK(w3[1] == doctest::Approx(-16.0 / 12.0).epsilon(1e-15));
  CHECK(w3[2] == doctest::Approx(5.0 / 12.0).epsilon(1e-15));
  CHECK(w3[0] + w3[1] + w3[2] == doctest::Approx(1.0).epsilon(1e-15));
}

TEST_CASE("two runs' statistics add: counts summed, the most evaluations in one sample the larger") {
  // Closed form of the definitions in dk_stats.hpp.
  model::dk_stats a;
  a.samples = 1000;
  a.evaluations = 1500;
  a.max_evaluations = 7;
  a.substepped = 3;
  a.failed = 1;
  a.bound_misses = 2;
  a.pivoted = 1;
  model::dk_stats b;
  b.samples = 24;
  b.evaluations = 50;
  b.max_evaluations = 9;
  b.substepped = 0;
  b.failed = 4;
  b.bound_misses = 5;
  b.pivoted = 3;
  model::dk_stats sum = a;
  sum += b;
  CHECK(sum.samples == 1024);
  CHECK(sum.evaluations == 1550);
  CHECK(sum.max_evaluations == 9);
  CHECK(sum.substepped == 3);
  CHECK(sum.failed == 5);
  CHECK(sum.bound_misses == 7);
  CHECK(sum.pivoted == 4);
  CHECK(sum.mean_evaluations() == doctest::Approx(1550.0 / 1024.0));
  // The other way round gives the same, and adding nothing changes nothing.
  model::dk_stats rev = b;
  rev += a;
  CHECK(rev.max_evaluations == 9);
  CHECK(rev.evaluations == 1550);
  model::dk_stats same = a;
  same += model::dk_stats{};
  CHECK(same.samples == a.samples);
  CHECK(same.max_evaluations == a.max_evaluations);
}

}  // namespace test_dk_steps
