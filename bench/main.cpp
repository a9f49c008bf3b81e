// pinchoff_bench: prints the performance figures (`make bench`). Figures are ratios
// (real-time factors, speed-ups against the project's reference solver) because the
// machines they run on are shared and noisy.
#include <cstdio>

#include "bench/benches.hpp"

int main() {
  std::printf("pinchoff benchmarks\n\n");
  bench_oversampler();
  std::printf("\n");
  bench_engine();
  bench_multi_device();
  bench_sweep();
  bench_render();
  return 0;
}
