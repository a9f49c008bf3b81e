// Ctrl-C reaches every long phase of a render (model/audio/render.hpp): the survey of
// `--oversample auto`, its probes and the first pass. The program is a child process here,
// since the point is a real signal; the time to exit is checked generously (a stuck phase
// runs for minutes, a polled one stops within a block), not as a speed test.
#include <signal.h>
#include <sys/wait.h>
#include <unistd.h>

#include <atomic>
#include <chrono>
#include <cmath>
#include <filesystem>
#include <numbers>
#include <string>
#include <thread>
#include <vector>

#include <doctest/doctest.h>

#include "base/error.hpp"
#include "dsp/io/sound_file.hpp"
#include "model/audio/oversampling_choice.hpp"
#include "model/circuit/network.hpp"
#include "model/circuit/operating_point.hpp"
#include "model/circuit/stage_file.hpp"
#include "support/cli_runner.hpp"
#include "support/scratch_dir.hpp"

namespace test_render_interrupt {

namespace {

using namespace pinchoff;
using pinchoff::testing::scratch_dir;
namespace fs = std::filesystem;

std::string preset_path(const char* name) { return std::string(PINCHOFF_PRESETS_DIR) + "/" + name; }

// Three minutes of a stereo 110 Hz tone at 48 kHz, 16-bit: its survey alone reads 17 million
// samples, and its first pass takes far longer than the test waits.
void write_long_tone(const fs::path& p) {
  dsp::write_settings s;
  s.rate_hz = 48000.0;
  s.channels = 2;
  s.format = dsp::sample_format::wav16;
  dsp::sound_writer w = dsp::sound_writer::create(p, s);
  std::vector<double> block(2 * 48000);
  for (int second = 0; second < 180; ++second) {
    for (std::size_t k = 0; k < 48000; ++k) {
      const double t = static_cast<double>(second) + static_cast<double>(k) / 48000.0;
      block[2 * k] = block[2 * k + 1] = 0.5 * std::sin(2.0 * std::numbers::pi * 110.0 * t);
    }
    w.write(block);
  }
  w.commit();
}

std::vector<std::string> names_in(const fs::path& dir) {
  std::vector<std::string> names;
  for (const auto& e : fs::recursive_directory_iterator(dir)) names.push_back(e.path().lexically_relative(dir).string());
  return names;
}

}  // namespace

TEST_CASE("Ctrl-C in the survey or the first pass of an automatic-rate render exits 130 at once, leaving nothing") {
  scratch_dir dir;
  write_long_tone(dir.path / "long.wav");
  // 150 ms after the handler is in place: loading the stages or surveying the input; 400 ms: surveying or probing;
  // 1.5 s: the first pass.
  for (const int delay_ms : {150, 400, 1500}) {
    for (const bool two_stages : {false, true}) {
      CAPTURE(delay_ms);
      CAPTURE(two_stages);
      std::vector<std::string> args{"render", preset_path("bass-booster-9v.toml")};
      if (two_stages) args.push_back(preset_path("clean-preamp-18v.toml"));
      args.insert(args.end(), {"--input", dir.file("long.wav"), "--output", dir.file(two_stages ? "cmp" : "out.wav"),
                               "--oversample", "auto"});
      const pid_t pid = pinchoff::testing::spawn_cli(args);
      REQUIRE(pid > 0);
      // The delays count from when the program catches Ctrl-C (before that, the signal's
      // default kills it: a test of the start-up time, not of the phases).
      REQUIRE(pinchoff::testing::wait_for_handler(pid, SIGINT, 30.0));
      std::this_thread::sleep_for(std::chrono::milliseconds(delay_ms));
      const auto sent = std::chrono::steady_clock::now();
      REQUIRE(::kill(pid, SIGINT) == 0);
      int status = 0;
      REQUIRE(::waitpid(pid, &status, 0) == pid);
      const double took = std::chrono::duration<double>(std::chrono::steady_clock::now() - sent).count();
      CAPTURE(took);
      REQUIRE(WIFEXITED(status));
      CHECK(WEXITSTATUS(status) == 130);
      CHECK(took < 3.0);  // a block of work is milliseconds; the lying header ran for minutes
      CHECK(names_in(dir.path) == std::vector<std::string>{"long.wav"});  // no output, temporary or folder
    }
  }
}

TEST_CASE("the rate probes stop when asked") {
  const model::network net = model::build_network(model::read_stage_file(preset_path("bass-booster-9v.toml")));
  const model::operating_point op = model::solve_operating_point(net);
  const model::stage_ref refs[] = {{&net, &op}};
  std::atomic<bool> stop{true};
  CHECK_THROWS_AS(model::choose_oversampling(refs, 2.0, 10000.0, 48000.0, -80.0, &stop), interrupted);
  stop = false;
  CHECK(model::choose_oversampling(refs, 2.0, 10000.0, 48000.0, -80.0, &stop).factor >= 8);
}

}  // namespace test_render_interrupt
