// Finding the steps of a level staircase (dsp/level_steps.hpp) in signals whose steps are
// known exactly: the tone generator's own staircases, silence and noise between them.
#include <doctest/doctest.h>

#include <cmath>
#include <numbers>
#include <random>
#include <vector>

#include "base/units.hpp"
#include "dsp/level_steps.hpp"
#include "dsp/tone.hpp"
#include "dsp/windowed_analysis.hpp"

namespace test_level_steps {

using namespace pinchoff::dsp;

namespace {
std::vector<double> generate(const tone_plan& plan) {
  tone_generator g(plan);
  std::vector<double> x(static_cast<std::size_t>(g.frames()));
  g.generate(x);
  return x;
}
}  // namespace

TEST_CASE("every step of a generated staircase is found inside the span where it holds, at its level") {
  // The staircase's layout is the generator's (dsp/tone.hpp): a step holds its level from
  // its start plus the fade to its end. Each found step must lie inside that span, lose at
  // most 0.15 s of it (one 50 ms block of margin at each end and one block of rounding),
  // and read its planned level within 0.01 dB (the requirement) under the
  // windowed analysis.
  struct row {
    const char* source;
    double freq_hz, from, to, step, seconds, fade_s, rate_hz;
  };
  const row rows[] = {{"closed form: tone --steps -40..0:6, 1 s steps", 1000.0, -40, 0, 6, 1.0, 0.01, 48000},
                      {"closed form: falling 1 dB steps, the closest the finder tells apart", 440.0, -6, -12, 1.0, 0.6, 0.01, 44100},
                      {"closed form: 40 Hz, 25 ms fades, 96 kHz", 40.0, -30, -10, 10, 1.5, 0.025, 96000},
                      {"closed form: 25 Hz, where a block holds 1.25 cycles", 25.0, -20, 0, 5, 1.0, 0.01, 48000}};
  for (const row& r : rows) {
    CAPTURE(r.source);
    tone_plan plan;
    plan.frequency_hz = r.freq_hz;
    plan.rate_hz = r.rate_hz;
    plan.fade_seconds = r.fade_s;
    plan.steps = level_staircase(r.from, r.to, r.step, r.seconds);
    const std::vector<double> x = generate(plan);
    const std::vector<steady_span> spans = steady_spans(plan);
    const std::vector<sample_range> found = find_level_steps(x, r.rate_hz);
    REQUIRE(found.size() == plan.steps.size());
    for (std::size_t k = 0; k < found.size(); ++k) {
      CAPTURE(k);
      CHECK(static_cast<std::int64_t>(found[k].begin) >= spans[k].begin);
      CHECK(static_cast<std::int64_t>(found[k].end) <= spans[k].end);
      CHECK(static_cast<double>(spans[k].end - spans[k].begin) - static_cast<double>(found[k].end - found[k].begin) <=
            0.15 * r.rate_hz);
      const std::span<const double> part(x.data() + found[k].begin, fast_analysis_length(found[k].end - found[k].begin));
      const windowed_analysis a = analyse_windowed(part, r.rate_hz);
      CHECK(std::fabs(pinchoff::base::db_from_ratio(a.fundamental_vpk) - plan.steps[k].level_dbfs) <= 0.01);
    }
  }
}

TEST_CASE("silence between takes and steps shorter than 0.3 s are not steps") {
  // Built here: 0.5 s of digital silence, a 1 s tone at -20 dBFS, 0.5 s of silence, 0.2 s
  // at -10 dBFS (too short), 0.5 s of silence, 1 s at -30 dBFS.
  const double fs = 48000.0;
  std::vector<double> x;
  const auto tone = [&](double seconds, double dbfs) {
    const double a = std::pow(10.0, dbfs / 20.0);
    const auto n = static_cast<std::size_t>(seconds * fs);
    for (std::size_t t = 0; t < n; ++t) x.push_back(a * std::sin(2 * std::numbers::pi * 1000.0 * static_cast<double>(t) / fs));
  };
  const auto silence = [&](double seconds) { x.resize(x.size() + static_cast<std::size_t>(seconds * fs), 0.0); };
  silence(0.5);
  tone(1.0, -20);
  silence(0.5);
  tone(0.2, -10);
  silence(0.5);
  tone(1.0, -30);
  const std::vector<sample_range> found = find_level_steps(x, fs);
  REQUIRE(found.size() == 2);
  // One 50 ms block of margin at each end of each tone.
  CHECK(found[0].begin == static_cast<std::size_t>(std::llround(0.55 * fs)));
  CHECK(found[0].end == static_cast<std::size_t>(std::llround(1.45 * fs)));
  CHECK(found[1].begin == static_cast<std::size_t>(std::llround(2.75 * fs)));
  CHECK(found[1].end == static_cast<std::size_t>(std::llround(3.65 * fs)));
}

TEST_CASE("the level spread of a steady tone stays under 0.6 dB and a staircase reads its range") {
  // The ripple bound of dsp/level_steps.hpp: 1 / (4 pi f T) of the power at most, for
  // T = 50 ms: +-0.28 dB at 25 Hz, far less above (closed form).
  const double fs = 48000.0;
  for (const double f : {25.0, 31.0, 100.0, 1000.0, 15000.0}) {
    CAPTURE(f);
    tone_plan plan;
    plan.frequency_hz = f;
    plan.rate_hz = fs;
    plan.steps = {{-12.0, 2.0}};
    plan.fade_seconds = 0.0;
    const std::vector<double> x = generate(plan);
    CHECK(level_spread_db(x, fs) < 0.6);
  }
  tone_plan plan;
  plan.rate_hz = fs;
  plan.fade_seconds = 0.0;
  plan.steps = level_staircase(-30, -10, 10, 0.5);
  // Three steps 10 dB apart, block edges on step edges: exactly the 20 dB between them, to
  // the ripple of a 1 kHz tone (a block holds 50 whole cycles: none).
  CHECK(level_spread_db(generate(plan), fs) == doctest::Approx(20.0).epsilon(1e-6));
}

TEST_CASE("noise at the recorder's floor between steps is a plateau, not a tone") {
  // White noise at -90 dBFS rms before and after a -40 dBFS tone: the finder reports each
  // held level, and it is the analysis that tells the tone from the noise (cli measure).
  const double fs = 48000.0;
  std::mt19937 gen(7);
  std::normal_distribution<double> n(0.0, std::pow(10.0, -90.0 / 20.0));
  std::vector<double> x(static_cast<std::size_t>(3 * fs));
  for (std::size_t t = 0; t < x.size(); ++t) {
    x[t] = n(gen);
    if (t >= fs && t < 2 * fs) x[t] += 0.01 * std::sin(2 * std::numbers::pi * 997.0 * static_cast<double>(t) / fs);
  }
  const std::vector<sample_range> found = find_level_steps(x, fs);
  int tones = 0;
  for (const sample_range& f : found) {
    const windowed_analysis a =
        analyse_windowed(std::span<const double>(x).subspan(f.begin, fast_analysis_length(f.end - f.begin)), fs);
    if (a.thd_n_ratio > 0.9) continue;  // cli measure's no_tone_thd_n: noise, no tone
    ++tones;
    CHECK(f.begin >= static_cast<std::size_t>(fs));
    CHECK(f.end <= static_cast<std::size_t>(2 * fs));
    CHECK(a.fundamental_hz == doctest::Approx(997.0).epsilon(1e-6));
    CHECK(a.thd_n_ratio < 0.01);
  }
  CHECK(tones == 1);
}

}  // namespace test_level_steps
