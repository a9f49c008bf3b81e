// Engine speed with more than one JFET: the DK engine's general path (LU of I - F Jf per
// Newton iteration) on the two-stage network of the tests, and on two independent copies
// of a stage against the one-JFET engine on the single stage (the cost of the general
// path over the closed-form 2x2 one for the same work per device). Ratios only: real-time
// factor at 8x 48 kHz, speed-up over the nodal reference solver, cost ratio.
#include <algorithm>
#include <cmath>
#include <cstdio>
#include <numbers>
#include <vector>


#include "bench/benches.hpp"
#include "bench/engine_timing.hpp"
#include "model/engine/dk_engine.hpp"
#include "model/circuit/operating_point.hpp"
#include "model/engine/transient_reference.hpp"
#include "fixtures/multi_device_networks.hpp"

namespace {

using namespace pinchoff;
using namespace pinchoff::bench;

// Seconds per sample of the engine on the tone, best of 30 blocks of 0.1 s (after one
// untimed block from the DC point).
double engine_seconds(model::dk_engine& eng, const std::vector<double>& u, double& sink) {
  std::vector<double> y(u.size());
  eng.process(u, y);
  const double t = best_seconds(30, [&] {
    eng.process(u, y);
    sink += y.back();
  });
  return t / double(u.size());
}

}  // namespace

void bench_multi_device() {
  const std::size_t n_engine = static_cast<std::size_t>(rate_hz / 10);
  const std::size_t n_reference = 20000;
  double sink = 0.0;

  std::printf("\nDK engine with two JFETs (general path), 384 kHz, %g Hz sine; as above\n\n", tone_hz);
  std::printf("%-28s %7s %6s %9s %8s %6s %7s %9s\n", "network", "drive", "states", "realtime", "iter/smp", "max",
              "failed", "speed-up");
  const model::network cascade = test::two_stage_network();
  const model::operating_point op = model::solve_operating_point(cascade);
  for (double drive : {0.01, 0.1, 1.0}) {
    const std::vector<double> u = tone(drive, n_engine);
    model::dk_engine eng(cascade, op, rate_hz);
    const double t_engine = engine_seconds(eng, u, sink);
    const model::dk_stats st = eng.stats();
    const double t_ref = best_seconds(3, [&] {
                           model::transient_reference ref(cascade, op, rate_hz);
                           for (std::size_t k = 0; k < n_reference; ++k) sink += ref.process(u[k]);
                         }) /
                         double(n_reference);
    char drive_text[32];
    std::snprintf(drive_text, sizeof drive_text, "%gVpk", drive);
    std::printf("%-28s %7s %6d %8.1fx %8.3f %6d %7lld %8.1fx\n", "two cascaded stages", drive_text, eng.states(),
                1.0 / rate_hz / t_engine, st.mean_evaluations(), st.max_evaluations, st.failed, t_ref / t_engine);
  }

  std::printf("\nsame circuit twice: two independent copies (general path) against the single stage (2x2 path)\n");
  std::printf("%-28s %7s %14s %14s %12s\n", "network", "drive", "realtime twin", "realtime one", "cost ratio");
  const model::network one = test::stiff_booster();
  const model::network twin = test::twin_of(one, 1);
  for (double drive : {0.1, 10.0}) {
    const std::vector<double> u = tone(drive, n_engine);
    model::dk_engine e1(one, rate_hz), e2(twin, rate_hz);
    const double t1 = engine_seconds(e1, u, sink);
    const double t2 = engine_seconds(e2, u, sink);
    char drive_text[32];
    std::snprintf(drive_text, sizeof drive_text, "%gVpk", drive);
    std::printf("%-28s %7s %13.1fx %13.1fx %11.2fx\n", "stiff booster x2", drive_text, 1.0 / rate_hz / t2,
                1.0 / rate_hz / t1, t2 / t1);
  }
  if (!std::isfinite(sink)) std::printf("(non-finite output!)\n");
}
