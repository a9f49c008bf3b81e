// The test-tone generator and `pinchoff tone`: the written file, read back and analysed,
// holds the requested rate, length, frequency and level; steps change without clicks.
#include <doctest/doctest.h>

#include <signal.h>
#include <sys/wait.h>

#include <algorithm>
#include <chrono>
#include <cmath>
#include <numbers>
#include <sstream>
#include <string>
#include <thread>
#include <vector>

#include <nlohmann/json.hpp>

#include "base/units.hpp"
#include "cli/app.hpp"
#include "base/error.hpp"
#include "dsp/io/sound_file.hpp"
#include "dsp/tone.hpp"
#include "dsp/windowed_analysis.hpp"
#include "support/cli_runner.hpp"
#include "support/scratch_dir.hpp"

namespace test_tone {

using namespace pinchoff::dsp;
using namespace pinchoff::base;
using pinchoff::testing::scratch_dir;

namespace {
using result = pinchoff::testing::cli_result;
constexpr auto run = pinchoff::testing::run_cli;
}  // namespace

TEST_CASE("a level staircase covers the range in whole steps") {
  struct row {
    const char* source;
    double from, to, step;
    std::vector<double> levels;
  };
  // closed form: from + k * step while within the range
  const row rows[] = {{"closed form", -40, 0, 10, {-40, -30, -20, -10, 0}},
                      {"closed form, 6 dB does not divide 40", -40, 0, 6, {-40, -34, -28, -22, -16, -10, -4}},
                      {"closed form, falling", -6, -12, 3, {-6, -9, -12}},
                      {"closed form, sign of the step ignored", -20, -10, -5, {-20, -15, -10}}};
  for (const row& r : rows) {
    INFO(std::string(r.source));
    const auto steps = level_staircase(r.from, r.to, r.step, 0.5);
    REQUIRE(steps.size() == r.levels.size());
    for (std::size_t i = 0; i < steps.size(); ++i) {
      CHECK(steps[i].level_dbfs == doctest::Approx(r.levels[i]).epsilon(1e-12));
      CHECK(steps[i].seconds == 0.5);
    }
  }
  CHECK_THROWS_AS(level_staircase(-40, 3, 10, 1), pinchoff::input_error);
  CHECK_THROWS_AS(level_staircase(-40, 0, 0, 1), pinchoff::input_error);
}

TEST_CASE("steps change level without clicks") {
  // closed form: for x = a(t) sin(wt), |x[t+1] - x[t]| <= a_max |2 sin(w/2)| + max |a[t+1] - a[t]|,
  // and a raised-cosine ramp of F samples from a0 to a1 moves at most |a1 - a0| pi / (2F)
  // per sample (the maximum slope of (1 - cos(pi u)) / 2 is pi / 2). An abrupt step would
  // jump by up to |a1 - a0| = 0.68 here.
  tone_plan p;
  p.frequency_hz = 997.0;
  p.rate_hz = 48000.0;
  p.steps = level_staircase(-20, 0, 10, 0.25);
  p.fade_seconds = 0.005;
  tone_generator g(p);
  std::vector<double> x(static_cast<std::size_t>(g.frames()));
  CHECK(g.generate(x) == x.size());
  CHECK(g.generate(x) == 0);
  CHECK(x.size() == 3 * 12000);
  const double fade = 240.0;
  const double max_jump_db = 1.0 - std::pow(10.0, -0.5);  // the -10 -> 0 dBFS step
  const double bound = 2.0 * std::sin(std::numbers::pi * p.frequency_hz / p.rate_hz) + max_jump_db * std::numbers::pi / (2 * fade);
  double worst = 0.0;
  for (std::size_t t = 1; t < x.size(); ++t) worst = std::max(worst, std::abs(x[t] - x[t - 1]));
  CHECK(worst <= bound);
  CHECK(std::abs(x.front()) <= 1e-3);  // starts from silence
  CHECK(std::abs(x.back()) <= 1e-3);   // and ends in it
  CHECK(g.peak() == 1.0);
  const auto spans = steady_spans(p);
  REQUIRE(spans.size() == 3);
  CHECK(spans[1].begin == 12000 + 240);
  CHECK(spans[2].end == 36000 - 240);
}

TEST_CASE("the written tone reads back at the requested rate, length, frequency and level") {
  // Oracle: the windowed analysis (Blackman-Harris, fundamental at the fitted frequency,
  // so no scallop loss; tested against closed forms in test_windowed_analysis.cpp).
  // Tolerances: the level within 0.01 dB (dither noise sits 90 dB or more below the tone);
  // the frequency within 1e-3 Hz (the analysis resolves 1e-7 bin).
  struct row {
    const char* source;
    std::string freq, level, format, rate;
    double freq_hz, level_dbfs;
    const char* format_text;
  };
  const row rows[] = {
      {"requested values", "1k", "-10dBFS", "wav24", "48000", 1000.0, -10.0, "WAV, 24-bit integer"},
      {"requested values", "440", "-3 dBFS", "wav16", "44100", 440.0, -3.0, "WAV, 16-bit integer"},
      {"requested values", "12.5k", "-30", "float", "96000", 12500.0, -30.0, "WAV, 32-bit float"},
      {"requested values", "100", "-20dBFS", "flac", "48000", 100.0, -20.0, "FLAC, 24-bit integer"},
  };
  scratch_dir dir;
  for (const row& r : rows) {
    INFO(std::string(r.format + " " + r.freq + " " + r.level));
    const std::string path = dir.file("tone-" + r.format);
    const result res = run({"tone", "--freq", r.freq, "--level", r.level, "--seconds", "1.5", "--rate", r.rate, "--format",
                            r.format, "--json", path});
    REQUIRE(res.status == 0);
    const auto j = nlohmann::json::parse(res.out);
    sound_reader rd = sound_reader::open(path);
    const double fs = std::stod(r.rate);
    CHECK(rd.info().rate_hz == fs);
    CHECK(rd.info().channels == 1);
    CHECK(rd.info().frames == static_cast<std::int64_t>(std::llround(1.5 * fs)));
    CHECK(rd.info().format_text == r.format_text);
    CHECK(j["frames"] == rd.info().frames);
    const std::vector<double> x = read_channel(rd, 0);
    const std::size_t fade = static_cast<std::size_t>(0.01 * fs);
    const std::vector<double> steady(x.begin() + static_cast<std::ptrdiff_t>(fade), x.end() - static_cast<std::ptrdiff_t>(fade));
    const windowed_analysis a = analyse_windowed(steady, fs);
    CHECK(std::abs(a.fundamental_hz - r.freq_hz) <= 1e-3);
    CHECK(std::abs(20 * std::log10(a.fundamental_vpk) - r.level_dbfs) <= 0.01);
    CHECK(j["sample_peak_dbfs"].get<double>() <= r.level_dbfs + 1e-9);
    CHECK(j["sample_peak_dbfs"].get<double>() >= r.level_dbfs - 0.01);  // over 1.5 s the samples come within 0.01 dB of the crest at these frequencies
  }
}

TEST_CASE("a staircase holds each level where tone says it does") {
  scratch_dir dir;
  const std::string path = dir.file("steps.wav");
  const result res = run({"tone", "--steps", "-40dBFS..0dBFS:10", "--step-seconds", "0.5", "--format", "wav24", "--json", path});
  REQUIRE(res.status == 0);
  const auto j = nlohmann::json::parse(res.out);
  REQUIRE(j["steps"].size() == 5);
  sound_reader rd = sound_reader::open(path);
  const std::vector<double> x = read_channel(rd, 0);
  CHECK(x.size() == 5 * 24000);
  for (const auto& st : j["steps"]) {
    const double want = st["level_dbfs"].get<double>();
    CAPTURE(want);
    const auto b = static_cast<std::size_t>(std::llround(st["steady_from_s"].get<double>() * 48000));
    const auto e = static_cast<std::size_t>(std::llround(st["steady_to_s"].get<double>() * 48000));
    const std::vector<double> seg(x.begin() + static_cast<std::ptrdiff_t>(b), x.begin() + static_cast<std::ptrdiff_t>(e));
    const windowed_analysis a = analyse_windowed(seg, 48000.0);
    // Oracle as above; the top step is written just under full scale (one dither step plus
    // rounding below the largest 24-bit code, -1.6e-6 dB), so 0.01 dB holds for all.
    CHECK(std::abs(20 * std::log10(a.fundamental_vpk) - want) <= 0.01);
  }
  CHECK(j["steps"][4]["level_dbfs"].get<double>() < 0.0);
  CHECK(j["clipped_samples"] == 0);
}

TEST_CASE("tone refuses what it cannot write and leaves no file") {
  scratch_dir dir;
  const std::string existing = dir.file("taken.wav");
  REQUIRE(run({"tone", existing}).status == 0);
  struct row {
    std::vector<std::string> args;
    const char* expect;
  };
  const row rows[] = {
      {{"tone", existing}, "exists"},
      {{"tone", "--level", "+3dBFS", dir.file("a.wav")}, "above full scale"},
      {{"tone", "--freq", "30k", dir.file("a.wav")}, "half the sample rate"},
      {{"tone", "--format", "mp3", dir.file("a.wav")}, "unknown sample format"},
      {{"tone", "--steps", "-40..0", dir.file("a.wav")}, "FROM..TO:STEP"},
      {{"tone", "--level", "loud", dir.file("a.wav")}, "not a level"},
      {{"tone", dir.file("missing/a.wav")}, "does not exist"},
  };
  for (const row& r : rows) {
    std::string line;
    for (const std::string& a : r.args) line += a + " ";
    INFO(std::string(line));
    const result res = run(r.args);
    CHECK(res.status == 2);
    CHECK(res.out.empty());
    CHECK(res.err.find(r.expect) != std::string::npos);
  }
  CHECK(dir.entries() == 1);  // only the first file
  CHECK(run({"tone", "--force", existing, "--seconds", "1"}).status == 0);
}

TEST_CASE("a tone stopped by Ctrl-C or SIGTERM exits 128 + the signal and leaves no file") {
  // common practice: shells report a process ended by signal N as status 128 + N; an
  // interrupted writer must not leave a half-written file or its temporary behind.
  struct row {
    const char* given;
    int signo;
    int status;
  };
  const row rows[] = {{"Ctrl-C (SIGINT)", SIGINT, 130}, {"SIGTERM", SIGTERM, 143}};
  for (const row& r : rows) {
    CAPTURE(std::string(r.given));
    scratch_dir dir;
    // 50 minutes of 24-bit stereo (860 MB): far longer than the test waits.
    const pid_t pid = pinchoff::testing::spawn_cli(
        {"tone", "--seconds", "3000", "--channels", "2", "--format", "wav24", dir.file("long.wav")});
    REQUIRE(pid > 0);
    // Wait for the writer's temporary file to appear, then signal.
    const auto deadline = std::chrono::steady_clock::now() + std::chrono::seconds(10);
    while (std::chrono::steady_clock::now() < deadline && dir.entries() == 0)
      std::this_thread::sleep_for(std::chrono::milliseconds(2));
    REQUIRE(dir.entries() == 1);
    std::this_thread::sleep_for(std::chrono::milliseconds(50));
    REQUIRE(::kill(pid, r.signo) == 0);
    int status = 0;
    REQUIRE(::waitpid(pid, &status, 0) == pid);
    REQUIRE(WIFEXITED(status));
    CHECK(WEXITSTATUS(status) == r.status);
    CHECK(dir.entries() == 0);  // no output, no temporary
  }
}

}  // namespace test_tone
