// Render speed: the whole `render` pipeline (read, upsample, engine, downsample, spool,
// loudness, second pass, write), 48 kHz at 8x, as a real-time factor: seconds of audio per
// second of time. Mono on one thread is timed on the process's CPU time (a shared machine's
// waiting is not counted); mono on two threads (the engine on one, metering and files on
// the calling one) and stereo on two engine threads are given both on CPU time per channel
// and on wall time (which a busy machine lowers). Then chains of stages (the chain presets), mono on
// one thread, at 8x and 16x.
#include <algorithm>
#include <cmath>
#include <cstdio>
#include <filesystem>
#include <numbers>
#include <random>
#include <string>
#include <vector>

#include <time.h>

#include "bench/benches.hpp"
#include "dsp/io/sound_file.hpp"
#include "model/circuit/network.hpp"
#include "model/circuit/operating_point.hpp"
#include "model/audio/render.hpp"
#include "model/circuit/stage_file.hpp"

namespace {

using namespace pinchoff;
namespace fs = std::filesystem;

double clock_seconds(clockid_t id) {
  timespec t{};
  clock_gettime(id, &t);
  return double(t.tv_sec) + 1e-9 * double(t.tv_nsec);
}

// A bass-register test signal: a decaying plucked-like tone every half second, 0.5 FS peak.
void write_input(const fs::path& p, int channels, double seconds) {
  dsp::write_settings s;
  s.rate_hz = 48000;
  s.channels = channels;
  s.format = dsp::sample_format::wav24;
  dsp::sound_writer w = dsp::sound_writer::create(p, s);
  const auto n = static_cast<std::size_t>(seconds * 48000);
  std::vector<double> block;
  for (std::size_t k = 0; k < n;) {
    const std::size_t m = std::min<std::size_t>(8192, n - k);
    block.assign(m * static_cast<std::size_t>(channels), 0.0);
    for (std::size_t j = 0; j < m; ++j) {
      const double t = double(k + j) / 48000.0, local = std::fmod(t, 0.5);
      const double f = 55.0 * (1 + int(t / 0.5) % 4);
      const double v = 0.5 * std::exp(-4 * local) * std::sin(2 * std::numbers::pi * f * local);
      for (int c = 0; c < channels; ++c) block[j * static_cast<std::size_t>(channels) + static_cast<std::size_t>(c)] = c ? -v : v;
    }
    w.write(block);
    k += m;
  }
  w.commit();
}

}  // namespace

void bench_render() {
  const fs::path dir = fs::temp_directory_path() / ("pinchoff-bench-render-" + std::to_string(std::random_device{}()));
  fs::create_directories(dir);
  const double seconds = 20.0;
  std::printf("render pipeline, 48 kHz x 8, %.0f s of audio, file I/O, two passes (normalised), best of 3\n", seconds);
  std::printf("  %-26s %-9s %-8s %14s %14s %10s\n", "preset", "channels", "threads", "x rt (CPU/ch)", "x rt (wall)", "iter/smp");
  struct config {
    int channels, threads;
  };
  // One thread: everything on one core. Two: the engines on their own threads and the
  // calling thread metering and writing beside them (model/audio/render.hpp).
  const config configs[] = {{1, 1}, {1, 2}, {2, 2}};
  for (const char* name : {"bass-booster-9v.toml", "clean-preamp-18v.toml", "phantom-mic-follower.toml"}) {
    model::render_stage st;
    st.name = name;
    st.net = model::build_network(model::read_stage_file(fs::path(PINCHOFF_PRESETS_DIR) / name));
    st.op = model::solve_operating_point(st.net);
    for (const config& cf : configs) {
      const int channels = cf.channels;
      const fs::path in = dir / ("in" + std::to_string(channels) + ".wav");
      if (!fs::exists(in)) write_input(in, channels, seconds);
      double best_cpu = 1e300, best_wall = 1e300, iters = 0;
      for (int rep = 0; rep < 3; ++rep) {
        model::render_job job;
        job.input = in;
        st.output = dir / "out.wav";
        job.stages = {st};
        job.overwrite = true;
        job.threads = cf.threads;
        const double c0 = clock_seconds(CLOCK_PROCESS_CPUTIME_ID), w0 = clock_seconds(CLOCK_MONOTONIC);
        const model::render_report r = model::render(job);
        best_cpu = std::min(best_cpu, clock_seconds(CLOCK_PROCESS_CPUTIME_ID) - c0);
        best_wall = std::min(best_wall, clock_seconds(CLOCK_MONOTONIC) - w0);
        iters = r.outputs[0].engine.mean_evaluations();
      }
      std::printf("  %-26s %-9d %-8d %13.1fx %13.1fx %10.2f\n", name, channels, cf.threads, seconds * channels / best_cpu,
                  seconds / best_wall, iters);
    }
  }
  std::printf("  (target: mono at least 25x on one core, aim 40x; stereo on two cores about the same)\n\n");

  // Chains of stages: the render's cost grows with the oversampling factor, so mono on one
  // thread at 8x and at 16x (what `--oversample auto` may choose), on a shorter clip.
  const double chain_seconds = 5.0;
  std::printf("render pipeline through chains of stages, mono, one thread, %.0f s of audio, best of 3\n", chain_seconds);
  std::printf("  %-30s %14s %14s\n", "preset", "x rt at 8x", "x rt at 16x");
  const fs::path chain_in = dir / "chain-in.wav";
  write_input(chain_in, 1, chain_seconds);
  for (const char* name : {"two-stage-boost-9v.toml", "three-stage-overdrive-9v.toml"}) {
    model::render_stage st;
    st.name = name;
    st.net = model::build_network(model::read_stage_file(fs::path(PINCHOFF_PRESETS_DIR) / name));
    st.op = model::solve_operating_point(st.net);
    double rt[2] = {0, 0};
    const int factors[2] = {8, 16};
    for (int f = 0; f < 2; ++f) {
      double best_cpu = 1e300;
      for (int rep = 0; rep < 3; ++rep) {
        model::render_job job;
        job.input = chain_in;
        st.output = dir / "chain-out.wav";
        job.stages = {st};
        job.overwrite = true;
        job.threads = 1;
        job.oversample = factors[f];
        const double c0 = clock_seconds(CLOCK_PROCESS_CPUTIME_ID);
        (void)model::render(job);
        best_cpu = std::min(best_cpu, clock_seconds(CLOCK_PROCESS_CPUTIME_ID) - c0);
      }
      rt[f] = chain_seconds / best_cpu;
    }
    std::printf("  %-30s %13.1fx %13.1fx\n", name, rt[0], rt[1]);
  }
  std::printf("\n");
  std::error_code ec;
  fs::remove_all(dir, ec);
}
