// bias --thd-levels and tune --thd-levels: headroom as distortion, as sweep finds it. The
// levels are held to `sweep` run over the same drives (the one level-finder), and to the
// square law's closed form in tests/model/analysis/test_distortion_headroom.cpp.
#include <cmath>
#include <cstdio>
#include <string>
#include <vector>

#include <doctest/doctest.h>
#include <nlohmann/json.hpp>

#include "base/units.hpp"
#include "support/cli_runner.hpp"

namespace test_thd_levels_cli {

namespace {
using result = pinchoff::testing::cli_result;
constexpr auto run = pinchoff::testing::run_cli;
std::string preset(const char* name) { return std::string(PINCHOFF_PRESETS_DIR) + "/" + name; }
}  // namespace

TEST_CASE("bias --thd-levels gives sweep's crossings over the drives around the clean drive") {
  for (const char* name : {"bass-booster-9v.toml", "two-stage-boost-9v.toml"}) {
    CAPTURE(name);
    const result b = run({"bias", preset(name), "--thd-levels", "--json"});
    REQUIRE(b.status == 0);
    const nlohmann::json h = nlohmann::json::parse(b.out)["headroom"];
    REQUIRE(h["thd_levels"].size() == 3);
    const nlohmann::json& sw = h["thd_sweep"];
    const double clean = h["clean_drive_vpk"].get<double>();
    CHECK(std::fabs(sw["from_vpk"].get<double>() / (clean / 100.0) - 1.0) < 1e-12);
    CHECK(std::fabs(sw["to_vpk"].get<double>() / (clean * 30.0) - 1.0) < 1e-12);
    // The same drives through `sweep` (printed to 17 digits, so the same numbers).
    std::string drives;
    const int n = sw["points"].get<int>();
    for (int k = 0; k < n; ++k) {
      char buf[40];
      std::snprintf(buf, sizeof buf, "%.17gV", clean / 100.0 * std::pow(3000.0, static_cast<double>(k) / (n - 1)));
      if (k > 0) drives += ',';
      drives += buf;
    }
    const result s = run({"sweep", preset(name), "--drive", drives, "--json"});
    REQUIRE(s.status == 0);
    const nlohmann::json cs = nlohmann::json::parse(s.out)["thd_crossings"];
    const double thd[] = {1.0, 3.0, 10.0};
    for (std::size_t k = 0; k < 3; ++k) {
      const nlohmann::json& l = h["thd_levels"][k];
      CAPTURE(k);
      CHECK(l["thd_percent"].get<double>() == thd[k]);
      REQUIRE(l["found"].get<bool>());
      CHECK(std::fabs(l["output_vpk"].get<double>() / cs[k]["output_vpk"].get<double>() - 1.0) < 1e-9);
      CHECK(std::fabs(l["drive_vpk"].get<double>() / cs[k]["drive_vpk"].get<double>() - 1.0) < 1e-9);
    }
    // 1 % comes below the clean swing, the hard limit (a square-law channel bends from the start).
    CHECK(h["thd_levels"][0]["output_vpk"].get<double>() < h["symmetric_output_vpk"].get<double>());
  }
  const result plain = run({"bias", preset("bass-booster-9v.toml"), "--json"});
  REQUIRE(plain.status == 0);
  CHECK(nlohmann::json::parse(plain.out)["headroom"]["thd_levels"].is_null());
  const result text = run({"bias", preset("bass-booster-9v.toml"), "--thd-levels"});
  REQUIRE(text.status == 0);
  CHECK(text.out.find("THD from the engine") != std::string::npos);
  CHECK(text.out.find("1.0 % at ") != std::string::npos);
}

TEST_CASE("tune --thd-levels: every row's levels, the exact row's as bias gives them for that value") {
  const result t = run({"tune", preset("bass-booster-9v.toml"), "--target", "vd=4.5", "--thd-levels", "--json"});
  REQUIRE(t.status == 0);
  const nlohmann::json j = nlohmann::json::parse(t.out);
  REQUIRE(j["exact"]["thd_levels"].size() == 3);
  for (const auto& c : j["candidates"]) CHECK(c["thd_levels"].size() == 3);
  char value[40];
  std::snprintf(value, sizeof value, "source.resistor=%.17g", j["exact_ohm"].get<double>());
  const result b = run({"bias", preset("bass-booster-9v.toml"), "--set", value, "--thd-levels", "--json"});
  REQUIRE(b.status == 0);
  const nlohmann::json bl = nlohmann::json::parse(b.out)["headroom"]["thd_levels"];
  for (std::size_t k = 0; k < 3; ++k)
    CHECK(std::fabs(j["exact"]["thd_levels"][k]["output_vpk"].get<double>() / bl[k]["output_vpk"].get<double>() - 1.0) < 1e-6);
  const result text = run({"tune", preset("bass-booster-9v.toml"), "--target", "vd=4.5", "--thd-levels"});
  REQUIRE(text.status == 0);
  CHECK(text.out.find("1 % THD") != std::string::npos);
}

TEST_CASE("tune --thd-levels with two targets: the joint solution's and each standard pair's levels, as bias gives them") {
  // Each figure is bias --thd-levels of the stage with both resistors set to the row's values:
  // the exact joint solution (each pair's table has it as its exact row) and every pair of
  // standard values around it.
  const std::string file = preset("bass-booster-9v.toml");
  const result t = run({"tune", file, "--target", "gain=20dB", "--target", "vd=4.5", "--adjust",
                        "drain.resistor,source.resistor", "--thd-levels", "--json"});
  REQUIRE(t.status == 0);
  const nlohmann::json j = nlohmann::json::parse(t.out);
  auto bias_levels = [&](double drain_ohm, double source_ohm) {
    char d[64], s[64];
    std::snprintf(d, sizeof d, "drain.resistor=%.17g", drain_ohm);
    std::snprintf(s, sizeof s, "source.resistor=%.17g", source_ohm);
    const result b = run({"bias", file, "--set", d, "--set", s, "--thd-levels", "--json"});
    REQUIRE(b.status == 0);
    return nlohmann::json::parse(b.out)["headroom"]["thd_levels"];
  };
  auto same = [](const nlohmann::json& got, const nlohmann::json& want) {
    REQUIRE(got.size() == 3);
    for (std::size_t k = 0; k < 3; ++k) {
      CAPTURE(k);
      REQUIRE(got[k]["found"].get<bool>() == want[k]["found"].get<bool>());
      if (want[k]["found"].get<bool>())
        CHECK(std::fabs(got[k]["output_vpk"].get<double>() / want[k]["output_vpk"].get<double>() - 1.0) < 1e-6);
    }
  };
  const nlohmann::json exact = bias_levels(j["exact_ohm"][0].get<double>(), j["exact_ohm"][1].get<double>());
  for (const auto& p : j["pairs"]) same(p["exact"]["thd_levels"], exact);
  REQUIRE(j["candidates"].size() >= 2);
  for (const auto& c : j["candidates"]) {
    CAPTURE(c["values_ohm"].dump());
    same(c["thd_levels"], bias_levels(c["values_ohm"][0].get<double>(), c["values_ohm"][1].get<double>()));
  }
  const result text = run({"tune", file, "--target", "gain=20dB", "--target", "vd=4.5", "--adjust",
                           "drain.resistor,source.resistor", "--thd-levels"});
  REQUIRE(text.status == 0);
  CHECK(text.out.find("10 % THD") != std::string::npos);
}

}  // namespace test_thd_levels_cli
