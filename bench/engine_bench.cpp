// Engine speed: for each preset and a few drive levels, the DK engine's cost per
// oversampled sample, the real-time factor for 48 kHz mono at 8x oversampling on one core,
// Newton evaluations per sample, and the speed-up over the nodal reference solver.
// Figures are ratios where the machine's speed cancels (real-time factor, speed-up); the
// nanoseconds are printed for context. Timings are the thread's CPU time (time spent
// waiting for a core on a shared machine is not counted), best of many short repeats.
#include <algorithm>
#include <cmath>
#include <cstdio>
#include <filesystem>
#include <numbers>
#include <string>
#include <vector>


#include "bench/benches.hpp"
#include "bench/engine_timing.hpp"
#include "model/engine/dk_engine.hpp"
#include "model/circuit/network.hpp"
#include "model/circuit/operating_point.hpp"
#include "model/circuit/stage_file.hpp"
#include "model/engine/transient_reference.hpp"

using namespace pinchoff;
using namespace pinchoff::bench;

void bench_engine() {
  std::vector<std::filesystem::path> presets;
  for (const auto& e : std::filesystem::directory_iterator(PINCHOFF_PRESETS_DIR))
    if (e.path().extension() == ".toml" && e.path().filename() != "devices.toml") presets.push_back(e.path());
  std::sort(presets.begin(), presets.end());
  if (presets.empty()) {
    std::printf("engine: no presets found in %s\n", PINCHOFF_PRESETS_DIR);
    return;
  }

  std::printf("DK engine, %g kHz x %d = %g kHz, %g Hz sine; thread CPU time, best of 30 blocks of 0.1 s of audio\n",
              base_rate_hz / 1000, oversampling, rate_hz / 1000, tone_hz);
  std::printf("(engine) and of 3 runs of 20000 samples (reference). realtime = audio time / engine time.\n\n");
  std::printf("%-28s %7s %6s %8s %9s %8s %6s %7s %9s\n", "preset", "drive", "states", "ns/smp", "realtime", "iter/smp",
              "max", "failed", "speed-up");
  const std::size_t n_engine = static_cast<std::size_t>(rate_hz / 10);  // 0.1 s of audio
  const std::size_t n_reference = 20000;
  // The one-JFET target holds for single-stage presets; the chain presets have the chain
  // table's targets by stage count (bench_multi.cpp).
  double worst_rt = 1e300, worst_chain_rt = 1e300;
  // The compiled sample loop that ran, by number of JFETs (the one-JFET loop, the two-JFET
  // loop and the general one differ).
  std::string loop_one = "?", loop_two = "-", loop_more = "-";
  for (const auto& path : presets) {
    const model::network net = model::build_network(model::read_stage_file(path));
    const model::operating_point op = model::solve_operating_point(net);
    for (double drive : {0.1, 1.0, 10.0}) {
      const std::vector<double> u = tone(drive, n_engine);
      std::vector<double> y(n_engine);
      model::dk_engine eng(net, op, rate_hz);
      (net.devices() == 1 ? loop_one : net.devices() == 2 ? loop_two : loop_more) = eng.sample_loop();
      double sink = 0.0;
      eng.process(u, y);  // a first block from the DC point, untimed
      const double t_engine = best_seconds(30, [&] {
        eng.process(u, y);  // continues the same sine (0.1 s holds 100 whole periods)
        sink += y.back();
      });
      const model::dk_stats st = eng.stats();  // all 31 blocks
      const double t_ref = best_seconds(3, [&] {
        model::transient_reference ref(net, op, rate_hz);
        for (std::size_t k = 0; k < n_reference; ++k) sink += ref.process(u[k]);
      });
      const double ns_engine = 1e9 * t_engine / double(n_engine);
      const double ns_ref = 1e9 * t_ref / double(n_reference);
      const double realtime = 1e9 / rate_hz / ns_engine;
      double& worst = net.devices() == 1 ? worst_rt : worst_chain_rt;
      worst = std::min(worst, realtime);
      char drive_text[32];
      std::snprintf(drive_text, sizeof drive_text, "%gVpk", drive);
      std::printf("%-28s %7s %6d %8.1f %8.1fx %8.3f %6d %7lld %8.1fx%s\n", path.stem().string().c_str(), drive_text,
                  eng.states(), ns_engine, realtime, st.mean_evaluations(), st.max_evaluations, st.failed,
                  ns_ref / ns_engine, std::isfinite(sink) ? "" : " (non-finite output!)");
    }
  }
  std::printf("\nslowest single-stage case: %.1fx real time (target 30x, aim 50x)\n", worst_rt);
  if (worst_chain_rt < 1e300)
    std::printf("slowest chain preset: %.1fx real time (the chains' targets by stage count: the chain table below)\n",
                worst_chain_rt);
  std::printf("sample loops on this processor: one JFET %s; two JFETs %s; three or more %s\n", loop_one.c_str(),
              loop_two.c_str(), loop_more.c_str());
}
