// Engine speed with more than one JFET: the DK engine's general solver (two JFETs in a loop
// of their own, three to six in the loop that keeps (I - F Jf)^-1 in full) on chains of
// two to six stages (fixtures/multi_device_networks.hpp: cascade, with per-stage rail
// filters and interstage treble cuts and volume dividers) at 0.01 to 10 V peak, against
// the targets:
// real-time factor at 8x 48 kHz on one core (two stages 30x, aim 40x; three 20x, aim 30x;
// four 15x), cost per JFET against the one-JFET path on one stage of the same chain (at
// most 1.5x), and the speed-up over the nodal reference solver; beside them the real-time
// factor of k stages at exactly the one-JFET path's time each (a cost per JFET of 1.0x),
// which says how far the real-time targets need the one-JFET sample itself. Then a
// two-stage chain at 16x, and two independent copies of one stage against the stage alone.
// Ratios only.
#include <algorithm>
#include <cmath>
#include <cstdio>
#include <numbers>
#include <vector>

#include "bench/benches.hpp"
#include "bench/engine_timing.hpp"
#include "fixtures/multi_device_networks.hpp"
#include "model/circuit/operating_point.hpp"
#include "model/engine/dk_engine.hpp"
#include "model/engine/transient_reference.hpp"

namespace {

using namespace pinchoff;
using namespace pinchoff::bench;

std::vector<double> tone_at(double amplitude_v, std::size_t n, double fs_hz) {
  std::vector<double> u(n);
  for (std::size_t k = 0; k < n; ++k) u[k] = amplitude_v * std::sin(2.0 * std::numbers::pi * tone_hz * double(k) / fs_hz);
  return u;
}

// Seconds per sample of the engine on the tone, best of `repeats` blocks (after one untimed
// block from the DC point).
double engine_seconds(model::dk_engine& eng, const std::vector<double>& u, double& sink, int repeats = 10) {
  std::vector<double> y(u.size());
  eng.process(u, y);
  const double t = best_seconds(repeats, [&] {
    eng.process(u, y);
    sink += y.back();
  });
  return t / double(u.size());
}

// Two engines on the same tone, timed in turn (`rounds` rounds of two blocks each, after one
// untimed block from the DC point), best of each: their ratio then does not move with the
// machine's drift between the two measurements, as a ratio of two figures taken minutes
// apart does on a shared machine.
struct pair_seconds {
  double a, b;
};
pair_seconds engine_seconds_alternating(model::dk_engine& ea, model::dk_engine& eb, const std::vector<double>& u,
                                        double& sink, int rounds = 5) {
  std::vector<double> y(u.size());
  ea.process(u, y);
  eb.process(u, y);
  double ta = 1e300, tb = 1e300;
  for (int r = 0; r < rounds; ++r) {
    ta = std::min(ta, best_seconds(2, [&] {
                    ea.process(u, y);
                    sink += y.back();
                  }));
    tb = std::min(tb, best_seconds(2, [&] {
                    eb.process(u, y);
                    sink += y.back();
                  }));
  }
  return {ta / double(u.size()), tb / double(u.size())};
}

double reference_seconds(const model::network& net, const model::operating_point& op, const std::vector<double>& u,
                         std::size_t n, double& sink) {
  return best_seconds(2, [&] {
           model::transient_reference ref(net, op, rate_hz);
           for (std::size_t k = 0; k < n; ++k) sink += ref.process(u[k]);
         }) /
         double(n);
}

const char* verdict(bool met) { return met ? "MET" : "MISSED"; }

// The real-time target (and aim) for a chain of k stages; 0: none set.
double realtime_target(int k) { return k == 2 ? 30.0 : k == 3 ? 20.0 : k == 4 ? 15.0 : 0.0; }
double realtime_aim(int k) { return k == 2 ? 40.0 : k == 3 ? 30.0 : 0.0; }

}  // namespace

