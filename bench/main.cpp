// pinchoff_bench: prints the performance figures (`make bench`). Figures are ratios
// (real-time factors, speed-ups against the project's reference solver) because the
// machines they run on are shared and noisy.
//
// `pinchoff_bench [NAME...]` runs only the named groups (oversampler, engine, multi,
// sweep, render); with no names, all of them.
#include <cstdio>
#include <cstring>

#include "bench/benches.hpp"

int main(int argc, char** argv) {
  struct group {
    const char* name;
    void (*run)();
  };
  const group groups[] = {{"oversampler", bench_oversampler}, {"engine", bench_engine}, {"multi", bench_multi_device},
                          {"sweep", bench_sweep},             {"render", bench_render}};
  for (int a = 1; a < argc; ++a) {
    bool known = false;
    for (const group& g : groups) known = known || std::strcmp(argv[a], g.name) == 0;
    if (!known) {
      std::fprintf(stderr, "pinchoff_bench: no benchmark group '%s' (groups: oversampler, engine, multi, sweep, render)\n",
                   argv[a]);
      return 2;
    }
  }
  std::printf("pinchoff benchmarks\n");
  for (const group& g : groups) {
    bool wanted = argc == 1;
    for (int a = 1; a < argc; ++a) wanted = wanted || std::strcmp(argv[a], g.name) == 0;
    if (!wanted) continue;
    std::printf("\n");
    g.run();
  }
  return 0;
}
