// render --noise (model/audio/render.hpp, "Modelled noise"): the hiss written is the
// stage's output noise as `noise` computes it (model/analysis/noise.hpp), at its absolute
// level through the calibration, and never normalised on its own.
// The spectrum is checked by Welch's estimate (tests/support/welch.hpp) against the
// analysis' density at the same frequencies, within the estimate's statistical error.
#include <algorithm>
#include <cmath>
#include <filesystem>
#include <numbers>
#include <sstream>
#include <string>
#include <vector>

#include <doctest/doctest.h>
#include <nlohmann/json.hpp>

#include "cli/app.hpp"
#include "dsp/io/sound_file.hpp"
#include "model/analysis/noise.hpp"
#include "model/circuit/network.hpp"
#include "model/circuit/operating_point.hpp"
#include "model/circuit/stage_file.hpp"
#include "support/cli_runner.hpp"
#include "support/sanitized.hpp"
#include "support/scratch_dir.hpp"
#include "support/sound_files.hpp"
#include "support/welch.hpp"

namespace test_render_noise {

namespace {

using namespace pinchoff;
using pinchoff::testing::scratch_dir;
using result = pinchoff::testing::cli_result;
using pinchoff::testing::run_cli;
namespace fs = std::filesystem;

std::string preset(const char* name) { return std::string(PINCHOFF_PRESETS_DIR) + "/" + name; }

constexpr double rate = 48000.0;

void write_audio(const fs::path& p, const std::vector<double>& x) { testing::write_sound(p, x, rate); }
std::vector<double> read_all(const fs::path& p) { return testing::read_sound(p).x; }

double mean_square(const std::vector<double>& x) {
  double s = 0.0;
  for (double v : x) s += v * v;
  return s / static_cast<double>(x.size());
}

// The analysis' output density of a preset at frequency f (V^2/Hz).
struct predicted {
  model::network net;
  model::operating_point op;
  std::vector<model::noise_source> sources;
  explicit predicted(const char* name) {
    net = model::build_network(model::read_stage_file(preset(name)));
    op = model::solve_operating_point(net);
    sources = model::noise_sources(net, op);
  }
  double at(double f) const { return model::noise_at(net, op, sources, f).output_v2_hz; }
  // The relative standard error of the mean square of n samples of this noise at the file's
  // rate: sqrt(2 sum_k r_k^2 / n) / r_0 for Gaussian noise of autocorrelation r, with
  // sum_k r_k^2 = (fs / 2) times the integral of S^2 (Parseval), on a 1 Hz grid.
  double mean_square_error(std::size_t n) const {
    double integral = 0.0, integral_sq = 0.0;
    for (double f = 2.93; f < rate / 2.0; f += 1.0) {
      const double s = at(f + 0.5);
      integral += s;
      integral_sq += s * s;
    }
    return std::sqrt(2.0 * (rate / 2.0) * integral_sq / static_cast<double>(n)) / integral;
  }
};

// The oversampling a render of silence asks for: the default (chosen by the program) in the
// Release suite, 1x under the sanitizers (tests/support/sanitized.hpp). The hiss is drawn at
// the file's rate and added after the engine, and silence leaves the engine at its DC point
// at any rate, so the file's samples are the same either way (measured: the same bytes for
// each silence below, 8x against 1x); 1x spares the sanitized run the engine's steps on
// silence, a path the engine's own tests run under the sanitizers.
std::vector<std::string> silence_rate() {
  if (pinchoff::testing::sanitized_build) return {"--oversample", "1"};
  return {};
}

std::vector<std::string> with(std::vector<std::string> args, const std::vector<std::string>& more) {
  args.insert(args.end(), more.begin(), more.end());
  return args;
}

}  // namespace

TEST_CASE("render --noise on silence at a fixed scale: the written hiss has the analysis' spectrum and level") {
  scratch_dir d;
  write_audio(d.file("silence.wav"), std::vector<double>(static_cast<std::size_t>(20 * rate), 0.0));
  // --output-peak 1V: the float file holds volts at the load.
  const result r = run_cli(with({"render", preset("bass-booster-9v.toml"), "--input", d.file("silence.wav"), "--output",
                                 d.file("hiss.wav"), "--output-peak", "1V", "--noise", "--json", "--quiet"},
                                silence_rate()));
  REQUIRE(r.status == 0);
  const nlohmann::json j = nlohmann::json::parse(r.out);
  const double rms_v = j["outputs"][0]["noise"]["rms_v"].get<double>();
  CHECK(j["outputs"][0]["noise"]["scaled_by"] == "fixed");
  const std::vector<double> x = read_all(d.file("hiss.wav"));
  const test::welch_estimate w = test::welch(x, rate, 4096);
  const predicted p("bass-booster-9v.toml");
  // Octave bands from 63 Hz to 16 kHz: the band's power against the analysis' density at
  // the same bin centres, within 5 standard errors of the estimate plus 0.3 % for the
  // shaping (the log-log table, under 0.15 %, and the taper; dsp/shaped_noise.hpp).
  for (double centre = 62.5; centre <= 16000.0; centre *= 2.0) {
    const double lo = centre / std::numbers::sqrt2, hi = centre * std::numbers::sqrt2;
    int bins = 0;
    const double got = w.band_power(lo, hi, &bins);
    double expect = 0.0;
    for (int k = 1; k * w.df_hz <= hi; ++k)
      if (k * w.df_hz >= lo) expect += p.at(k * w.df_hz) * w.df_hz;
    CAPTURE(centre);
    CAPTURE(got / expect);
    CHECK(std::fabs(got / expect - 1.0) < 5.0 * w.band_relative_error(bins) + 3e-3);
  }
  // The reported rms (the shape's exact variance, 0 to 24 kHz) against the analysis
  // integrated over the same span (midpoint sums on a 1 Hz grid from the shape's first bin,
  // 2.93 Hz), and the whole file's mean square against it. The mean square of N samples of
  // Gaussian noise of autocorrelation r has the relative standard error
  // sqrt(2 sum_k r_k^2 / N) / r_0, and sum_k r_k^2 = (fs / 2) times the integral of S^2
  // (Parseval); 5 of them bound it.
  double integral = 0.0, integral_sq = 0.0;
  for (double f = 2.93; f < rate / 2.0; f += 1.0) {
    const double s = p.at(f + 0.5);
    integral += s;
    integral_sq += s * s;
  }
  CHECK(std::fabs(rms_v * rms_v / integral - 1.0) < 0.01);
  const double se = std::sqrt(2.0 * (rate / 2.0) * integral_sq / static_cast<double>(x.size())) / integral;
  CAPTURE(se);
  CHECK(std::fabs(mean_square(x) / (rms_v * rms_v) - 1.0) < 5.0 * se);
}

TEST_CASE("render --noise on silence, normalised: hiss at its level against the clean swing, not at full scale") {
  scratch_dir d;
  write_audio(d.file("silence.wav"), std::vector<double>(static_cast<std::size_t>(5 * rate), 0.0));
  const result r = run_cli(with({"render", preset("bass-booster-9v.toml"), "--input", d.file("silence.wav"), "--output",
                                 d.file("hiss.wav"), "--noise", "--json", "--quiet"},
                                silence_rate()));
  REQUIRE(r.status == 0);
  const nlohmann::json j = nlohmann::json::parse(r.out);
  const nlohmann::json& n = j["outputs"][0]["noise"];
  CHECK(n["scaled_by"] == "clean_swing");
  // The clean swing as `bias` reports it; the ceiling -1 dBFS stands for it.
  const result b = run_cli({"bias", preset("bass-booster-9v.toml"), "--json"});
  REQUIRE(b.status == 0);
  const double swing = nlohmann::json::parse(b.out)["headroom"]["symmetric_output_vpk"].get<double>();
  CHECK(std::fabs(n["clean_swing_vpk"].get<double>() / swing - 1.0) < 1e-9);
  const double scale = std::pow(10.0, -1.0 / 20.0) / swing;
  const double rms_v = n["rms_v"].get<double>();
  const std::vector<double> x = read_all(d.file("hiss.wav"));
  // Five standard errors of the mean square, halved for the rms.
  const double se = predicted("bass-booster-9v.toml").mean_square_error(x.size());
  CAPTURE(se);
  CHECK(std::fabs(std::sqrt(mean_square(x)) / (rms_v * scale) - 1.0) < 2.5 * se);
  // Far from full scale: the peak of the hiss is some 5 standard deviations of it.
  double peak = 0.0;
  for (double v : x) peak = std::max(peak, std::fabs(v));
  CHECK(peak < 10.0 * rms_v * scale);
  CHECK(peak < 1e-3);
}

TEST_CASE("render --noise: the scale is the noiseless output's, and the file is the noiseless one plus the hiss") {
  scratch_dir d;
  std::vector<double> x(static_cast<std::size_t>(3 * rate));
  for (std::size_t k = 0; k < x.size(); ++k) x[k] = 0.3 * std::sin(2.0 * std::numbers::pi * 440.0 * static_cast<double>(k) / rate);
  write_audio(d.file("tone.wav"), x);
  const result clean = run_cli({"render", preset("bass-booster-9v.toml"), "--input", d.file("tone.wav"), "--output",
                                d.file("clean.wav"), "--json", "--quiet"});
  const result hiss = run_cli({"render", preset("bass-booster-9v.toml"), "--input", d.file("tone.wav"), "--output",
                               d.file("hiss.wav"), "--noise", "--seed", "5", "--json", "--quiet"});
  const result again = run_cli({"render", preset("bass-booster-9v.toml"), "--input", d.file("tone.wav"), "--output",
                                d.file("again.wav"), "--noise", "--seed", "5", "--json", "--quiet"});
  REQUIRE(clean.status == 0);
  REQUIRE(hiss.status == 0);
  REQUIRE(again.status == 0);
  const nlohmann::json jc = nlohmann::json::parse(clean.out), jh = nlohmann::json::parse(hiss.out);
  CHECK(jh["outputs"][0]["scale"].get<double>() == jc["outputs"][0]["scale"].get<double>());
  CHECK(jh["outputs"][0]["noise"]["scaled_by"] == "signal");
  CHECK(jh["noise_seed"] == 5);
  const std::vector<double> a = read_all(d.file("clean.wav")), b = read_all(d.file("hiss.wav"));
  REQUIRE(a.size() == b.size());
  std::vector<double> diff(a.size());
  for (std::size_t k = 0; k < a.size(); ++k) diff[k] = b[k] - a[k];
  const double scale = jh["outputs"][0]["scale"].get<double>(), rms_v = jh["outputs"][0]["noise"]["rms_v"].get<double>();
  const double se = predicted("bass-booster-9v.toml").mean_square_error(diff.size());
  CAPTURE(se);
  CHECK(std::fabs(std::sqrt(mean_square(diff)) / (rms_v * scale) - 1.0) < 2.5 * se);
  CHECK(read_all(d.file("again.wav")) == b);  // a seed repeats the file
}

TEST_CASE("render --noise: each channel hisses on its own stream, at the same level") {
  scratch_dir d;
  const std::size_t frames = static_cast<std::size_t>(5 * rate);
  {
    dsp::write_settings s;
    s.rate_hz = rate;
    s.channels = 2;
    s.format = dsp::sample_format::wav_float;
    dsp::sound_writer w = dsp::sound_writer::create(d.file("stereo.wav"), s);
    w.write(std::vector<double>(2 * frames, 0.0));
    w.commit();
  }
  const result r = run_cli(with({"render", preset("bass-booster-9v.toml"), "--input", d.file("stereo.wav"), "--output",
                                 d.file("hiss.wav"), "--output-peak", "1V", "--noise", "--json", "--quiet"},
                                silence_rate()));
  REQUIRE(r.status == 0);
  const double rms_v = nlohmann::json::parse(r.out)["outputs"][0]["noise"]["rms_v"].get<double>();
  const std::vector<double> x = read_all(d.file("hiss.wav"));
  REQUIRE(x.size() == 2 * frames);
  std::vector<double> left(frames), right(frames);
  double cross = 0.0;
  for (std::size_t k = 0; k < frames; ++k) {
    left[k] = x[2 * k];
    right[k] = x[2 * k + 1];
    cross += left[k] * right[k];
  }
  // The mean square's relative standard error se is sqrt(2 S2 / N) with S2 the sum of the
  // squared normalised autocorrelation; the correlation coefficient of two independent
  // streams of this noise has the standard error sqrt(S2 / N) = se / sqrt(2).
  const double se = predicted("bass-booster-9v.toml").mean_square_error(frames);
  const double corr = cross / static_cast<double>(frames) / std::sqrt(mean_square(left) * mean_square(right));
  CAPTURE(se);
  CAPTURE(corr);
  CHECK(std::fabs(corr) < 5.0 * se / std::sqrt(2.0));
  CHECK(std::fabs(std::sqrt(mean_square(left)) / rms_v - 1.0) < 2.5 * se);
  CHECK(std::fabs(std::sqrt(mean_square(right)) / rms_v - 1.0) < 2.5 * se);
}

}  // namespace test_render_noise
