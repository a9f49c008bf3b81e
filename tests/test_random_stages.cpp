// Property test: every random valid stage gets an operating point that satisfies
// Kirchhoff's current law, and finite small-signal and headroom figures.
#include <cmath>
#include <cstdlib>
#include <sstream>

#include <doctest/doctest.h>

#include "model/headroom.hpp"
#include "model/network.hpp"
#include "model/nodal.hpp"
#include "model/operating_point.hpp"
#include "model/small_signal.hpp"
#include "model/sweep.hpp"
#include "support/random_stage.hpp"

using namespace pinchoff;
using namespace pinchoff::model;

namespace {
std::string describe(const stage& s) {
  std::ostringstream os;
  os.precision(17);
  os << (s.topo == topology::common_source ? "CS" : "SF") << (s.pol == polarity::p ? " p" : " n")
     << " V=" << s.supply.volts_v << " Rsup=" << s.supply.resistance_ohm << " Csup=" << s.supply.capacitance_f << " idss=" << s.jfet.idss_a
     << " vp=" << s.jfet.vp_v << " lambda=" << s.jfet.lambda_per_v << " Rsig=" << s.signal_impedance_ohm
     << " Cin=" << s.gate.coupling_cap_f << " RG=" << s.gate.resistor_ohm << " top=" << s.gate.bias_top_ohm
     << " bottom=" << s.gate.bias_bottom_ohm << " RD=" << s.drain_resistor_ohm << " RSu=" << s.source.unbypassed_ohm
     << " RS=" << s.source.resistor_ohm << " CS=" << s.source.bypass_cap_f << " RL=" << s.output.load_ohm;
  return os.str();
}
struct random_counts {
  int drawn{0}, solved{0}, swept{0}, sweep_points_with_failures{0};
};

// Draws `count` stages; every one must solve, and every `sweep_every`-th is also swept at
// three drives. Checks are doctest CHECKs, so a failure names the stage.
random_counts check_random_stages(std::uint64_t seed, int count, int sweep_every) {
  test::stage_sampler sampler(seed);
  random_counts c;
  sweep_settings sw;
  sw.drives_vpk = {0.01, 0.3, 3.0};
  sw.threads = 1;
  for (int k = 0; k < count; ++k) {
    const stage s = sampler.draw();
    ++c.drawn;
    CAPTURE(k);
    const std::string what = describe(s);
    CAPTURE(what);
    validate(s);
    const network net = build_network(s);
    operating_point op;
    REQUIRE_NOTHROW(op = solve_operating_point(net));
    const mna_system lin = assemble_linear(net, uniform_caps(net, cap_treatment::kind::open), net.supply_v, 0.0);
    CHECK(op.newton.converged);
    CHECK(op.x.allFinite());
    // Residual relative to the largest current in the circuit.
    const double scale = std::max(1e-12, (lin.a.cwiseAbs() * op.x.cwiseAbs()).maxCoeff());
    CHECK(op.newton.residual_a <= 1e-9 * scale + 1e-15);
    ++c.solved;
    const small_signal_figures ss = analyse_small_signal(net, op);
    CHECK(std::isfinite(ss.gain_midband));
    CHECK(std::isfinite(ss.zout_ohm));
    const headroom_figures h = analyse_headroom(net, op);
    CHECK(std::isfinite(h.symmetric_output_vpk));
    CHECK(h.up.kind != swing_limit_kind::no_convergence);
    CHECK(h.down.kind != swing_limit_kind::no_convergence);
    if (sweep_every > 0 && k % sweep_every == 0) {
      sweep_result r;
      REQUIRE_NOTHROW(r = run_sweep(s, sw));
      for (const sweep_point& p : r.points) {
        CAPTURE(p.drive_vpk);
        CHECK(std::isfinite(p.output_vpk));
        CHECK(std::isfinite(p.thd_percent));
        CHECK(std::isfinite(p.gain_db));
        if (p.newton.failed > 0) ++c.sweep_points_with_failures;
      }
      ++c.swept;
    }
  }
  return c;
}

}  // namespace

TEST_CASE("random valid stages all get a DC point that satisfies KCL, and sweep to finite numbers") {
  // Kirchhoff's current law at every node is the oracle: the residual of the full nodal
  // equations at the reported point, independent of how the solver got there.
  const random_counts c = check_random_stages(20261201, 3000, 50);
  CHECK(c.solved == c.drawn);
  MESSAGE("random stages: " << c.solved << " of " << c.drawn << " solved; " << c.swept
                            << " swept at 3 drives, points with unconverged samples: " << c.sweep_points_with_failures);
}

TEST_CASE("soak: many random stages" * doctest::skip()) {
  // `make soak`: PINCHOFF_SOAK_COUNT stages (default 100000), a sweep on every 50th.
  const char* env = std::getenv("PINCHOFF_SOAK_COUNT");
  const int count = env ? std::atoi(env) : 100000;
  const random_counts c = check_random_stages(777, count, 50);
  CHECK(c.solved == c.drawn);
  MESSAGE("soak: " << c.solved << " of " << c.drawn << " random stages solved; " << c.swept
                   << " swept at 3 drives, points with unconverged samples: " << c.sweep_points_with_failures);
}
