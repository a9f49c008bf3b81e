// `compare` and `measure --against`: the drive searches against closed forms of an ideal
// square-law stage, the command's figures against run_sweep's own, the grouped-bar plot
// rendered by rsvg-convert, and a recording made of the model's own harmonics read back
// against the model. The CLI runs in-process with argv vectors.
#include <doctest/doctest.h>

#include <cmath>
#include <cstdint>
#include <cstdlib>
#include <fstream>
#include <numbers>
#include <sstream>
#include <string>
#include <vector>

#include <nlohmann/json.hpp>

#include "cli/app.hpp"
#include "dsp/io/sound_file.hpp"
#include "base/units.hpp"
#include "model/analysis/compare.hpp"
#include "model/circuit/stage_file.hpp"
#include "model/analysis/sweep.hpp"
#include "support/cli_runner.hpp"
#include "support/png_size.hpp"
#include "support/scratch_dir.hpp"
#include "support/stages.hpp"

namespace test_compare {

using namespace pinchoff;
using pinchoff::testing::scratch_dir;

namespace {
using result = pinchoff::testing::cli_result;
constexpr auto run = pinchoff::testing::run_cli;
nlohmann::json run_json(const std::vector<std::string>& args) {
  const result r = run(args);
  INFO(r.err);
  REQUIRE(r.status == 0);
  return nlohmann::json::parse(r.out);
}

std::string preset(const char* name) { return std::string(PINCHOFF_PRESETS_DIR) + "/" + name; }
const char* presets[] = {"bass-booster-9v.toml", "clean-preamp-18v.toml", "phantom-mic-follower.toml"};

// Gray, Hurst, Lewis & Meyer, distortion of a square-law device (from memory; CHECKS.md):
// the gate DC-coupled to an ideal generator (VGSQ = 0), source grounded, lambda = 0, no
// gate current and a resistive drain load make the drain current the square law itself:
// id = beta (A cos wt - VP)^2, so the fundamental is exactly gm A Rd with gm = 2 IDSS / |VP|
// (no compression) and THD = HD2 = A / (4 |VP|) (no H3 or higher).
const char* square_law_text =
    "[supply]\nvolts = 30\n[jfet]\nidss = \"4m\"\nvp = -2\nis = 0\n[gate]\nresistor = \"1M\"\n[drain]\nresistor = \"2k\"\n";
constexpr double square_law_gain = 2 * 4e-3 / 2.0 * 2000.0;  // gm Rd = 8 V/V
constexpr double square_law_vov = 2.0;                        // VGSQ - VP

using pinchoff::testing::png_size;
using pinchoff::testing::read_png_size;
}  // namespace

TEST_CASE("at-output finds the drive of an ideal square-law stage: target / (gm Rd)") {
  const model::stage st = test::stage_from(square_law_text);
  struct row {
    const char* source;
    double target_vpk;
  };
  const row rows[] = {
      {"closed form, -10 dBu out", base::vpk_from_dbu(-10.0)},
      {"closed form, 0.1 Vpk out", 0.1},
      {"closed form, 2 Vpk out", 2.0},
  };
  for (const row& r : rows) {
    CAPTURE(r.source);
    model::compare_settings s;
    const model::drive_search f = model::find_drive_for_output(st, s, r.target_vpk);
    REQUIRE(f.found);
    // The search stops within 0.001 dB of the target; the fundamental is linear in A.
    CHECK(std::fabs(base::db_from_ratio(f.point.output_vpk / r.target_vpk)) <= 0.001);
    CHECK(std::fabs(base::db_from_ratio(f.drive_vpk / (r.target_vpk / square_law_gain))) <= 0.002);
    CHECK(f.evaluations <= 6);
  }
}

TEST_CASE("the 1 % THD search lands on A = 0.04 (VGSQ - VP) of an ideal square-law stage") {
  // THD = A / (4 Vov) = 1 % at A = 0.04 Vov = 80 mV; output there gm A Rd = 640 mV.
  // The search refines THD to 1e-4 relative, and THD is proportional to A.
  const model::stage st = test::stage_from(square_law_text);
  model::compare_settings s;
  const model::drive_search f = model::find_drive_for_thd(st, s, 1.0);
  REQUIRE(f.found);
  CHECK(f.drive_vpk == doctest::Approx(0.04 * square_law_vov).epsilon(2e-4).scale(0));
  CHECK(f.point.output_vpk == doctest::Approx(0.04 * square_law_vov * square_law_gain).epsilon(2e-4).scale(0));
  CHECK(f.point.thd_percent == doctest::Approx(1.0).epsilon(1.1e-4));
}

TEST_CASE("a drive search says why it found nothing") {
  const model::stage st = test::stage_from(square_law_text);
  model::compare_settings s;
  s.max_drive_vpk = 0.01;  // output at most 80 mV: the target 0.3464 V is out of reach
  const model::drive_search f = model::find_drive_for_output(st, s, base::vpk_from_dbu(-10.0));
  CHECK_FALSE(f.found);
  CHECK(f.reason.find("drive limit") != std::string::npos);
  const model::drive_search t = model::find_drive_for_thd(st, s, 1.0);  // THD at 10 mV: 0.125 %
  CHECK_FALSE(t.found);
  CHECK(t.reason.find("stays below") != std::string::npos);
}

TEST_CASE("compare --at-output drives every preset to the target within 0.01 dB") {
  const nlohmann::json j = run_json({"compare", preset(presets[0]), preset(presets[1]), preset(presets[2]), "--json"});
  CHECK(j["mode"] == "at_output");
  CHECK(j["level_dbu"].get<double>() == doctest::Approx(-10.0).epsilon(1e-12));
  REQUIRE(j["designs"].size() == 3);
  for (std::size_t i = 0; i < 3; ++i) {
    CAPTURE(presets[i]);
    const auto& d = j["designs"][i];
    CHECK(std::fabs(d["output_dbu"].get<double>() + 10.0) <= 0.01);
    // Independently: run_sweep at the drive reported gives that output.
    model::sweep_settings s;
    s.drives_vpk = {d["drive_vpk"].get<double>()};
    const model::sweep_point p = model::run_sweep(model::read_stage_file(preset(presets[i])), s).points.front();
    CHECK(std::fabs(base::dbu_from_vpk(p.output_vpk) + 10.0) <= 0.01);
    for (const char* k : {"operating_point", "gain_midband_db", "clean_swing_vpk", "drive_vpk", "output_vpk", "thd_percent",
                          "harmonics_dbc", "even_odd_ratio", "thd_1_percent"}) {
      CAPTURE(k);
      CHECK(d.contains(k));
    }
    CHECK(d["harmonics_dbc"].size() == 9);  // H2..H10 by default, as sweep (model::default_harmonics)
  }
}

TEST_CASE("compare --at-drive drives every design at the one level") {
  const nlohmann::json j = run_json({"compare", preset(presets[0]), preset(presets[1]), "--at-drive", "100mVpk", "--json"});
  CHECK(j["mode"] == "at_drive");
  for (const auto& d : j["designs"]) CHECK(d["drive_vpk"].get<double>() == doctest::Approx(0.1).epsilon(1e-15));
}

TEST_CASE("a design compared with itself gives identical columns") {
  const nlohmann::json j = run_json({"compare", preset(presets[1]), preset(presets[1]), "--json"});
  REQUIRE(j["designs"].size() == 2);
  CHECK(j["designs"][0] == j["designs"][1]);
}

TEST_CASE("compare's figures are run_sweep's at the same drive") {
  // The same steady state, so the same numbers to rounding.
  const nlohmann::json j =
      run_json({"compare", preset(presets[0]), preset(presets[2]), "--at-drive", "0.2", "--harmonics", "10", "--json"});
  for (std::size_t i : {0u, 1u}) {
    const char* name = i == 0 ? presets[0] : presets[2];
    CAPTURE(name);
    model::sweep_settings s;
    s.drives_vpk = {0.2};
    const model::sweep_result r = model::run_sweep(model::read_stage_file(preset(name)), s);
    const model::sweep_point& p = r.points.front();
    const auto& d = j["designs"][i];
    CHECK(j["frequency_hz"].get<double>() == doctest::Approx(r.frequency_hz).epsilon(1e-15));
    CHECK(d["output_vpk"].get<double>() == doctest::Approx(p.output_vpk).epsilon(1e-12));
    CHECK(d["thd_percent"].get<double>() == doctest::Approx(p.thd_percent).epsilon(1e-12));
    REQUIRE(d["harmonics_dbc"].size() == p.harmonics_dbc.size());
    for (std::size_t h = 0; h < p.harmonics_dbc.size(); ++h) {
      CAPTURE(h + 2);
      // Below the numerical floor a level is no figure: null, and flagged.
      CHECK(d["harmonics_below_floor"][h].get<bool>() == (p.harmonics_dbc[h] < model::numerical_floor_dbc));
      if (p.harmonics_dbc[h] < model::numerical_floor_dbc) CHECK(d["harmonics_dbc"][h].is_null());
      else CHECK(std::fabs(d["harmonics_dbc"][h].get<double>() - p.harmonics_dbc[h]) <= 1e-9);
    }
  }
}

TEST_CASE("compare per-design --set makes a variant, and the text and CSV forms carry every design") {
  const result t = run({"compare", preset(presets[0]), preset(presets[0]), "--set", "2:source.bypass_cap=0"});
  REQUIRE(t.status == 0);
  for (const char* part : {"1 % THD at output", "clean swing", "H5", "even/odd", "--set source.bypass_cap=0"}) {
    CAPTURE(part);
    CHECK(t.out.find(part) != std::string::npos);
  }
  const nlohmann::json j = run_json({"compare", preset(presets[0]), preset(presets[0]), "--set", "2:source.bypass_cap=0", "--json"});
  // An unbypassed source resistor is series feedback: less gain (common practice).
  CHECK(j["designs"][1]["gain_midband_db"].get<double>() < j["designs"][0]["gain_midband_db"].get<double>() - 3.0);
  // --set takes one value each time, so the files may come before, between or after.
  for (const std::vector<std::string>& order :
       {std::vector<std::string>{"compare", preset(presets[0]), "--set", "2:source.bypass_cap=0", preset(presets[0]), "--json"},
        std::vector<std::string>{"compare", "--set", "2:source.bypass_cap=0", preset(presets[0]), preset(presets[0]), "--json"}})
    CHECK(run_json(order) == j);
  const result c = run({"compare", preset(presets[0]), preset(presets[1]), preset(presets[2]), "--csv", "--at-drive", "50mVpk"});
  REQUIRE(c.status == 0);
  std::istringstream lines(c.out);
  std::string line;
  int n = 0;
  while (std::getline(lines, line)) ++n;
  CHECK(n == 4);
  CHECK(c.out.rfind("design,path,name,vd_v", 0) == 0);
}

TEST_CASE("compare --plot writes grouped bars that rsvg-convert renders at the stated size") {
  REQUIRE_MESSAGE(std::system("rsvg-convert --version > /dev/null 2>&1") == 0,
                  "rsvg-convert (Debian package librsvg2-bin) is needed by this test");
  scratch_dir dir;
  const std::string svg = dir.file("profile.svg"), png = dir.file("profile.png");
  const result r = run({"compare", preset(presets[0]), preset(presets[1]), preset(presets[2]), "--plot", svg});
  REQUIRE(r.status == 0);
  std::ifstream in(svg);
  const std::string doc((std::istreambuf_iterator<char>(in)), {});
  for (const char* part : {"H2", "H5", "bass-booster-9v", "phantom-mic-follower", "dBc"}) {
    CAPTURE(part);
    CHECK(doc.find(part) != std::string::npos);
  }
  REQUIRE(std::system(("rsvg-convert -o '" + png + "' '" + svg + "' 2>&1").c_str()) == 0);
  const png_size s = read_png_size(png);
  CHECK(s.is_png);
  CHECK(s.width == 860);  // bar_chart's width_px and height_px (cli/plot.hpp)
  CHECK(s.height == 480);
}

TEST_CASE("measure --against reads a recording of the model's own harmonics within 0.1 dB") {
  // The "recording": a sum of sines at the sweep point's predicted levels (phases are
  // arbitrary: the analysis reads magnitudes), at the simulated frequency so that the
  // prediction made at the measured fundamental is the same steady state. The tolerance is
  // `measure`'s own accuracy for lines down to -100 dBc (0.05 dB, tests/cli/test_measure.cpp)
  // with margin; harmonics below -110 dBc are under the window's reach in 2 s and are
  // skipped.
  const double drive = 0.3;
  const int harmonics = 5;
  model::sweep_settings s;
  s.drives_vpk = {drive};
  s.harmonics = harmonics;
  const model::sweep_result sw = model::run_sweep(model::read_stage_file(preset(presets[0])), s);
  const model::sweep_point& p = sw.points.front();
  const double fs = 48000.0, a1 = 0.5;
  std::vector<double> x(static_cast<std::size_t>(2.0 * fs), 0.0);
  for (int n = 1; n <= harmonics; ++n) {
    const double a = n == 1 ? a1 : a1 * base::ratio_from_db(p.harmonics_dbc[static_cast<std::size_t>(n - 2)]);
    const double phase = 0.7 * n;
    for (std::size_t t = 0; t < x.size(); ++t) {
      const double turns = n * sw.frequency_hz * static_cast<double>(t) / fs;
      x[t] += a * std::sin(2 * std::numbers::pi * (turns - std::floor(turns)) + phase);
    }
  }
  scratch_dir dir;
  const std::string wav = dir.file("model.wav");
  {
    dsp::write_settings ws;
    ws.rate_hz = fs;
    ws.format = dsp::sample_format::wav_float;
    dsp::sound_writer w = dsp::sound_writer::create(wav, ws);
    w.write(x);
    w.commit();
  }
  const nlohmann::json j = run_json({"measure", wav, "--json", "--harmonics", std::to_string(harmonics), "--against",
                                     preset(presets[0]), "--drive", "300mVpk"});
  REQUIRE(j.contains("against"));
  const auto& ag = j["against"];
  CHECK(ag["frequency_hz"].get<double>() == doctest::Approx(sw.frequency_hz).epsilon(1e-12));
  CHECK(ag["drive_vpk"].get<double>() == doctest::Approx(drive).epsilon(1e-15));
  CHECK(ag["output_vpk"].get<double>() == doctest::Approx(p.output_vpk).epsilon(1e-12));
  int compared = 0;
  for (int n = 2; n <= harmonics; ++n) {
    const std::size_t i = static_cast<std::size_t>(n - 2);
    CAPTURE(n);
    CHECK(ag["harmonics_dbc"][i].get<double>() == doctest::Approx(p.harmonics_dbc[i]).epsilon(1e-12));
    if (p.harmonics_dbc[i] < -110.0) continue;
    ++compared;
    CHECK(std::fabs(ag["difference_db"][i].get<double>()) <= 0.1);
  }
  CHECK(compared >= 2);
  CHECK(std::fabs(ag["thd_difference_db"].get<double>()) <= 0.1);
  // The measurement itself is unchanged by --against.
  const nlohmann::json plain = run_json({"measure", wav, "--json", "--harmonics", std::to_string(harmonics)});
  for (const char* k : {"fundamental_hz", "fundamental_dbfs", "thd_percent", "thd_n_percent", "harmonics_dbc"}) {
    CAPTURE(k);
    CHECK(plain[k] == j[k]);
  }
  CHECK_FALSE(plain.contains("against"));
  const result text = run({"measure", "--against", preset(presets[0]), "--set", "drain.resistor=3k9", "--drive", "300mVpk", wav,
                           "--harmonics", std::to_string(harmonics)});
  REQUIRE(text.status == 0);
  CHECK(text.out.find("Against the model") != std::string::npos);
  CHECK(text.out.find("predicted") != std::string::npos);
  CHECK(text.out.find("--set drain.resistor=3k9") != std::string::npos);
}

TEST_CASE("measure --against a stage's own rendered tone agrees within 0.1 dB") {
  // The bench loop with the time-domain renderer standing in for the built stage: a tone
  // rendered through the preset, read after the coupling capacitors have settled (their
  // slowest time constant is about 0.1 s), against the steady-state prediction. Two
  // independent paths through the engine (a transient from the DC point at 1.000 kHz, and
  // the shooting steady state at the snapped 999.13 Hz) must agree to the 0.1 dB asked of
  // the comparison, for the harmonics above -120 dBc: the 24-bit tone's dither puts about
  // -165 dBc of noise under each line, and a line 45 dB above its noise reads within
  // 20 log10(1 + 10^(-45/20)) = 0.05 dB at worst.
  scratch_dir dir;
  const std::string tone = dir.file("tone.wav"), out = dir.file("out.wav");
  // -20 dBFS with full scale standing for 1 V peak at the generator (render's default): 100 mVpk.
  REQUIRE(run({"tone", "--freq", "1k", "--level", "-20dBFS", "--seconds", "2.5", tone}).status == 0);
  REQUIRE(run({"render", preset(presets[0]), "--input", tone, "--output", out, "--format", "float", "--quiet"}).status == 0);
  const nlohmann::json j = run_json({"measure", out, "--start", "1", "--duration", "1.4", "--json", "--against", preset(presets[0]),
                                     "--drive", "100mVpk"});
  const auto& ag = j["against"];
  int compared = 0;
  for (std::size_t i = 0; i < ag["harmonics_dbc"].size(); ++i) {
    CAPTURE(i + 2);
    if (ag["harmonics_dbc"][i].is_null() || !(ag["harmonics_dbc"][i].get<double>() > -120.0)) continue;  // null: below the floor
    ++compared;
    CHECK(std::fabs(ag["difference_db"][i].get<double>()) <= 0.1);
  }
  CHECK(compared >= 3);
  CHECK(std::fabs(ag["thd_difference_db"].get<double>()) <= 0.1);
}

TEST_CASE("compare and measure --against refuse bad input with status 2 and nothing on stdout") {
  scratch_dir dir;
  const std::string wav = dir.file("tone.wav");
  REQUIRE(run({"tone", "--freq", "1k", "--level", "-6dBFS", "--seconds", "1", wav}).status == 0);
  const std::vector<std::vector<std::string>> cases{
      {"compare", preset(presets[0])},
      {"compare", preset(presets[0]), preset(presets[1]), "--at-output", "0dBu", "--at-drive", "0.1"},
      {"compare", preset(presets[0]), preset(presets[2]), "--at-output", "+20dBu"},
      {"compare", preset(presets[0]), preset(presets[1]), "--set", "3:source.resistor=1k"},
      {"compare", preset(presets[0]), preset(presets[1]), "--at-drive", "loud"},
      {"compare", preset(presets[0]), preset(presets[1]), "--at-drive", "30Vpk"},
      {"compare", preset(presets[0]), preset(presets[1]), "--harmonics", "1"},
      {"compare", preset(presets[0]), preset(presets[1]), "--json", "--csv"},
      {"compare", preset(presets[0]), preset("missing.toml")},
      {"measure", wav, "--drive", "0.1"},
      {"measure", wav, "--against", preset(presets[0])},
      {"measure", wav, "--against", preset(presets[0]), "--drive", "0"},
      {"measure", wav, "--against", preset("missing.toml"), "--drive", "0.1"},
      {"measure", wav, "--against", preset(presets[0]), "--drive", "0.1", "--set", "drain.resistr=1k"},
  };
  for (const auto& args : cases) {
    std::string joined;
    for (const auto& a : args) joined += a + " ";
    CAPTURE(joined);
    const result r = run(args);
    CHECK(r.status == 2);
    CHECK(r.out.empty());
    CHECK_FALSE(r.err.empty());
  }
  const result unreachable = run({"compare", preset(presets[0]), preset(presets[2]), "--at-output", "+20dBu"});
  CHECK(unreachable.err.find("design 1") != std::string::npos);
  CHECK(unreachable.err.find("design 2") != std::string::npos);
  CHECK(unreachable.err.find("THD passes") != std::string::npos);
  const result one = run({"compare", preset(presets[0])});
  CHECK(one.err.find("at least two designs") != std::string::npos);
}

TEST_CASE("compare --help explains the default and gives examples") {
  const result r = run({"compare", "--help"});
  CHECK(r.status == 0);
  CHECK(r.out.find("Examples:") != std::string::npos);
  CHECK(r.out.find("-10 dBu") != std::string::npos);
}

}  // namespace test_compare
