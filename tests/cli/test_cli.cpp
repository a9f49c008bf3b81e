// The command line, run in-process with argv vectors (CLI11's own testing approach).
#include <cmath>
#include <filesystem>
#include <fstream>
#include <sstream>
#include <string>
#include <vector>

#include <doctest/doctest.h>
#include <nlohmann/json.hpp>

#include "cli/app.hpp"
#include "support/cli_runner.hpp"

namespace test_cli {

namespace {
using result = pinchoff::testing::cli_result;
constexpr auto run = pinchoff::testing::run_cli;

std::string preset(const char* name) { return std::string(PINCHOFF_PRESETS_DIR) + "/" + name; }

const char* presets[] = {"bass-booster-9v.toml", "clean-preamp-18v.toml", "phantom-mic-follower.toml"};
}  // namespace

TEST_CASE("bias --json follows the contract on every preset") {
  // Contract: DESIGN.md, "Machine-readable output".
  for (const char* p : presets) {
    CAPTURE(p);
    const result r = run({"bias", preset(p), "--json"});
    REQUIRE(r.status == 0);
    const nlohmann::json j = nlohmann::json::parse(r.out);
    for (const char* k : {"vg_v", "vs_v", "vd_v", "vgs_v", "vds_v", "id_a", "region"}) {
      CAPTURE(k);
      CHECK(j["operating_point"].contains(k));
    }
    CHECK(j["operating_point"]["region"] == "saturation");
    for (const char* k : {"gm_s", "gds_s", "gain_midband_db", "zin_ohm", "zout_ohm"}) {
      CAPTURE(k);
      CHECK(j["small_signal"][k].is_number());
    }
    CHECK(j["headroom"]["symmetric_output_vpk"].get<double>() > 0.0);
  }
}

TEST_CASE("bias prints a grouped report and --at adds reactances") {
  const result r = run({"bias", preset("bass-booster-9v.toml"), "--at", "41"});
  REQUIRE(r.status == 0);
  for (const char* part : {"Operating point", "Small signal", "Headroom", "Low-frequency corners", "Capacitors at 41.0 Hz",
                           "Warnings"}) {
    CAPTURE(part);
    CHECK(r.out.find(part) != std::string::npos);
  }
}

TEST_CASE("tune --json lists the exact value and standard candidates") {
  // Contract: DESIGN.md, "Machine-readable output" for tune.
  const result r = run({"tune", preset("bass-booster-9v.toml"), "--target", "vd=4.5", "--json"});
  REQUIRE(r.status == 0);
  const nlohmann::json j = nlohmann::json::parse(r.out);
  CHECK(j["adjust"] == "source.resistor");
  CHECK(j["exact_ohm"].get<double>() > 0.0);
  REQUIRE(j["candidates"].size() == 2);
  for (const auto& c : j["candidates"]) {
    CHECK(c["series"] == "E24");
    CHECK(c["operating_point"].contains("vd_v"));
  }
  CHECK(j["exact"]["operating_point"]["vd_v"].get<double>() == doctest::Approx(4.5).epsilon(1e-9));
}

TEST_CASE("response --json follows the contract and --plot writes an SVG") {
  // Contract: DESIGN.md, "Machine-readable output" for response.
  const std::string svg = (std::filesystem::temp_directory_path() / "pinchoff_cli_response.svg").string();
  const result r = run({"response", preset("clean-preamp-18v.toml"), "--json", "--points", "30", "--plot", svg});
  REQUIRE(r.status == 0);
  const nlohmann::json j = nlohmann::json::parse(r.out);
  CHECK(j["midband_gain_db"].is_number());
  CHECK(j["corners_hz"].size() >= 2);
  REQUIRE(j["points"].size() == 30);
  for (const char* k : {"frequency_hz", "magnitude_db", "phase_deg"}) CHECK(j["points"][0].contains(k));
  CHECK(std::filesystem::file_size(svg) > 1000);
  std::filesystem::remove(svg);
}

TEST_CASE("fit --json follows the contract") {
  // Contract: DESIGN.md, "Machine-readable output" for fit. Readings from Shockley's
  // equation for IDSS 5 mA, VP -2 V (closed form): 5, 2.8125, 1.25, 0.3125 mA.
  const auto path = std::filesystem::temp_directory_path() / "pinchoff_cli_fit.csv";
  {
    std::ofstream(path) << "vgs_v,id_a\n0,5m\n-0.5,2.8125m\n-1,1.25m\n-1.5,0.3125m\n";
  }
  const result r = run({"fit", path.string(), "--json"});
  REQUIRE(r.status == 0);
  const nlohmann::json j = nlohmann::json::parse(r.out);
  CHECK(j["idss_a"].get<double>() == doctest::Approx(5e-3).epsilon(1e-6).scale(0));
  CHECK(j["vp_v"].get<double>() == doctest::Approx(-2.0).epsilon(1e-6));
  CHECK(j["std_errors"].contains("idss_a"));
  CHECK(j["rows"].size() == 4);
  {
    std::ofstream(path) << "vgs_v,id_a\n0,5m\n-0.5,lots\n";
  }
  const result bad = run({"fit", path.string()});
  CHECK(bad.status == 2);
  CHECK(bad.err.find(":3:") != std::string::npos);
  {
    std::ofstream(path) << "vgs,id_a\n0,5m\n";
  }
  CHECK(run({"fit", path.string()}).status == 2);
  std::filesystem::remove(path);
}

TEST_CASE("spread --json follows the contract") {
  // Contract: DESIGN.md, "Machine-readable output" for spread.
  const result r = run({"spread", preset("bass-booster-9v.toml"), "--idss", "2m..8m", "--vp", "-0.8..-3", "--runs", "200",
                        "--require", "vd=3.5..6", "--json"});
  REQUIRE(r.status == 0);
  const nlohmann::json j = nlohmann::json::parse(r.out);
  CHECK(j["runs"] == 200);
  CHECK(j["yield"].get<double>() > 0.0);
  CHECK(j["yield"].get<double>() < 1.0);
  for (const char* k : {"id_a", "vd_v", "vds_v"}) {
    CAPTURE(k);
    for (const char* p : {"p5", "p50", "p95", "min", "max"}) CHECK(j["percentiles"][k][p].is_number());
  }
  // The same run again gives the same answer (deterministic for a seed).
  CHECK(run({"spread", preset("bass-booster-9v.toml"), "--idss", "2m..8m", "--vp", "-0.8..-3", "--runs", "200",
             "--require", "vd=3.5..6", "--json", "--threads", "1"}).out == r.out);
}

TEST_CASE("tune --over-spread sizes a trimmer") {
  const result r = run({"tune", preset("bass-booster-9v.toml"), "--target", "vd=4.5", "--over-spread", "--idss", "2m..8m",
                        "--vp", "-0.8..-3", "--runs", "100", "--json"});
  REQUIRE(r.status == 0);
  const nlohmann::json j = nlohmann::json::parse(r.out);
  CHECK(j["coverage"].get<double>() == 1.0);
  CHECK(j["fixed_ohm"].get<double>() + j["trimmer_ohm"].get<double>() >= j["range_ohm"]["max"].get<double>());
}

TEST_CASE("spread on a chain reports every stage's quantities under its name") {
  // Contract: README, "Machine-readable output" for spread on a chain.
  const result r = run({"spread", preset("two-stage-boost-9v.toml"), "--class", "general-purpose", "--runs", "100",
                        "--require", "stage2.vd=3.5..6", "--json"});
  REQUIRE(r.status == 0);
  const nlohmann::json j = nlohmann::json::parse(r.out);
  REQUIRE(j["stages"].size() == 2);
  for (int k = 0; k < 2; ++k) {
    CAPTURE(k);
    CHECK(j["stages"][k]["stage"] == k + 1);
    for (const char* q : {"id_a", "vd_v", "vs_v", "vds_v", "vgs_v"}) CHECK(j["stages"][k]["percentiles"][q]["p50"].is_number());
  }
  CHECK(j["percentiles"]["gain_db"]["p50"].is_number());
  CHECK(!j["percentiles"].contains("vd_v"));  // a stage's own quantity lives under its stage
  CHECK(j["requirements"][0]["quantity"] == "stage2.vd");
  REQUIRE(j["worst"].size() == 2);
  CHECK(j["worst"][0]["quantity"] == "stage2.vd");
  CHECK(j["worst"][0]["parts"].size() == 2);
  // The text names each stage's rows; the CSV has a column per stage.
  const result text = run({"spread", preset("two-stage-boost-9v.toml"), "--class", "general-purpose", "--runs", "50"});
  REQUIRE(text.status == 0);
  for (const char* w : {"stage1.vd", "stage2.vd", "stage2.id", "every stage biased in saturation", "stage2 IDSS"}) {
    CAPTURE(w);
    CHECK(text.out.find(w) != std::string::npos);
  }
  const result csv = run({"spread", preset("two-stage-boost-9v.toml"), "--class", "general-purpose", "--runs", "5", "--csv"});
  REQUIRE(csv.status == 0);
  CHECK(csv.out.rfind("run,stage1.idss_a,stage1.vp_v,stage2.idss_a,stage2.vp_v,supply_v,solved,stage1.id_a,", 0) == 0);
}

TEST_CASE("tune on a chain: a trimmer per stage over a batch, and several resistors on nominal parts") {
  const result r = run({"tune", preset("two-stage-boost-9v.toml"), "--over-spread", "--class", "general-purpose", "--runs",
                        "60", "--adjust", "stage1.source.resistor", "--target", "stage1.vd=4.5", "--adjust",
                        "stage2.source.resistor", "--target", "stage2.vd=4.5", "--json"});
  REQUIRE(r.status == 0);
  const nlohmann::json j = nlohmann::json::parse(r.out);
  REQUIRE(j["trimmers"].size() == 2);
  CHECK(j["trimmers"][0]["adjust"] == "stage1.source.resistor");
  CHECK(j["trimmers"][1]["adjust"] == "stage2.source.resistor");
  for (const auto& t : j["trimmers"])
    CHECK(t["fixed_ohm"].get<double>() + t["trimmer_ohm"].get<double>() >= t["range_ohm"]["max"].get<double>());
  CHECK(j["most_rounds"].get<int>() >= 1);
  const result plain = run({"tune", preset("two-stage-boost-9v.toml"), "--adjust", "stage1.source.resistor", "--target",
                            "stage1.vd=4.5", "--adjust", "stage2.source.resistor", "--target", "stage2.vd=4.5", "--json"});
  REQUIRE(plain.status == 0);
  const nlohmann::json p = nlohmann::json::parse(plain.out);
  REQUIRE(p["pairs"].size() == 2);
  // Each pair's exact point is on its target with the other resistor at its solved value.
  CHECK(p["pairs"][0]["exact"]["operating_point"]["vd_v"].get<double>() == doctest::Approx(4.5).epsilon(1e-5));
  CHECK(p["pairs"][1]["exact"]["operating_point"]["vd_v"].get<double>() == doctest::Approx(4.5).epsilon(1e-5));
}

TEST_CASE("sweep --json follows the contract") {
  // Contract: DESIGN.md, "Machine-readable output" for sweep.
  const result r = run({"sweep", preset("bass-booster-9v.toml"), "--drive", "10mVpk,0.3,1Vrms", "--json"});
  REQUIRE(r.status == 0);
  const nlohmann::json j = nlohmann::json::parse(r.out);
  CHECK(j["frequency_hz"].get<double>() == doctest::Approx(1000.0).epsilon(1e-3));
  CHECK(j["oversampling"] == 8);
  REQUIRE(j["points"].size() == 3);
  CHECK(j["points"][1]["drive_vpk"].get<double>() == doctest::Approx(0.3).epsilon(1e-12));
  CHECK(j["points"][2]["drive_vpk"].get<double>() == doctest::Approx(std::sqrt(2.0)).epsilon(1e-12));
  for (const char* k : {"drive_vpk", "output_vpk", "gain_db", "thd_percent", "harmonics_dbc", "alias_dbc", "dc_shift_v"}) {
    CAPTURE(k);
    CHECK(j["points"][0].contains(k));
  }
  CHECK(j["points"][0]["harmonics_dbc"].size() == 9);  // H2..H10
}

TEST_CASE("sweep --json on a chain gives each stage at each point; a single stage keeps its keys") {
  // Contract: README, sweep: points[i].stages[k] with output_vpk, thd_percent, harmonics_dbc,
  // clean; stages[k] with the first drive out of the clean region.
  const result r = run({"sweep", preset("two-stage-boost-9v.toml"), "--drive", "10mVpk,1Vpk", "--json"});
  REQUIRE(r.status == 0);
  const nlohmann::json j = nlohmann::json::parse(r.out);
  REQUIRE(j["points"].size() == 2);
  for (const auto& p : j["points"]) {
    REQUIRE(p["stages"].size() == 2);
    for (const auto& st : p["stages"]) {
      for (const char* k : {"name", "output_vpk", "thd_percent", "harmonics_dbc", "clean", "limit", "bias_shift_v"}) {
        CAPTURE(k);
        CHECK(st.contains(k));
      }
      CHECK(st["harmonics_dbc"].size() == 9);
    }
    // The last stage's output is the load.
    CHECK(p["stages"][1]["output_vpk"].get<double>() == doctest::Approx(p["output_vpk"].get<double>()).epsilon(1e-9));
    CHECK(p["bias_shift_v"].is_null());  // a chain has one per stage
  }
  CHECK(j["points"][0]["stages"][0]["name"] == "input stage");
  CHECK(j["points"][0]["stages"][0]["clean"] == true);
  CHECK(j["points"][1]["stages"][1]["clean"] == false);
  REQUIRE(j["stages"].size() == 2);
  // Out at 1 V, clean at 10 mV: where it leaves is interpolated between the two.
  CHECK(j["stages"][1]["first_unclean_drive_vpk"].get<double>() == doctest::Approx(1.0).epsilon(1e-12));
  CHECK(j["stages"][1]["last_clean_drive_vpk"].get<double>() == doctest::Approx(0.01).epsilon(1e-12));
  CHECK(j["stages"][1]["leaves_clean_at_drive_vpk"].get<double>() > 0.01);
  CHECK(j["stages"][1]["leaves_clean_at_drive_vpk"].get<double>() < 1.0);
  CHECK(j["stages"][1]["limit"].is_string());

  const result one = run({"sweep", preset("bass-booster-9v.toml"), "--drive", "10mVpk", "--json"});
  REQUIRE(one.status == 0);
  const nlohmann::json o = nlohmann::json::parse(one.out);
  CHECK_FALSE(o.contains("stages"));
  CHECK_FALSE(o["points"][0].contains("stages"));
  CHECK(o["points"][0]["bias_shift_v"].is_number());
}

TEST_CASE("sweep on a chain: the text has a table per stage, the CSV columns per stage, the plot a panel per stage") {
  const result t = run({"sweep", preset("two-stage-boost-9v.toml"), "--drive", "10mVpk,1Vpk"});
  REQUIRE(t.status == 0);
  CHECK(t.out.find("at each stage's output") != std::string::npos);
  CHECK(t.out.find("second stage: leaves its clean region at about ") != std::string::npos);
  CHECK(t.out.find("between the drives 10.0 mVpk and 1.00 Vpk") != std::string::npos);
  const result c = run({"sweep", preset("two-stage-boost-9v.toml"), "--drive", "10mVpk,1Vpk", "--csv"});
  REQUIRE(c.status == 0);
  CHECK(c.out.find(",stage1_output_vpk,stage1_thd_percent,stage1_clean,stage2_output_vpk") != std::string::npos);
  const result one = run({"sweep", preset("bass-booster-9v.toml"), "--drive", "10mVpk"});
  CHECK(one.out.find("each stage") == std::string::npos);
}

TEST_CASE("imd --json reports the products") {
  const result r = run({"imd", preset("bass-booster-9v.toml"), "--json"});
  REQUIRE(r.status == 0);
  const nlohmann::json j = nlohmann::json::parse(r.out);
  CHECK(j["method"] == "smpte");
  CHECK(j["imd_percent"].get<double>() > 0.0);
  CHECK(j["products"].size() == 4);
  const result t = run({"imd", preset("bass-booster-9v.toml"), "--method", "twin-tone", "--json"});
  REQUIRE(t.status == 0);
  CHECK(nlohmann::json::parse(t.out).contains("d3_percent"));
}

TEST_CASE("bad input exits with status 2 and writes nothing to stdout") {
  const std::vector<std::vector<std::string>> cases{
      {"bias", preset("missing.toml")},
      {"bias"},
      {"bias", preset("bass-booster-9v.toml"), "--set", "drain.resistor=oops"},
      {"bias", preset("bass-booster-9v.toml"), "--at", "fast"},
      {"tune", preset("bass-booster-9v.toml"), "--target", "vd=40"},
      {"tune", preset("bass-booster-9v.toml"), "--target", "vd=4.5", "--series", "E7"},
      {"tune", preset("bass-booster-9v.toml"), "--target", "vd=4.5", "--adjust", "drain.resistr"},
      {"tune", preset("bass-booster-9v.toml")},
      {"frobnicate"},
      {"bias", preset("bass-booster-9v.toml"), "--no-such-option"},
      {"response", preset("bass-booster-9v.toml"), "--from", "1k", "--to", "10"},
      {"spread", preset("bass-booster-9v.toml"), "--idss", "8m..2m"},
      {"spread", preset("bass-booster-9v.toml"), "--vp", "0.8..3"},
      {"spread", preset("bass-booster-9v.toml"), "--require", "vd=6..3"},
      {"spread", preset("bass-booster-9v.toml"), "--class", "nonesuch"},
      {"spread", preset("bass-booster-9v.toml"), "--tolerance", "150%"},
      {"tune", preset("bass-booster-9v.toml"), "--target", "center", "--over-spread"},
      {"sweep", preset("bass-booster-9v.toml"), "--freq", "30k"},
      {"sweep", preset("bass-booster-9v.toml"), "--drive", "loud"},
      {"sweep", preset("bass-booster-9v.toml"), "--from", "1V", "--to", "10mV"},
      {"sweep", preset("bass-booster-9v.toml"), "--drive", "1V", "--from", "10mV"},
      {"sweep", preset("bass-booster-9v.toml"), "--oversample", "0"},
      {"imd", preset("bass-booster-9v.toml"), "--method", "ccif"},
      {"imd", preset("bass-booster-9v.toml"), "--level", "-1V"},
      {"imd", preset("bass-booster-9v.toml"), "--method", "twin-tone", "--rate", "32k"},
      {"response", preset("bass-booster-9v.toml"), "--plot", "/nonexistent-folder/r.svg"},
  };
  for (const auto& args : cases) {
    CAPTURE(args.size() > 1 ? args[1] : args[0]);
    CAPTURE(args.back());
    const result r = run(args);
    CHECK(r.status == 2);
    CHECK(r.out.empty());
    CHECK_FALSE(r.err.empty());
  }
}

TEST_CASE("help teaches by example and exits 0") {
  for (const char* cmd : {"bias", "tune", "response", "fit", "spread", "sweep", "imd"}) {
    CAPTURE(cmd);
    const result r = run({cmd, "--help"});
    CHECK(r.status == 0);
    CHECK(r.out.find("Examples:") != std::string::npos);
  }
  const result top = run({"--help"});
  CHECK(top.status == 0);
  CHECK(top.out.find("bias") != std::string::npos);
}

TEST_CASE("the simulating commands relay the rest point's cautions that bias gives") {
  // A 47 kohm drain resistor on the bass booster leaves the JFET in the triode region at
  // rest (vds below vgs - vp, the square law's boundary; Shichman & Hodges 1968): every
  // command that runs the stage must say what `bias` says, on stderr and in its JSON.
  const std::vector<std::string> set = {"--set", "drain.resistor=47k"};
  auto with = [&](std::vector<std::string> args) {
    args.insert(args.begin() + 2, set.begin(), set.end());
    return args;
  };
  const result b = run(with({"bias", preset("bass-booster-9v.toml"), "--json"}));
  REQUIRE(b.status == 0);
  const nlohmann::json expected = nlohmann::json::parse(b.out)["warnings"];
  REQUIRE(expected.size() == 1);
  CHECK(expected[0].get<std::string>().find("triode region at rest") != std::string::npos);
  const std::vector<std::vector<std::string>> commands = {
      {"sweep", preset("bass-booster-9v.toml"), "--drive", "0.1", "--json"},
      {"imd", preset("bass-booster-9v.toml"), "--json"},
      {"response", preset("bass-booster-9v.toml"), "--json"},
  };
  for (const auto& c : commands) {
    CAPTURE(c[0]);
    const result r = run(with(c));
    REQUIRE(r.status == 0);
    CHECK(r.err.find("pinchoff " + c[0] + ": warning: " + expected[0].get<std::string>()) != std::string::npos);
    const nlohmann::json w = nlohmann::json::parse(r.out)["warnings"];
    REQUIRE(!w.empty());
    CHECK(w[0] == expected[0]);
  }
  // compare names the design: here the first of two, the second as shipped.
  const result c = run({"compare", preset("bass-booster-9v.toml"), preset("bass-booster-9v.toml"), "--set",
                        "1:drain.resistor=47k", "--at-drive", "0.1"});
  CHECK(c.err.find("pinchoff compare: warning: design 1 (") != std::string::npos);
  CHECK(c.err.find(expected[0].get<std::string>()) != std::string::npos);
  CHECK(c.err.find("design 2 (") == std::string::npos);
  // The presets as shipped: sweep says exactly what bias says (the phantom feed's caution
  // for the microphone follower, nothing for the others).
  for (const char* p : presets) {
    CAPTURE(p);
    const result r = run({"sweep", preset(p), "--drive", "0.1"});
    REQUIRE(r.status == 0);
    std::string said;
    const nlohmann::json bias_json = nlohmann::json::parse(run({"bias", preset(p), "--json"}).out);
    for (const auto& w : bias_json["warnings"])
      said += "pinchoff sweep: warning: " + w.get<std::string>() + "\n";
    CHECK(r.err == said);
  }
}

TEST_CASE("--set may be given several times and every value applies") {
  // Ohm's law on the rest point (closed form): the source resistor carries the drain
  // current (the gate current is nanoamperes at most), and the drain resistor the same
  // current from the rail, which sits the battery's 47 ohm below 9 V.
  const result r = run({"bias", preset("bass-booster-9v.toml"), "--set", "drain.resistor=3k", "--set",
                        "source.resistor=1k", "--json"});
  REQUIRE(r.status == 0);
  const nlohmann::json op = nlohmann::json::parse(r.out)["operating_point"];
  const double id = op["id_a"].get<double>();
  REQUIRE(id > 0.0);
  CHECK(op["vs_v"].get<double>() / id == doctest::Approx(1000.0).epsilon(1e-6));
  CHECK((9.0 - 47.0 * id - op["vd_v"].get<double>()) / id == doctest::Approx(3000.0).epsilon(1e-6));
}

TEST_CASE("spread says so when nothing varies from run to run") {
  // common practice: a Monte Carlo of one fixed part is a user's slip worth pointing out.
  const result fixed = run({"spread", preset("bass-booster-9v.toml"), "--runs", "20"});
  REQUIRE(fixed.status == 0);
  CHECK(fixed.err.find("nothing varies") != std::string::npos);
  const result batch = run({"spread", preset("bass-booster-9v.toml"), "--runs", "20", "--idss", "2m..8m", "--vp", "-0.8..-3"});
  REQUIRE(batch.status == 0);
  CHECK(batch.err.find("nothing varies") == std::string::npos);
}

namespace {
// Standard output on a full disk: takes `room` bytes, then every write fails.
class full_after : public std::streambuf {
 public:
  explicit full_after(std::size_t room) : room_(room) {}

 protected:
  int_type overflow(int_type c) override {
    if (traits_type::eq_int_type(c, traits_type::eof())) return traits_type::not_eof(c);
    if (room_ == 0) return traits_type::eof();
    --room_;
    return c;
  }

 private:
  std::size_t room_;
};
}  // namespace

TEST_CASE("a report standard output cannot take is exit 1 with a message, never success") {
  const std::string booster = preset("bass-booster-9v.toml");
  const std::vector<std::vector<std::string>> commands = {
      {"bias", booster}, {"response", booster, "--csv"}, {"spread", booster, "--runs", "200", "--csv"}, {"--help"}, {"--version"}};
  for (const auto& args : commands) {
    for (std::size_t room : {std::size_t{0}, std::size_t{5}}) {  // nothing fits; the report cut in its first line
      CAPTURE(args.front());
      CAPTURE(room);
      full_after buf(room);
      std::ostream out(&buf);
      std::ostringstream err;
      const int status = pinchoff::cli::run(args, out, err, pinchoff::testing::built_data_files());
      CHECK(status == 1);
      CHECK(err.str().find("cannot write to standard output") != std::string::npos);
    }
  }
}

}  // namespace test_cli
