#pragma once
// What the engine benchmarks share: the 1 kHz test tone at 8x 48 kHz and thread-CPU timing
// (best of several runs, so other work on a shared machine disturbs the figures less).
#include <time.h>

#include <algorithm>
#include <cmath>
#include <cstddef>
#include <numbers>
#include <vector>

namespace pinchoff::bench {

inline constexpr double base_rate_hz = 48000.0;
inline constexpr int oversampling = 8;
inline constexpr double rate_hz = base_rate_hz * oversampling;
inline constexpr double tone_hz = 1000.0;

/// n samples of a tone_hz sine of peak amplitude_v at rate_hz.
inline std::vector<double> tone(double amplitude_v, std::size_t n) {
  std::vector<double> u(n);
  for (std::size_t k = 0; k < n; ++k) u[k] = amplitude_v * std::sin(2.0 * std::numbers::pi * tone_hz * double(k) / rate_hz);
  return u;
}

/// CPU time of the calling thread, seconds.
inline double thread_seconds() {
  timespec t{};
  clock_gettime(CLOCK_THREAD_CPUTIME_ID, &t);
  return double(t.tv_sec) + 1e-9 * double(t.tv_nsec);
}

/// The shortest thread-CPU time of `repeats` calls of run().
template <class F>
double best_seconds(int repeats, F&& run) {
  double best = 1e300;
  for (int r = 0; r < repeats; ++r) {
    const double t0 = thread_seconds();
    run();
    best = std::min(best, thread_seconds() - t0);
  }
  return best;
}

}  // namespace pinchoff::bench
