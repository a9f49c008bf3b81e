// Headroom as distortion (model/analysis/distortion_headroom.hpp) against the square law's
// closed form.
#include <cmath>
#include <utility>

#include <doctest/doctest.h>

#include "model/analysis/distortion_headroom.hpp"
#include "model/analysis/headroom.hpp"
#include "model/circuit/network.hpp"
#include "model/circuit/operating_point.hpp"
#include "support/stages.hpp"

namespace test_distortion_headroom {

using namespace pinchoff;
using namespace pinchoff::model;

TEST_CASE("THD levels of a square-law stage: 1 %, 3 % and 10 % at A = 4 THD (VGSQ - VP)") {
  // Gray, Hurst, Lewis & Meyer, distortion of a square-law device (from memory, as in
  // test_sweep.cpp): a gate driven by VGSQ + A cos wt, with id = beta (vgs - VP)^2 and
  // beta = IDSS / VP^2, gives HD2 = A / (4 (VGSQ - VP)) and no higher harmonic, so THD = HD2
  // reaches t at A = 4 t (VGSQ - VP), and the fundamental at the drain is
  // 2 beta (VGSQ - VP) A Rd. lambda = 0, no gate current.
  // Two biases. The gate at 0 V: no clean drive (the gate is at the source already), so the
  // sweep spans 1 mV to 10 V. Self-biased by a source resistor Rs bypassed by 10 mF
  // (0.016 ohm at 1 kHz: the degeneration it leaves is 3e-5 of the gain): the drive raises
  // the mean drain current to beta (x^2 + A^2 / 2) (x = VGSQ - VP under drive), and the
  // source follows it, so x solves x = -VP - Rs beta (x^2 + A^2 / 2); with A = 4 t x that is
  // Rs beta (1 + 8 t^2) x^2 + x + VP = 0 (closed form).
  const double idss = 4e-3, vp = -2.0, beta = idss / (vp * vp), rd = 2000.0;
  const std::string plain =
      "[supply]\nvolts = 30\n[jfet]\nidss = \"4m\"\nvp = -2\nis = 0\n[gate]\nresistor = \"1M\"\n[drain]\nresistor = \"2k\"\n";
  const std::string self_biased = test::self_bias_text(30.0, idss, vp, 250.0, rd, "bypass_cap = \"10m\"\n");
  for (const auto& row : {std::pair{plain, 0.0}, std::pair{self_biased, 250.0}}) {
    const std::string& text = row.first;
    const double rs = row.second;  // plain locals: clang 14 cannot capture structured bindings
    const stage st = test::stage_from(text);
    const network net = build_network(st);
    const operating_point op = solve_operating_point(net);
    const headroom_figures head = analyse_headroom(net, op);
    const distortion_headroom d = find_distortion_headroom(st, head);
    CAPTURE(rs);
    CAPTURE(head.clean_drive_vpk);
    REQUIRE(d.levels.size() == 3);
    CHECK(d.unconverged == 0);
    const double thd[] = {1.0, 3.0, 10.0};
    for (int k = 0; k < 3; ++k) {
      const thd_crossing& c = d.levels[static_cast<std::size_t>(k)];
      CAPTURE(c.thd_percent);
      CHECK(c.thd_percent == thd[k]);
      REQUIRE(c.found);
      const double t = thd[k] / 100.0, q = rs * beta * (1.0 + 8.0 * t * t);
      const double x = q > 0.0 ? (-1.0 + std::sqrt(1.0 - 4.0 * q * vp)) / (2.0 * q) : -vp;
      const double a = 4.0 * t * x;
      // THD is proportional to the drive between the two sweep points around a level up to
      // the bias shift's A^2 term (Rs beta A^2 / (2 x) = 1.4e-3 of x at 10 %, over a step
      // of 1.28 in drive), so the log-log interpolation errs by under 1e-3; the coupling
      // capacitor's 1.6 Hz corner (1.3e-6 at 1 kHz) and the steady state's tolerance are
      // far below it. 2e-3 bounds them.
      CHECK(std::fabs(c.drive_vpk / a - 1.0) < 2e-3);
      CHECK(std::fabs(c.output_vpk / (2.0 * beta * x * a * rd) - 1.0) < 2e-3);
    }
  }
}

TEST_CASE("THD levels: the sweep spans the clean drive, and a stage reaches 1 % below its clean swing") {
  // The bass-booster-like stage: 1 % THD comes at a fraction of the hard limit (a square-law
  // channel bends from the first millivolt; common practice).
  const stage st = test::stage_from(test::self_bias_text(9.0, 4e-3, -2.0, 680.0, 3300.0, "bypass_cap = \"47u\"\n"));
  const network net = build_network(st);
  const operating_point op = solve_operating_point(net);
  const headroom_figures head = analyse_headroom(net, op);
  const distortion_headroom d = find_distortion_headroom(st, head);
  CHECK(d.from_vpk == doctest::Approx(head.clean_drive_vpk / 100.0).epsilon(1e-12));
  CHECK(d.to_vpk == doctest::Approx(head.clean_drive_vpk * 30.0).epsilon(1e-12));
  REQUIRE(d.levels[0].found);
  CHECK(d.levels[0].output_vpk < head.symmetric_output_vpk);
  CHECK(d.lowest_drive_thd_percent < 1.0);
  for (std::size_t k = 1; k < d.levels.size(); ++k)
    if (d.levels[k].found) CHECK(d.levels[k].drive_vpk > d.levels[k - 1].drive_vpk);
}

}  // namespace test_distortion_headroom
