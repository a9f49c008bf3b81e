// The committed demo clip (samples/pluck-phrase-48k.wav) against its MANIFEST row and the
// program that makes it, and the Karplus-Strong string's tuning against equal temperament.
#include <doctest/doctest.h>

#include <algorithm>
#include <cmath>
#include <cstdlib>
#include <filesystem>
#include <fstream>
#include <random>
#include <string>
#include <vector>

#include "dsp/io/sound_file.hpp"
#include "dsp/windowed_analysis.hpp"
#include "samples/pluck_phrase.hpp"

namespace test_demo_sample {

using namespace pinchoff::samples;
namespace dsp = pinchoff::dsp;
namespace fs = std::filesystem;

namespace {

const fs::path clip_path = fs::path(PINCHOFF_SAMPLES_DIR) / "pluck-phrase-48k.wav";

std::vector<double> read_clip(dsp::sound_info& info) {
  dsp::sound_reader r = dsp::sound_reader::open(clip_path);
  info = r.info();
  return dsp::read_channel(r, 0);
}

double peak_dbfs(const std::vector<double>& x) {
  double peak = 0.0;
  for (double v : x) peak = std::max(peak, std::abs(v));
  return 20.0 * std::log10(peak);
}

// The level column of the clip's row in samples/MANIFEST.md, which begins with the sample
// peak in dBFS ("-6.0 dBFS sample peak ..."). NaN when the row or the number is missing.
double manifest_peak_dbfs() {
  std::ifstream in(fs::path(PINCHOFF_SAMPLES_DIR) / "MANIFEST.md");
  std::string line;
  while (std::getline(in, line)) {
    if (line.rfind("| `pluck-phrase-48k.wav`", 0) != 0) continue;
    // | file | made by | rate | level | purpose | licence |
    std::size_t bar = 0;
    for (int k = 0; k < 3 && bar != std::string::npos; ++k) bar = line.find('|', bar + 1);
    if (bar == std::string::npos) break;
    const char* begin = line.c_str() + bar + 1;
    char* end = nullptr;
    const double v = std::strtod(begin, &end);
    if (end == begin || std::string(end).find("dBFS") > 2) break;
    return v;
  }
  return std::nan("");
}

double cents(double f_hz, double ref_hz) { return 1200.0 * std::log2(f_hz / ref_hz); }

double measured_fundamental_hz(const std::vector<double>& x, double fs_hz, double approx_hz) {
  dsp::windowed_settings ws;
  ws.approx_fundamental_hz = approx_hz;
  return dsp::analyse_windowed(x, fs_hz, ws).fundamental_hz;
}

}  // namespace

TEST_CASE("the committed demo clip is 6.5 s of 48 kHz mono WAV 24-bit under 1 MB") {
  // The requirement of the samples folder (issue: a few seconds, 48 kHz, under 1 MB).
  dsp::sound_info info;
  const std::vector<double> x = read_clip(info);
  CHECK(info.rate_hz == 48000.0);
  CHECK(info.channels == 1);
  CHECK(info.format_text == "WAV, 24-bit integer");
  CHECK(info.frames == 312000);
  CHECK(x.size() == 312000);
  CHECK(fs::file_size(clip_path) < 1000000);
  // It starts and ends in silence (50 ms lead-in; raised-cosine fade to zero).
  CHECK(std::all_of(x.begin(), x.begin() + 2400, [](double v) { return v == 0.0; }));
  CHECK(std::abs(x.back()) <= 0x1p-24);
}

TEST_CASE("the demo clip's sample peak is the level its MANIFEST row states, within 0.5 dB") {
  dsp::sound_info info;
  const std::vector<double> x = read_clip(info);
  const double stated = manifest_peak_dbfs();
  CAPTURE(stated);
  REQUIRE(std::isfinite(stated));
  CHECK(stated == phrase_peak_dbfs);
  const double measured = peak_dbfs(x);
  CAPTURE(measured);
  CHECK(std::abs(measured - stated) <= 0.5);
}

TEST_CASE("regenerating the demo clip gives the committed samples within half a 24-bit step") {
  // sound_file.hpp: a 24-bit write stores round(x 2^23), so reading back returns the
  // synthesised x within 2^-24 (x stays below full scale: the peak is -6 dBFS). Anything
  // more means the program and the committed file have drifted apart: rerun
  // `pinchoff_make_sample samples/pluck-phrase-48k.wav --force` and commit the result.
  dsp::sound_info info;
  const std::vector<double> file = read_clip(info);
  const std::vector<double> synth = pluck_phrase(phrase_rate_hz);
  REQUIRE(synth.size() == file.size());
  double worst = 0.0;
  std::size_t worst_at = 0;
  for (std::size_t t = 0; t < file.size(); ++t) {
    const double e = std::abs(file[t] - synth[t]);
    if (e > worst) worst = e, worst_at = t;
  }
  CAPTURE(worst_at);
  CAPTURE(worst);
  CHECK(worst <= 0x1p-24 * (1.0 + 1e-9));
  CHECK(peak_dbfs(synth) == doctest::Approx(phrase_peak_dbfs).epsilon(1e-12));
}

TEST_CASE("the synthesis is deterministic: the same seed gives the same note, another seed another") {
  // C++ standard [rand.predef]: the 10000th output of a default-constructed mt19937_64 is
  // 9981545732273789042, so its sequence, and our noise, is the same everywhere.
  std::mt19937_64 e;
  e.discard(9999);
  CHECK(e() == 9981545732273789042ULL);
  string_settings s;
  s.frequency_hz = 55.0;
  const std::vector<double> a = pluck_note(s, 48000.0, 4800, 7);
  const std::vector<double> b = pluck_note(s, 48000.0, 4800, 7);
  const std::vector<double> c = pluck_note(s, 48000.0, 4800, 8);
  CHECK(a == b);
  CHECK(a != c);
}

TEST_CASE("a plucked note sounds within 1 cent of equal temperament with the tuning allpass") {
  // Reference: equal temperament on A4 = 440 Hz (ISO 16), MIDI numbering. With the
  // allpass the loop is tuned to the exact period (Jaffe & Smith 1983, with c solved at
  // the note, pluck_phrase.hpp). Without it the loop is N + 1 whole samples, so the note
  // is fs / (N + 1) (closed form: the loss filter is symmetric, a delay of exactly one
  // sample), off by up to half a sample of the period. The measured fundamental is the
  // windowed analyser's (1 s, 4-term Blackman-Harris, peak located to 1e-7 bin); a
  // decaying partial's spectrum is symmetric about its frequency, so the decay does not
  // pull the peak. 0.2 cent of agreement with the closed form is the allowance for the
  // other partials' leakage and the pole of a lossy loop lying off the unit circle.
  struct row {
    const char* note;
    int midi;
    double loss_g, t60_s;
  };
  const row rows[] = {
      {"E1, lowest bass string", 28, 0.25, 3.0}, {"A1", 33, 0.25, 3.0}, {"D2", 38, 0.25, 3.0},
      {"G2", 43, 0.25, 3.0},                      {"E2", 40, 0.25, 3.0}, {"A4", 69, 0.05, 2.0},
      {"E5", 76, 0.02, 2.0},                      {"C6", 84, 0.01, 1.5},
  };
  const double fs_hz = 48000.0;
  double worst_untuned = 0.0;
  for (const row& r : rows) {
    INFO(std::string(r.note));
    string_settings s;
    s.frequency_hz = equal_tempered_hz(r.midi);
    s.loss_g = r.loss_g;
    s.t60_s = r.t60_s;

    const plucked_string tuned(s, fs_hz);
    CHECK(tuned.period_samples() == doctest::Approx(fs_hz / s.frequency_hz).epsilon(1e-12));
    const double with_allpass = cents(measured_fundamental_hz(pluck_note(s, fs_hz, 48000, 3), fs_hz, s.frequency_hz),
                                      s.frequency_hz);
    CAPTURE(with_allpass);
    CHECK(std::abs(with_allpass) <= 1.0);

    s.tuning_allpass = false;
    const plucked_string untuned(s, fs_hz);
    const double expected = cents(fs_hz / (untuned.delay_samples() + 1.0), s.frequency_hz);
    const double without_allpass = cents(
        measured_fundamental_hz(pluck_note(s, fs_hz, 48000, 3), fs_hz, s.frequency_hz), s.frequency_hz);
    CAPTURE(expected);
    CAPTURE(without_allpass);
    CHECK(std::abs(without_allpass - expected) <= 0.2);
    worst_untuned = std::max(worst_untuned, std::abs(without_allpass));
  }
  // The check above can fail: at the higher notes the untuned loop misses by several cents.
  CHECK(worst_untuned > 4.0);
}

TEST_CASE("a plucked note's fundamental decays by 60 dB in the time asked") {
  // Closed form: the loop gain at the fundamental is 10^(-3 / (f0 t60)) per period
  // (pluck_phrase.hpp), so the fundamental's amplitude between two records T apart falls
  // by 60 T / t60 dB. Measured by the windowed analyser on two 0.5 s records 1 s apart.
  // 0.3 dB allows for the analyser's reading of a line that changes under the window
  // (the same shape in both records, so it mostly cancels).
  string_settings s;
  s.frequency_hz = equal_tempered_hz(33);  // A1
  s.t60_s = 3.0;
  const double fs_hz = 48000.0;
  const std::vector<double> x = pluck_note(s, fs_hz, 96000, 11);
  const std::vector<double> first(x.begin() + 12000, x.begin() + 36000);
  const std::vector<double> second(x.begin() + 60000, x.begin() + 84000);
  dsp::windowed_settings ws;
  ws.approx_fundamental_hz = s.frequency_hz;
  const double a1 = dsp::analyse_windowed(first, fs_hz, ws).fundamental_vpk;
  const double a2 = dsp::analyse_windowed(second, fs_hz, ws).fundamental_vpk;
  const double fall_db = 20.0 * std::log10(a1 / a2);
  CAPTURE(fall_db);
  CHECK(std::abs(fall_db - 60.0 * 1.0 / s.t60_s) <= 0.3);
}

}  // namespace test_demo_sample
