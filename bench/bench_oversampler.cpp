// Oversampler cost per base-rate sample at 48 kHz, as a real-time factor (seconds of audio
// processed per second of wall time, one core). The round trip (up, then down) is what a
// render pays per channel on top of the model.
#include <algorithm>
#include <chrono>
#include <cmath>
#include <cstdio>
#include <vector>

#include "bench/benches.hpp"
#include "dsp/oversampler.hpp"

namespace {

// Wall time of `run` over `reps` calls; the fastest of three tries, to skip disturbances
// from other work on a shared machine.
template <class Fn>
double best_seconds(Fn run, int reps) {
  double best = 1e300;
  for (int trial = 0; trial < 3; ++trial) {
    const auto t0 = std::chrono::steady_clock::now();
    for (int r = 0; r < reps; ++r) run();
    const auto t1 = std::chrono::steady_clock::now();
    best = std::min(best, std::chrono::duration<double>(t1 - t0).count());
  }
  return best;
}

}  // namespace

void bench_oversampler() {
  const double fb = 48000.0;
  const std::size_t block = 512;      // base-rate samples per call, a typical render block
  const std::size_t blocks = 94;      // about 1 s of audio per repetition
  const int reps = 2;
  std::printf("oversampler at %.0f Hz, blocks of %zu samples, one core\n", fb, block);
  std::printf("  factor  mults/sample  up ns/sample  down ns/sample  round-trip ns/sample  round-trip x real time\n");
  std::vector<double> x(block);
  for (std::size_t i = 0; i < block; ++i) x[i] = 0.5 * std::sin(0.05 * static_cast<double>(i));
  for (const int factor : {1, 2, 4, 8, 16}) {
    pinchoff::dsp::oversampler os(factor, fb);
    std::vector<double> hi(block * static_cast<std::size_t>(factor));
    std::vector<double> y(block);
    double sink = 0.0;
    const double t_up = best_seconds([&] { for (std::size_t b = 0; b < blocks; ++b) os.upsample(x, hi); sink += hi[1]; }, reps);
    const double t_down = best_seconds([&] { for (std::size_t b = 0; b < blocks; ++b) os.downsample(hi, y); sink += y[1]; }, reps);
    const double t_rt = best_seconds([&] {
      for (std::size_t b = 0; b < blocks; ++b) {
        os.upsample(x, hi);
        os.downsample(hi, y);
      }
      sink += y[1];
    }, reps);
    const double samples = static_cast<double>(block * blocks * static_cast<std::size_t>(reps));
    const double audio_seconds = samples / fb;
    std::printf("  %6d  %12.0f  %12.2f  %14.2f  %20.2f  %22.0f%s\n", factor, os.multiplies_per_base_sample(),
                1e9 * t_up / samples, 1e9 * t_down / samples, 1e9 * t_rt / samples, audio_seconds / t_rt,
                sink == 12345.678 ? " " : "");
  }
}
