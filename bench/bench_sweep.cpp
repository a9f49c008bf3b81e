// Cost of a 25-point drive sweep per preset (1 kHz, 8x oversampling, H2..H10), wall
// clock on all cores, and the steady-state records (periods of 3 cycles) simulated per point.
#include <algorithm>
#include <chrono>
#include <cmath>
#include <cstdio>
#include <filesystem>
#include <vector>

#include "bench/benches.hpp"
#include "base/units.hpp"
#include "model/circuit/stage_file.hpp"
#include "model/analysis/sweep.hpp"

void bench_sweep() {
  using namespace pinchoff;
  std::vector<std::filesystem::path> presets;
  for (const auto& e : std::filesystem::directory_iterator(PINCHOFF_PRESETS_DIR))
    if (e.path().extension() == ".toml" && e.path().filename() != "devices.toml") presets.push_back(e.path());
  std::sort(presets.begin(), presets.end());
  std::printf("\nsweep: 25 drives from -40 dBu to +20 dBu, 1 kHz, 8x oversampling, H2..H10; wall clock, best of 5\n\n");
  std::printf("%-26s %10s %12s %14s %12s\n", "preset", "seconds", "target 0.5 s", "records/point", "max records");
  for (const auto& p : presets) {
    const model::stage st = model::read_stage_file(p);
    model::sweep_settings s;
    for (int k = 0; k < 25; ++k) s.drives_vpk.push_back(base::vpk_from_dbu(-40.0 + 60.0 * k / 24.0));
    double best = 1e9;
    model::sweep_result r;
    for (int rep = 0; rep < 5; ++rep) {
      const auto t0 = std::chrono::steady_clock::now();
      r = model::run_sweep(st, s);
      best = std::min(best, std::chrono::duration<double>(std::chrono::steady_clock::now() - t0).count());
    }
    double sum = 0;
    int most = 0;
    for (const auto& pt : r.points) {
      sum += pt.periods_simulated;
      most = std::max(most, pt.periods_simulated);
    }
    std::printf("%-26s %10.3f %12s %14.1f %12d\n", p.stem().string().c_str(), best, best < 0.5 ? "met" : "MISSED",
                sum / r.points.size(), most);
  }
}
