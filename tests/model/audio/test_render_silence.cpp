// The render's silence floor (model/audio/render.hpp): normalising and loudness matching
// never lift numerical residue into audio. An input, or a stage's output, whose swing is
// not above the engine's accepted error a sample is written as digital silence and the
// report says so; a swing above it is normalised as any other.
// The floor is checked against the engine's documented acceptance (model/engine/dk_stats.hpp:
// tol_v, 1e-10 V by default, plus the port equation's rounding, at most 1e-8 V), not
// against the figure the code computes.
#include <algorithm>
#include <cmath>
#include <cstdint>
#include <filesystem>
#include <fstream>
#include <limits>
#include <utility>
#include <numbers>
#include <sstream>
#include <string>
#include <vector>

#include <doctest/doctest.h>
#include <nlohmann/json.hpp>

#include "base/units.hpp"
#include "cli/app.hpp"
#include "dsp/io/sound_file.hpp"
#include "model/audio/render.hpp"
#include "support/cli_runner.hpp"
#include "support/scratch_dir.hpp"
#include "support/sound_files.hpp"

namespace test_render_silence {

namespace {

using namespace pinchoff;
using pinchoff::testing::scratch_dir;
using result = pinchoff::testing::cli_result;
using pinchoff::testing::run_cli;
namespace fs = std::filesystem;

// The documented acceptance of the engine (dk_stats.hpp): tol_v 1e-10 V plus at most 1e-8 V.
constexpr double documented_floor_v = 1e-10 + 1e-8;

void write_audio(const fs::path& p, int channels, dsp::sample_format f, const std::vector<double>& x) {
  testing::write_sound(p, x, 48000.0, channels, f);
}
std::vector<double> read_all(const fs::path& p) { return testing::read_sound(p).x; }

std::string preset(const char* name) { return std::string(PINCHOFF_PRESETS_DIR) + "/" + name; }

std::vector<double> sine(double f_hz, double amplitude, std::size_t n) {
  std::vector<double> x(n);
  for (std::size_t k = 0; k < n; ++k) x[k] = amplitude * std::sin(2.0 * std::numbers::pi * f_hz * static_cast<double>(k) / 48000.0);
  return x;
}

// Triangular noise of peak `amplitude`: the sum of two uniform values of +-amplitude/2.
std::vector<double> dither(double amplitude, std::size_t n) {
  std::uint64_t state = 12345;
  auto uniform = [&state] {  // [-1/2, 1/2), Knuth's MMIX constants
    state = state * 6364136223846793005ull + 1442695040888963407ull;
    return static_cast<double>(state >> 11) / 9007199254740992.0 - 0.5;
  };
  std::vector<double> x(n);
  for (double& v : x) v = amplitude * (uniform() + uniform());
  return x;
}

double peak_of(const std::vector<double>& x, std::size_t channels = 1, std::size_t channel = 0) {
  double p = 0.0;
  for (std::size_t i = channel; i < x.size(); i += channels) p = std::max(p, std::abs(x[i]));
  return p;
}

bool all_zero(const std::vector<double>& x, std::size_t channels = 1, std::size_t channel = 0) {
  for (std::size_t i = channel; i < x.size(); i += channels)
    if (x[i] != 0.0) return false;
  return true;
}

}  // namespace

TEST_CASE("the silence floor is the engine's documented acceptance a sample") {
  CHECK(std::abs(model::render_floor_v(model::dk_options{}) - documented_floor_v) < 1e-20);
}

TEST_CASE("a silent or near-silent input is written as silence, not lifted to full scale") {
  // Before the floor, an all-zero input came out at -1 dBFS: femtovolt residue lifted by
  // about 290 dB into a full-scale step.
  scratch_dir dir;
  const std::size_t n = 24000;
  struct row {
    const char* what;
    std::vector<double> x;
    dsp::sample_format format;
    bool silent;
  };
  const row rows[] = {
      {"all zero, 16-bit", std::vector<double>(n, 0.0), dsp::sample_format::wav16, true},
      {"all zero, float", std::vector<double>(n, 0.0), dsp::sample_format::wav_float, true},
      // -200 dBFS at 1 V full scale: 100 pV at the generator, a hundredth of the floor.
      {"-200 dBFS tone, float", sine(1000.0, 1e-10, n), dsp::sample_format::wav_float, true},
      // TPDF dither of +-1e-10 (-200 dBFS peak), from a fixed linear congruential sequence.
      {"-200 dBFS dither, float", dither(1e-10, n), dsp::sample_format::wav_float, true},
      // Just under and well over the floor (full scale stands for 1 V).
      {"0.9 x the floor", sine(1000.0, 0.9 * documented_floor_v, n), dsp::sample_format::wav_float, true},
      {"100 x the floor", sine(1000.0, 100.0 * documented_floor_v, n), dsp::sample_format::wav_float, false},
  };
  for (const row& r : rows) {
    CAPTURE(std::string(r.what));
    const std::string in = dir.file("in.wav"), out = dir.file("out.wav");
    fs::remove(in);
    fs::remove(out);
    write_audio(in, 1, r.format, r.x);
    const result res = run_cli({"render", preset("bass-booster-9v.toml"), "--input", in, "--output", out, "--json"});
    CAPTURE(res.err);
    REQUIRE(res.status == 0);
    const nlohmann::json j = nlohmann::json::parse(res.out);
    const nlohmann::json& o = j["outputs"][0];
    CHECK(o["silent"].get<bool>() == r.silent);
    CHECK(std::abs(j["silence_floor_v"].get<double>() - documented_floor_v) < 1e-20);
    const std::vector<double> y = read_all(out);
    REQUIRE(y.size() == n);
    if (r.silent) {
      CHECK(all_zero(y));
      CHECK(o["scale"].get<double>() == 0.0);
      CHECK(o["sample_peak_dbfs"].is_null());
      // The text report says so.
      const result t = run_cli({"render", preset("bass-booster-9v.toml"), "--input", in, "--output", out, "--force"});
      REQUIRE(t.status == 0);
      CHECK(t.out.find("is written as silence") != std::string::npos);
    } else {
      // Normalised as any signal: its peak at -1 dBFS (float file, no rounding), and the
      // report warns of the lift (1 µV in, about 10 µV out: some 100 dB).
      CHECK(std::abs(base::db_from_ratio(peak_of(y)) - (-1.0)) < 1e-4);
      const result t = run_cli({"render", preset("bass-booster-9v.toml"), "--input", in, "--output", out, "--force"});
      REQUIRE(t.status == 0);
      CHECK(t.out.find("was lifted by") != std::string::npos);
    }
  }
}

TEST_CASE("a channel below the floor is written as zeros beside a normalised one") {
  scratch_dir dir;
  const std::size_t n = 24000;
  const std::vector<double> left = sine(1000.0, 0.5, n);
  std::vector<double> x(2 * n, 0.0);
  for (std::size_t k = 0; k < n; ++k) x[2 * k] = left[k];
  write_audio(dir.path / "in.wav", 2, dsp::sample_format::wav_float, x);
  const result r = run_cli({"render", preset("bass-booster-9v.toml"), "--input", dir.file("in.wav"), "--output",
                            dir.file("out.wav"), "--json"});
  CAPTURE(r.err);
  REQUIRE(r.status == 0);
  const nlohmann::json o = nlohmann::json::parse(r.out)["outputs"][0];
  CHECK_FALSE(o["silent"].get<bool>());
  CHECK(o["silent_channels"] == nlohmann::json::array({2}));
  const std::vector<double> y = read_all(dir.path / "out.wav");
  CHECK(all_zero(y, 2, 1));
  CHECK(std::abs(base::db_from_ratio(peak_of(y, 2, 0)) - (-1.0)) < 1e-4);
}

TEST_CASE("a file silent but for one sample is rendered: its impulse response is a signal") {
  // Half full scale for one sample is 0.5 V at the generator, far above the floor.
  scratch_dir dir;
  std::vector<double> x(24000, 0.0);
  x[1000] = 0.5;
  write_audio(dir.path / "in.wav", 1, dsp::sample_format::wav_float, x);
  const result r = run_cli({"render", preset("bass-booster-9v.toml"), "--input", dir.file("in.wav"), "--output",
                            dir.file("out.wav"), "--json"});
  REQUIRE(r.status == 0);
  CHECK_FALSE(nlohmann::json::parse(r.out)["outputs"][0]["silent"].get<bool>());
  CHECK(std::abs(base::db_from_ratio(peak_of(read_all(dir.path / "out.wav"))) - (-1.0)) < 1e-4);
}

TEST_CASE("a stage whose output stays below the floor is written as silence, a loud input notwithstanding") {
  // A 1 pF output capacitor into 10 ohm: at 100 Hz the divider passes
  // 2 pi f C R = 6.3e-9 of the drain's swing (closed form, |Zc| >> R), so a drain swing of
  // about 0.1 V leaves under a nanovolt at the load, a tenth of the floor and less.
  scratch_dir dir;
  std::ifstream src(preset("bass-booster-9v.toml"));
  std::stringstream text;
  text << src.rdbuf();
  std::string stage = text.str();
  const std::string cap = "coupling_cap = \"1u\"", load = "load = \"100k\"";
  REQUIRE(stage.find(cap) != std::string::npos);
  REQUIRE(stage.find(load) != std::string::npos);
  stage.replace(stage.find(cap), cap.size(), "coupling_cap = \"1p\"");
  stage.replace(stage.find(load), load.size(), "load = \"10\"");
  std::ofstream(dir.path / "tiny.toml") << stage;
  write_audio(dir.path / "in.wav", 1, dsp::sample_format::wav_float, sine(100.0, 0.01, 24000));
  const result r = run_cli({"render", dir.file("tiny.toml"), "--input", dir.file("in.wav"), "--output",
                            dir.file("out.wav"), "--json"});
  CAPTURE(r.err);
  REQUIRE(r.status == 0);
  const nlohmann::json o = nlohmann::json::parse(r.out)["outputs"][0];
  CHECK(o["peak_v"].get<double>() < documented_floor_v);
  CHECK(o["silent"].get<bool>());
  CHECK(all_zero(read_all(dir.path / "out.wav")));
}

TEST_CASE("loudness matching leaves silent outputs silent, the dry input too") {
  // Before the floor, each silent output was scaled to the ceiling on its own peak.
  scratch_dir dir;
  const std::pair<const char*, std::vector<double>> inputs[] = {{"all zero", std::vector<double>(24000, 0.0)},
                                                                {"-200 dBFS", sine(1000.0, 1e-10, 24000)}};
  for (const auto& input : inputs) {
    const char* const what = input.first;  // a plain local: clang 14 cannot capture a structured binding
    const std::vector<double>& x = input.second;
    CAPTURE(std::string(what));
    const std::string in = dir.file(std::string(what) + ".wav"), out = dir.file(std::string(what) + "-cmp");
    write_audio(in, 1, dsp::sample_format::wav_float, x);
    const result r = run_cli({"render", preset("bass-booster-9v.toml"), preset("clean-preamp-18v.toml"), "--input", in,
                              "--output", out, "--dry", "--json"});
    CAPTURE(r.err);
    REQUIRE(r.status == 0);
    const nlohmann::json j = nlohmann::json::parse(r.out);
    REQUIRE(j["outputs"].size() == 3);
    for (const auto& o : j["outputs"]) {
      CAPTURE(o["path"].get<std::string>());
      CHECK(o["silent"].get<bool>());
      CHECK_FALSE(o["loudness_matched"].get<bool>());
      CHECK(all_zero(read_all(o["path"].get<std::string>())));
    }
  }
}

TEST_CASE("loudness matching gives a silent output (peak 0) scale 0") {
  const std::vector<double> loud{-20.0, -std::numeric_limits<double>::infinity()};
  const std::vector<double> peak{0.5, 0.0};
  double target = 0.0;
  const std::vector<double> s = model::loudness_matched_scales(loud, peak, 1.0, target);
  CHECK(s[1] == 0.0);
  CHECK(std::abs(target - (-20.0 + base::db_from_ratio(2.0))) < 1e-12);
}

}  // namespace test_render_silence
