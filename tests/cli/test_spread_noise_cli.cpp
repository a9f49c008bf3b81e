// spread --noise (the noise of every part of a batch) and the part names spread --csv
// carries with --parts.
#include <cmath>
#include <fstream>
#include <sstream>
#include <string>
#include <vector>

#include <doctest/doctest.h>
#include <nlohmann/json.hpp>

#include "support/cli_runner.hpp"
#include "support/scratch_dir.hpp"

namespace test_spread_noise_cli {

namespace {
using result = pinchoff::testing::cli_result;
constexpr auto run = pinchoff::testing::run_cli;
std::string preset(const char* name) { return std::string(PINCHOFF_PRESETS_DIR) + "/" + name; }

std::vector<std::vector<std::string>> csv_rows(const std::string& text) {
  std::vector<std::vector<std::string>> rows;
  std::istringstream in(text);
  for (std::string line; std::getline(in, line);) {
    std::vector<std::string> cells;
    std::istringstream ls(line);
    for (std::string cell; std::getline(ls, cell, ',');) cells.push_back(cell);
    rows.push_back(cells);
  }
  return rows;
}
std::size_t column(const std::vector<std::string>& header, const std::string& name) {
  for (std::size_t k = 0; k < header.size(); ++k)
    if (header[k] == name) return k;
  FAIL("no column " << name);
  return 0;
}
}  // namespace

TEST_CASE("spread --noise: a run of the stage as it is gives the noise `noise` gives") {
  // Nothing varies: the one run is the stage itself, so its figures are `noise`'s (which
  // integrates on 200 points a decade against spread's 50: 0.01 dB covers the difference).
  for (const char* name : {"bass-booster-9v.toml", "phantom-mic-follower.toml", "two-stage-boost-9v.toml"}) {
    CAPTURE(name);
    const result s = run({"spread", preset(name), "--runs", "1", "--noise", "--json"});
    REQUIRE(s.status == 0);
    const result n = run({"noise", preset(name), "--json"});
    REQUIRE(n.status == 0);
    const nlohmann::json sj = nlohmann::json::parse(s.out)["percentiles"], nj = nlohmann::json::parse(n.out);
    CHECK(std::fabs(sj["ein_dbu"]["p50"].get<double>() - nj["ein_dbu"].get<double>()) < 0.01);
    CHECK(std::fabs(sj["ein_a_dbu"]["p50"].get<double>() - nj["ein_a_dbu"].get<double>()) < 0.01);
    CHECK(std::fabs(sj["output_noise_v"]["p50"].get<double>() / nj["output_noise_v"].get<double>() - 1.0) < 1e-3);
    CHECK(std::fabs(sj["output_noise_a_v"]["p50"].get<double>() / nj["output_noise_a_v"].get<double>() - 1.0) < 1e-3);
  }
}

TEST_CASE("spread --noise: columns, a requirement on the EIN, and the yield it gives") {
  const result s = run({"spread", preset("bass-booster-9v.toml"), "--idss", "2m..8m", "--vp", "-0.8..-3", "--runs", "40",
                        "--noise", "--require", "ein_a=..-125", "--csv"});
  REQUIRE(s.status == 0);
  const auto rows = csv_rows(s.out);
  REQUIRE(rows.size() == 41);
  const std::size_t ein = column(rows[0], "ein_a_dbu"), meets = column(rows[0], "meets");
  column(rows[0], "output_noise_v");
  column(rows[0], "output_noise_a_v");
  column(rows[0], "ein_dbu");
  int good = 0, over = 0;
  for (std::size_t r = 1; r < rows.size(); ++r) {
    const double v = std::stod(rows[r][ein]);
    if (v > -125.0) {
      ++over;
      CHECK(rows[r][meets] == "0");  // a run over the limit never meets it
    }
    good += rows[r][meets] == "1";
  }
  CHECK(over > 0);  // the limit is inside the batch's spread, so the check means something
  const result j = run({"spread", preset("bass-booster-9v.toml"), "--idss", "2m..8m", "--vp", "-0.8..-3", "--runs", "40",
                        "--noise", "--require", "ein_a=..-125", "--json"});
  REQUIRE(j.status == 0);
  CHECK(nlohmann::json::parse(j.out)["yield"].get<double>() == doctest::Approx(good / 40.0).epsilon(1e-12));
  const result t = run({"spread", preset("bass-booster-9v.toml"), "--runs", "3", "--noise"});
  REQUIRE(t.status == 0);
  CHECK(t.out.find("ein_a") != std::string::npos);
  CHECK(t.out.find(" dBu") != std::string::npos);
}

TEST_CASE("spread --csv with --parts names every run's part") {
  pinchoff::testing::scratch_dir dir;
  const std::string path = dir.file("parts.csv");
  // A parts table as fit writes it: the model's values at VDS = 0 would be read back.
  std::ofstream(path) << "part,idss_a,vp_v\nA,5m,-2\n\"B, spare\",4m,-1.5\nC,6m,-2.5\n";
  const result s = run({"spread", preset("bass-booster-9v.toml"), "--parts", path, "--csv"});
  REQUIRE(s.status == 0);
  std::istringstream in(s.out);
  std::string header, a, b, c;
  std::getline(in, header);
  std::getline(in, a);
  std::getline(in, b);
  std::getline(in, c);
  CHECK(header.rfind("run,part,idss_a,vp_v,", 0) == 0);
  CHECK(a.rfind("0,A,", 0) == 0);
  CHECK(b.rfind("1,\"B, spare\",", 0) == 0);  // quoted: the name holds a comma
  CHECK(c.rfind("2,C,", 0) == 0);
  // A chain: each stage's part, stage k of run i taking part (i + k) mod n.
  const result ch = run({"spread", preset("two-stage-boost-9v.toml"), "--parts", path, "--csv"});
  REQUIRE(ch.status == 0);
  std::istringstream cin(ch.out);
  std::getline(cin, header);
  std::getline(cin, a);
  CHECK(header.rfind("run,stage1.part,stage1.idss_a,stage1.vp_v,stage2.part,stage2.idss_a,stage2.vp_v,", 0) == 0);
  CHECK(a.rfind("0,A,", 0) == 0);
  CHECK(a.find(",\"B, spare\",") != std::string::npos);
  // Without --parts the columns are as before.
  const result plain = run({"spread", preset("bass-booster-9v.toml"), "--runs", "2", "--csv"});
  REQUIRE(plain.status == 0);
  CHECK(plain.out.rfind("run,idss_a,vp_v,supply_v,solved", 0) == 0);
}

}  // namespace test_spread_noise_cli