void bench_multi_device() {
  const std::size_t n_engine = static_cast<std::size_t>(rate_hz / 10);
  const std::size_t n_reference = 2000;
  const double drives[] = {0.01, 0.1, 1.0, 10.0};
  double sink = 0.0;

  test::cascade_options opts;
  opts.rail_filters = true;

  // The one-JFET path on the chain's first stage alone (same parts, rail filter, input and
  // load): the cost per JFET is judged against it, timed in turn with each chain.
  const model::network one = test::cascade(1, opts);
  const model::operating_point op_one = model::solve_operating_point(one);

  std::printf("DK engine on chains of stages (general solver: two stages in its two-JFET loop, three to six with M in\n"
              "full), %g kHz, %g Hz sine;\n",
              rate_hz / 1000.0, tone_hz);
  std::printf("per-stage rail filters, treble cut and volume divider between stages. per JFET = (chain time / stages)\n");
  std::printf("/ one-stage time, the chain and its first stage alone timed in turn, best of each.\n\n");
  std::printf("%-7s %7s %6s %9s %8s %6s %7s %9s %9s\n", "stages", "drive", "states", "realtime", "iter/smp", "max",
              "failed", "per JFET", "speed-up");
  struct size_summary {
    double worst_rt{1e300}, worst_per_jfet{0}, worst_speedup{1e300}, best_speedup{0};
    double worst_separable{1e300};  // k stages at the one-JFET path's own time each (per JFET 1.0x)
    long long failed{0};
  };
  size_summary sum[7];
  const char* loops[7] = {};  // the sample loop k stages ran in
  for (int k = 2; k <= 6; ++k) {
    const model::network net = test::cascade(k, opts);
    const model::operating_point op = model::solve_operating_point(net);
    for (int d = 0; d < 4; ++d) {
      const std::vector<double> u = tone(drives[d], n_engine);
      model::dk_engine eng(net, op, rate_hz), e_one(one, op_one, rate_hz);
      loops[k] = eng.sample_loop();
      const pair_seconds ts = engine_seconds_alternating(eng, e_one, u, sink);
      const double t = ts.a;
      const model::dk_stats st = eng.stats();
      const double t_ref = reference_seconds(net, op, u, n_reference, sink);
      const double rt = 1.0 / rate_hz / t, per_jfet = t / k / ts.b, speedup = t_ref / t;
      size_summary& s = sum[k];
      s.worst_rt = std::min(s.worst_rt, rt);
      s.worst_per_jfet = std::max(s.worst_per_jfet, per_jfet);
      s.worst_speedup = std::min(s.worst_speedup, speedup);
      s.best_speedup = std::max(s.best_speedup, speedup);
      s.worst_separable = std::min(s.worst_separable, 1.0 / rate_hz / (k * ts.b));
      s.failed += st.failed;
      char drive_text[32];
      std::snprintf(drive_text, sizeof drive_text, "%gVpk", drives[d]);
      std::printf("%-7d %7s %6d %8.1fx %8.3f %6d %7lld %8.2fx %8.1fx\n", k, drive_text, eng.states(), rt,
                  st.mean_evaluations(), st.max_evaluations, st.failed, per_jfet, speedup);
    }
  }

  std::printf("\nchains against the targets (worst over 0.01-10 Vpk):\n");
  std::printf("%-7s %14s %17s %20s %18s %16s\n", "stages", "realtime", "target (aim)", "per JFET (max 1.5x)",
              "speed-up over ref", "at 1.0x per JFET");
  for (int k = 2; k <= 6; ++k) {
    const size_summary& s = sum[k];
    char target[40] = "-";
    const double tg = realtime_target(k);
    if (tg > 0.0) {
      if (realtime_aim(k) > 0.0)
        std::snprintf(target, sizeof target, "%gx (%gx) %s", tg, realtime_aim(k), verdict(s.worst_rt >= tg));
      else
        std::snprintf(target, sizeof target, "%gx %s", tg, verdict(s.worst_rt >= tg));
    }
    char per[40];
    std::snprintf(per, sizeof per, "%.2fx %s", s.worst_per_jfet, verdict(s.worst_per_jfet <= 1.5));
    std::printf("%-7d %13.1fx %17s %20s %8.1f-%.1fx %15.1fx\n", k, s.worst_rt, target, per, s.worst_speedup,
                s.best_speedup, s.worst_separable);
  }
  std::printf("sample loops on this processor:");
  for (int k = 2; k <= 6; ++k) std::printf("%s %d stages %s", k == 2 ? "" : ";", k, loops[k] ? loops[k] : "-");
  std::printf("\n");
  std::printf("at 1.0x per JFET: the real-time factor of k stages each taking exactly the one-JFET path's time on\n");
  std::printf("the first stage (a cost per JFET of 1.0x, no coupling): below a target, that target also needs a\n");
  std::printf("faster one-JFET sample.\n");

  // The oversampling factor's cost: the two-stage chain at 8x and 16x.
  std::printf("\ntwo-stage chain at 8x and 16x 48 kHz (realtime at each rate)\n");
  std::printf("%-7s %11s %11s\n", "drive", "8x", "16x");
  {
    const model::network net = test::cascade(2, opts);
    const model::operating_point op = model::solve_operating_point(net);
    for (double drive : {0.1, 10.0}) {
      model::dk_engine e8(net, op, rate_hz), e16(net, op, 2.0 * rate_hz);
      const double t8 = engine_seconds(e8, tone(drive, n_engine), sink);
      const double t16 = engine_seconds(e16, tone_at(drive, 2 * n_engine, 2.0 * rate_hz), sink);
      char drive_text[32];
      std::snprintf(drive_text, sizeof drive_text, "%gVpk", drive);
      std::printf("%-7s %10.1fx %10.1fx\n", drive_text, 1.0 / rate_hz / t8, 1.0 / (2.0 * rate_hz) / t16);
    }
  }

  std::printf("\nsame circuit twice: two independent copies (the two-JFET loop) against the single stage (one-JFET loop)\n");
  std::printf("%-28s %7s %14s %14s %12s\n", "network", "drive", "realtime twin", "realtime one", "cost ratio");
  const model::network single = test::stiff_booster();
  const model::network twin = test::twin_of(single, 1);
  for (double drive : {0.1, 10.0}) {
    const std::vector<double> u = tone(drive, n_engine);
    model::dk_engine e1(single, rate_hz), e2(twin, rate_hz);
    const double t1 = engine_seconds(e1, u, sink);
    const double t2 = engine_seconds(e2, u, sink);
    char drive_text[32];
    std::snprintf(drive_text, sizeof drive_text, "%gVpk", drive);
    std::printf("%-28s %7s %13.1fx %13.1fx %11.2fx\n", "stiff booster x2", drive_text, 1.0 / rate_hz / t2,
                1.0 / rate_hz / t1, t2 / t1);
  }
  if (!std::isfinite(sink)) std::printf("(non-finite output!)\n");
}
