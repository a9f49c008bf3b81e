// A bag of parts from the command line: fit of a parts file, the parts table, match.
#include <cmath>
#include <filesystem>
#include <fstream>
#include <string>

#include <doctest/doctest.h>
#include <nlohmann/json.hpp>

#include "support/cli_runner.hpp"
#include "support/scratch_dir.hpp"

namespace test_parts_cli {

namespace {
using result = pinchoff::testing::cli_result;
constexpr auto run = pinchoff::testing::run_cli;

// Three parts read on a gate sweep, from Shockley's equation (closed form):
// A 5 mA, -2 V: 5, 2.8125, 1.25 mA at 0, -0.5, -1 V; B 4 mA, -2 V: 4, 2.25, 1 mA;
// C 5.05 mA, -2.02 V, a near twin of A: 5.05, 2.8564..., 1.2749... mA.
std::string bag() {
  std::string s = "part,vgs_v,id_a\n";
  auto rows = [&](const char* name, double idss, double vp) {
    for (double vgs : {0.0, -0.5, -1.0}) {
      const double u = 1.0 - vgs / vp;
      s += std::string(name) + "," + std::to_string(vgs) + "," + std::to_string(idss * u * u * 1e3) + " mA\n";
    }
  };
  rows("A", 5e-3, -2.0);
  rows("B", 4e-3, -2.0);
  rows("C", 5.05e-3, -2.02);
  return s;
}
}  // namespace

TEST_CASE("fit of a parts file: every part, the issue's JSON keys, and a parts table match reads") {
  pinchoff::testing::scratch_dir dir;
  const std::string path = dir.file("bag.csv");
  std::ofstream(path) << bag();
  const result r = run({"fit", path, "--json"});
  REQUIRE(r.status == 0);
  const nlohmann::json j = nlohmann::json::parse(r.out);
  REQUIRE(j["parts"].size() == 3);
  for (const char* k : {"part", "idss_a", "vp_v", "lambda_per_v", "idss_vds_v", "std_errors", "rows"})
    for (const auto& p : j["parts"]) CHECK(p.contains(k));
  CHECK(j["parts"][0]["part"] == "A");
  // std::to_string keeps 6 decimals of mA: 1e-9 A, so the fit is good to about 1e-5.
  CHECK(std::fabs(j["parts"][1]["idss_a"].get<double>() / 4e-3 - 1) < 1e-5);
  CHECK(std::fabs(j["parts"][2]["vp_v"].get<double>() / -2.02 - 1) < 1e-5);

  const result text = run({"fit", path});
  REQUIRE(text.status == 0);
  CHECK(text.out.find("3 parts, 9 readings") != std::string::npos);

  const result table = run({"fit", path, "--csv"});
  REQUIRE(table.status == 0);
  const std::string table_path = dir.file("parts.csv");
  std::ofstream(table_path) << table.out;
  for (const std::string& input : {table_path, path}) {  // the table, or the readings fitted again
    CAPTURE(input);
    const result m = run({"match", input, "--json"});
    REQUIRE(m.status == 0);
    const nlohmann::json mj = nlohmann::json::parse(m.out);
    REQUIRE(mj["sets"].size() == 1);
    CHECK(mj["sets"][0]["parts"] == nlohmann::json::array({"A", "C"}));
    CHECK(mj["sets"][0]["idss_spread_a"].get<double>() == doctest::Approx(0.05e-3).epsilon(1e-4).scale(0));
    CHECK(mj["sets"][0]["vp_spread_v"].get<double>() == doctest::Approx(0.02).epsilon(1e-4).scale(0));
    CHECK_FALSE(mj["sets"][0].contains("vgs_spread_v"));
    CHECK(mj["left_over"] == nlohmann::json::array({"B"}));
  }
  // spread over the bag: every part once, the extremes named.
  const result sp = run({"spread", std::string(PINCHOFF_PRESETS_DIR) + "/bass-booster-9v.toml", "--parts", table_path, "--json"});
  REQUIRE(sp.status == 0);
  const nlohmann::json sj = nlohmann::json::parse(sp.out);
  CHECK(sj["runs"] == 3);
  for (const auto& w : sj["worst"]) CHECK(w.contains("part"));
  const result v = run({"match", path, "--by", "vgs@1m", "--json"});
  REQUIRE(v.status == 0);
  CHECK(nlohmann::json::parse(v.out)["sets"][0].contains("vgs_spread_v"));
  const result t = run({"match", path});
  REQUIRE(t.status == 0);
  CHECK(t.out.find("left over: B") != std::string::npos);
}

TEST_CASE("fit of one part keeps its keys, with the VDS its IDSS is at") {
  pinchoff::testing::scratch_dir dir;
  const std::string path = dir.file("one.csv");
  std::ofstream(path) << "vgs_v,id_a,vds_v\n0,5m,9\n-0.5,2.8125m,9\n-1,1.25m,9\n-1.5,0.3125m,9\n";
  const result r = run({"fit", path, "--json"});
  REQUIRE(r.status == 0);
  const nlohmann::json j = nlohmann::json::parse(r.out);
  CHECK_FALSE(j.contains("parts"));
  CHECK(j["idss_a"].get<double>() == doctest::Approx(5e-3).epsilon(1e-6).scale(0));
  CHECK(j["idss_vds_v"].get<double>() == 9.0);
  const result text = run({"fit", path});
  CHECK(text.out.find("idss_vds = 9") != std::string::npos);
}

TEST_CASE("a part of a bag that cannot be fitted is left out with a warning, and listed as unfit") {
  // The bag above with a fourth part D read once: one reading cannot give IDSS and VP
  // (two unknowns), so D is left out, named with its line and the reason, and the three
  // others are fitted as before (closed form: A 5 mA, -2 V).
  pinchoff::testing::scratch_dir dir;
  const std::string path = dir.file("bag.csv");
  std::ofstream(path) << bag() << "D,0,4.5 mA\n";
  const result r = run({"fit", path, "--json"});
  REQUIRE(r.status == 0);
  CHECK(r.err.find("warning") != std::string::npos);
  CHECK(r.err.find("part 'D' (lines 11-11) left out") != std::string::npos);
  CHECK(r.err.find("too few readings") != std::string::npos);
  const nlohmann::json j = nlohmann::json::parse(r.out);
  REQUIRE(j["parts"].size() == 3);
  CHECK(j["parts"][0]["idss_a"].get<double>() == doctest::Approx(5e-3).epsilon(1e-6).scale(0));
  REQUIRE(j["unfit"].size() == 1);
  CHECK(j["unfit"][0]["part"] == "D");
  CHECK(j["unfit"][0]["first_line"] == 11);
  CHECK(j["unfit"][0]["reason"].get<std::string>().find("too few readings") != std::string::npos);
  const result text = run({"fit", path});
  REQUIRE(text.status == 0);
  CHECK(text.out.find("left out: part 'D' (lines 11-11)") != std::string::npos);
  // match reads the same bag through the same loop: A and C pair, B is left over, D unfit.
  const result m = run({"match", path, "--json"});
  REQUIRE(m.status == 0);
  CHECK(m.err.find("part 'D' (lines 11-11) left out") != std::string::npos);
  const nlohmann::json mj = nlohmann::json::parse(m.out);
  REQUIRE(mj["sets"].size() == 1);
  CHECK(mj["unfit"].size() == 1);
  CHECK(mj["unfit"][0]["part"] == "D");
}

}  // namespace test_parts_cli
