// bias --temperature: the rest point's drift and the zero-TC current from the command line
// (the laws and the closed form are held in tests/model/analysis/test_temperature_drift.cpp).
#include <cmath>
#include <string>

#include <doctest/doctest.h>
#include <nlohmann/json.hpp>

#include "support/cli_runner.hpp"

namespace {
constexpr auto run = pinchoff::testing::run_cli;
std::string preset(const char* name) { return std::string(PINCHOFF_PRESETS_DIR) + "/" + name; }
}  // namespace

TEST_CASE("bias --temperature: a row every 10 °C, the stage's own temperature reproducing its rest point") {
  const auto r = run({"bias", preset("bass-booster-9v.toml"), "--temperature", "0..50", "--json"});
  REQUIRE(r.status == 0);
  const nlohmann::json j = nlohmann::json::parse(r.out);
  const nlohmann::json& t = j["temperature"];
  REQUIRE(t["points"].size() == 6);
  for (std::size_t k = 0; k < 6; ++k) CHECK(std::fabs(t["points"][k]["temperature_c"].get<double>() - 10.0 * k) < 1e-9);
  CHECK(t["law"]["vp_drift_v_per_k"] == -2.2e-3);
  REQUIRE(t["zero_tc"].size() == 1);
  CHECK(std::fabs(t["zero_tc"][0]["vov_v"].get<double>() - 2.0 * 300.15 * 2.2e-3 / 1.5) < 1e-9);  // closed form
  // At the stage's own temperature (27 °C, 300.15 K) the rest point is bias's own.
  const auto same = run({"bias", preset("bass-booster-9v.toml"), "--temperature", "27..27", "--json"});
  REQUIRE(same.status == 0);
  const nlohmann::json s = nlohmann::json::parse(same.out);
  CHECK(std::fabs(s["temperature"]["points"][0]["stages"][0]["id_a"].get<double>() /
                      s["operating_point"]["id_a"].get<double>() - 1.0) < 1e-12);
  // A chain: every stage's part.
  const auto chain = run({"bias", preset("two-stage-boost-9v.toml"), "--temperature", "0..50"});
  REQUIRE(chain.status == 0);
  CHECK(chain.out.find("stage2 ID") != std::string::npos);
  CHECK(chain.out.find("stage 2: zero-TC drain current") != std::string::npos);
  const auto plain = run({"bias", preset("bass-booster-9v.toml"), "--json"});
  CHECK(nlohmann::json::parse(plain.out)["temperature"].is_null());
}
