// What a builder trying the program for the first time tripped over, each reproduced: a
// report that says what it does not model, a default that differs between commands, a
// figure that reads as a number where it is a floor.
#include <cmath>
#include <cstdlib>
#include <string>
#include <vector>

#include <doctest/doctest.h>
#include <nlohmann/json.hpp>

#include "dsp/io/sound_file.hpp"
#include "support/cli_runner.hpp"
#include "support/files.hpp"
#include "support/scratch_dir.hpp"

namespace test_first_use {

namespace {
using result = pinchoff::testing::cli_result;
constexpr auto run = pinchoff::testing::run_cli;
using pinchoff::testing::scratch_dir;
std::string preset(const char* name) { return std::string(PINCHOFF_PRESETS_DIR) + "/" + name; }
bool has(const std::string& s, const std::string& what) { return s.find(what) != std::string::npos; }
}  // namespace

TEST_CASE("response says when no junction capacitance is given, so the response is flat to the top") {
  // Without cgs and cgd nothing rolls the treble off: no high corner, said as an omission.
  const result bare = run({"response", preset("clean-preamp-18v.toml"), "--set", "jfet.cgs=0", "--set", "jfet.cgd=0"});
  REQUIRE(bare.status == 0);
  CHECK(has(bare.out, "junction capacitances (cgs, cgd in [jfet]) are not given"));
  CHECK(!has(bare.out, "high -3 dB corner"));
  const result bare_json =
      run({"response", preset("clean-preamp-18v.toml"), "--set", "jfet.cgs=0", "--set", "jfet.cgd=0", "--json"});
  REQUIRE(bare_json.status == 0);
  const nlohmann::json j = nlohmann::json::parse(bare_json.out);
  REQUIRE(j["notes"].size() == 1);
  CHECK(has(j["notes"][0].get<std::string>(), "flat to the top"));
  // Given (the preset's own): a high corner and no note.
  const result given = run({"response", preset("clean-preamp-18v.toml")});
  REQUIRE(given.status == 0);
  CHECK(has(given.out, "high -3 dB corner"));
  CHECK(!has(given.out, "are not given"));
}

TEST_CASE("bias says the input capacitance is not modelled when no junction capacitance is given") {
  // "0 F" alone would read as a property of the stage; it is an omission of the file.
  const result bare = run({"bias", preset("two-stage-boost-9v.toml"), "--set", "stage1.jfet.cgs=0", "--set",
                           "stage1.jfet.cgd=0"});
  REQUIRE(bare.status == 0);
  CHECK(has(bare.out, "none modelled: stage1.jfet.cgs and stage1.jfet.cgd not given"));
  // Only the first stage counts (the source sees it): the second's own capacitances do not.
  const result later = run({"bias", preset("two-stage-boost-9v.toml"), "--set", "stage2.jfet.cgs=0", "--set",
                            "stage2.jfet.cgd=0"});
  REQUIRE(later.status == 0);
  CHECK(has(later.out, "cgs and the Miller cgd, at 1 kHz"));
  CHECK(!has(later.out, "none modelled"));
}

TEST_CASE("compare and sweep report the same harmonics by default") {
  // One default, H2..H10 (model::default_harmonics): a design compared and swept at the same
  // drive shows the same table.
  const result c = run({"compare", preset("bass-booster-9v.toml"), preset("clean-preamp-18v.toml"), "--json"});
  REQUIRE(c.status == 0);
  const nlohmann::json cj = nlohmann::json::parse(c.out);
  const result s = run({"sweep", preset("bass-booster-9v.toml"), "--drive", "0.1", "--json"});
  REQUIRE(s.status == 0);
  const nlohmann::json sj = nlohmann::json::parse(s.out);
  CHECK(sj["points"][0]["harmonics_dbc"].size() == 9);
  CHECK(cj["designs"][0]["harmonics_dbc"].size() == sj["points"][0]["harmonics_dbc"].size());
  CHECK(cj["harmonics"] == 10);
}

TEST_CASE("compare warns when its level is beyond a design's clean swing, and says so in the table") {
  // The microphone converter's clean swing (bias's headroom) is 590 mVpk; 0 dBu at the load
  // (1.10 Vpk) is beyond it, while the booster (3.19 Vpk) is well within.
  const std::vector<std::string> args{"compare", preset("bass-booster-9v.toml"), preset("phantom-mic-follower.toml"),
                                      "--at-output", "0dBu"};
  const result t = run(args);
  REQUIRE(t.status == 0);
  CHECK(has(t.err, "design 2: compared at"));
  CHECK(has(t.err, "beyond its clean swing"));
  CHECK(!has(t.err, "design 1: compared at"));
  CHECK(has(t.out, "within clean swing"));
  CHECK(has(t.out, "  NO\n"));
  std::vector<std::string> json_args = args;
  json_args.push_back("--json");
  const result j = run(json_args);
  REQUIRE(j.status == 0);
  const nlohmann::json d = nlohmann::json::parse(j.out)["designs"];
  CHECK(d[0]["beyond_clean_swing"] == false);
  CHECK(d[1]["beyond_clean_swing"] == true);
  CHECK(d[1]["output_vpk"].get<double>() > d[1]["clean_swing_vpk"].get<double>());
  // Within every design's clean swing: no warning.
  const result low = run({"compare", preset("bass-booster-9v.toml"), preset("phantom-mic-follower.toml"), "--at-output", "-30dBu"});
  REQUIRE(low.status == 0);
  CHECK(!has(low.err, "beyond its clean swing"));
}

TEST_CASE("a [jfet] value outside the range of small-signal parts is read with a warning that says the range") {
  // common practice: small-signal JFETs have IDSS 0.1 to 100 mA and |VP| 0.2 to 10 V. IDSS =
  // 1.5 (amperes, a slip for 1.5 mA) is within the physical bounds, so it is read, and said.
  const result slip = run({"sweep", preset("bass-booster-9v.toml"), "--set", "jfet.idss=1.5", "--drive", "0.01", "--json"});
  REQUIRE(slip.status == 0);
  CHECK(has(slip.err, "jfet.idss = 1.50 A lies outside 100 µA to 100 mA, the range of small-signal JFETs (common practice)"));
  CHECK(has(slip.err, "for 1.5 mA write 1.5m"));
  const nlohmann::json j = nlohmann::json::parse(slip.out);
  bool in_json = false;
  for (const auto& w : j["warnings"]) in_json = in_json || has(w.get<std::string>(), "jfet.idss = 1.50 A lies outside");
  CHECK(in_json);
  const result vp = run({"bias", preset("bass-booster-9v.toml"), "--set", "jfet.vp=-0.1"});
  REQUIRE(vp.status == 0);
  CHECK(has(vp.out, "jfet.vp = -100 mV lies outside 200 mV to 10.0 V"));
  // The presets' parts are all within it: no such warning.
  for (const char* p : {"bass-booster-9v.toml", "clean-preamp-18v.toml", "phantom-mic-follower.toml", "two-stage-boost-9v.toml"}) {
    CAPTURE(p);
    const result r = run({"bias", preset(p)});
    REQUIRE(r.status == 0);
    CHECK(!has(r.out + r.err, "the range of small-signal JFETs"));
  }
}

TEST_CASE("levels below the numerical floor are marks, not numbers, in every command") {
  // At 10 mVpk the booster's H6..H10 lie below the engine's numerical floor (-180 dBc, the
  // Newton tolerance against the output): no figure, so null and flagged in JSON, "< -180"
  // in text and plots, and no difference between two floors.
  auto check_marks = [](const nlohmann::json& values, const nlohmann::json& flags) {
    REQUIRE(values.size() == flags.size());
    int marked = 0;
    for (std::size_t i = 0; i < values.size(); ++i) {
      CAPTURE(i);
      if (flags[i].get<bool>()) {
        ++marked;
        CHECK(values[i].is_null());
      } else if (!values[i].is_null()) {
        CHECK(values[i].get<double>() >= -180.0);
      }
    }
    return marked;
  };
  const result s = run({"sweep", preset("bass-booster-9v.toml"), "--drive", "10mVpk", "--json"});
  REQUIRE(s.status == 0);
  const nlohmann::json sj = nlohmann::json::parse(s.out);
  CHECK(sj["numerical_floor_dbc"] == -180.0);
  const nlohmann::json& p = sj["points"][0];
  CHECK(check_marks(p["harmonics_dbc"], p["harmonics_below_floor"]) >= 4);
  CHECK((p["alias_below_floor"].get<bool>() ? p["alias_dbc"].is_null() : p["alias_dbc"].get<double>() >= -180.0));

  scratch_dir dir;
  const std::string plot = dir.file("profile.svg");
  const result c = run({"compare", preset("bass-booster-9v.toml"), preset("clean-preamp-18v.toml"), "--at-drive", "10mVpk",
                        "--harmonics", "5", "--json", "--plot", plot});
  REQUIRE(c.status == 0);
  const nlohmann::json cj = nlohmann::json::parse(c.out);
  int marked = 0;
  for (const auto& d : cj["designs"]) marked += check_marks(d["harmonics_dbc"], d["harmonics_below_floor"]);
  CHECK(marked >= 1);
  // The plot: the mark, and no value label below the floor (bars at 4 harmonics are wide
  // enough to carry their values).
  const std::string svg = pinchoff::testing::slurp(plot);
  CHECK(has(svg, ">&lt; -180</text>"));
  for (std::size_t at = svg.find(">-"); at != std::string::npos; at = svg.find(">-", at + 2)) {
    const double v = std::atof(svg.c_str() + at + 1);
    CAPTURE(svg.substr(at, 12));
    CHECK(v >= -180.0);
  }

  // measure --against: the prediction's floor levels are null and so are their differences.
  const std::string wav = dir.file("tone.wav");
  REQUIRE(run({"tone", wav, "--freq", "1k", "--level", "-6dBFS", "--seconds", "2"}).status == 0);
  const result m = run({"measure", wav, "--json", "--against", preset("bass-booster-9v.toml"), "--drive", "10mVpk"});
  REQUIRE(m.status == 0);
  const nlohmann::json mj = nlohmann::json::parse(m.out);
  const nlohmann::json& ag = mj["against"];
  CHECK(check_marks(ag["harmonics_dbc"], ag["harmonics_below_floor"]) >= 4);
  for (std::size_t i = 0; i < ag["difference_db"].size(); ++i) {
    CAPTURE(i);
    if (ag["harmonics_below_floor"][i].get<bool>()) CHECK(ag["difference_db"][i].is_null());
  }
}

TEST_CASE("render and compare say that a common-source output is inverted, and render --invert restores it") {
  // A common-source stage's mid-band gain is negative (the drain falls as the gate rises);
  // a follower's is positive.
  const result c = run({"compare", preset("bass-booster-9v.toml"), preset("phantom-mic-follower.toml"), "--at-output", "-30dBu"});
  REQUIRE(c.status == 0);
  CHECK(has(c.out, "output polarity"));
  const result cj = run({"compare", preset("bass-booster-9v.toml"), preset("phantom-mic-follower.toml"), "--at-output", "-30dBu", "--json"});
  REQUIRE(cj.status == 0);
  const nlohmann::json d = nlohmann::json::parse(cj.out)["designs"];
  CHECK(d[0]["inverting"] == true);
  CHECK(d[1]["inverting"] == false);

  scratch_dir dir;
  const std::string tone = dir.file("tone.wav"), plain = dir.file("plain.wav"), restored = dir.file("restored.wav");
  REQUIRE(run({"tone", tone, "--freq", "220", "--level", "-20dBFS", "--seconds", "0.5", "--format", "float"}).status == 0);
  // A fixed output scale: one pass, the same scale for both, so the files differ only in sign.
  const result a = run({"render", preset("bass-booster-9v.toml"), "--input", tone, "--output", plain, "--input-peak", "100mV",
                        "--output-peak", "5V", "--format", "float"});
  REQUIRE(a.status == 0);
  CHECK(has(a.out, "is inverted (upside down against the input); --invert restores its polarity"));
  const result b = run({"render", preset("bass-booster-9v.toml"), "--input", tone, "--output", restored, "--input-peak",
                        "100mV", "--output-peak", "5V", "--format", "float", "--invert", "--json"});
  REQUIRE(b.status == 0);
  const nlohmann::json bj = nlohmann::json::parse(b.out);
  CHECK(bj["outputs"][0]["inverting"] == true);
  CHECK(bj["outputs"][0]["polarity_restored"] == true);
  auto samples = [](const std::string& path) {
    pinchoff::dsp::sound_reader r = pinchoff::dsp::sound_reader::open(path);
    return pinchoff::dsp::read_channel(r, 0);
  };
  const std::vector<double> x = samples(plain), y = samples(restored);
  REQUIRE(x.size() == y.size());
  double peak = 0.0, worst = 0.0;
  for (std::size_t i = 0; i < x.size(); ++i) {
    peak = std::max(peak, std::fabs(x[i]));
    worst = std::max(worst, std::fabs(x[i] + y[i]));
  }
  CHECK(peak > 0.01);
  CHECK(worst == 0.0);  // exact negatives: the same samples, scaled by -1
}

TEST_CASE("spread's histograms mark the --require limits") {
  scratch_dir dir;
  const std::string base = dir.file("batch.svg");
  const result r = run({"spread", preset("bass-booster-9v.toml"), "--idss", "2m..8m", "--vp=-0.8..-3", "--require", "vd=3.5..6",
                        "--require", "id=..20m", "--runs", "200", "--plot", base});
  REQUIRE(r.status == 0);
  const std::string vd = pinchoff::testing::slurp(dir.file("batch-vd.svg"));
  CHECK(has(vd, "required min 3.50 V"));
  CHECK(has(vd, "required max 6.00 V"));
  CHECK(has(vd, "stroke-dasharray"));
  // A limit far beyond the batch (20 mA against a few milliamperes) is marked at the edge.
  const std::string id = pinchoff::testing::slurp(dir.file("batch-id.svg"));
  CHECK(has(id, "required max 20.0 mA (off to the right)"));
}

TEST_CASE("sweep says a THD level was passed below its lowest drive, not that it was never reached") {
  // The bass booster is at several per cent THD from 0.3 V peak on: a sweep that starts
  // there has crossed 1 % and 3 % below its first drive, and must say so.
  const result r = run({"sweep", preset("bass-booster-9v.toml"), "--drive", "0.5V,0.3V"});
  REQUIRE(r.status == 0);
  CHECK(has(r.out, "THD 1.0 %: already passed at the lowest drive"));
  CHECK(has(r.out, "start the sweep lower"));
  CHECK(!has(r.out, "THD 1.0 %: not reached"));
  // A sweep that stays clean has not reached 10 %.
  const result clean = run({"sweep", preset("bass-booster-9v.toml"), "--drive", "1mV,2mV"});
  REQUIRE(clean.status == 0);
  CHECK(has(clean.out, "THD 10 %: not reached in this sweep"));
}

}  // namespace test_first_use
