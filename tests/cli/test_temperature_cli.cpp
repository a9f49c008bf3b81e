// bias --temperature: the rest point's drift and the zero-TC current from the command line
// (the laws and the closed form are held in tests/model/analysis/test_temperature_drift.cpp).
#include <cmath>
#include <fstream>
#include <sstream>
#include <string>

#include <doctest/doctest.h>
#include <nlohmann/json.hpp>

#include "support/cli_runner.hpp"
#include "support/scratch_dir.hpp"

namespace test_temperature_cli {

namespace {
constexpr auto run = pinchoff::testing::run_cli;
std::string preset(const char* name) { return std::string(PINCHOFF_PRESETS_DIR) + "/" + name; }
std::string read_all(const std::string& path) {
  std::ifstream f(path);
  std::stringstream s;
  s << f.rdbuf();
  return s.str();
}
// The preset with `keys` added under its [jfet] header.
std::string with_jfet_keys(const std::string& text, const std::string& keys) {
  const std::size_t at = text.find("[jfet]\n");
  REQUIRE(at != std::string::npos);
  return text.substr(0, at + 7) + keys + text.substr(at + 7);
}
void write(const std::string& path, const std::string& text) { std::ofstream(path) << text; }
nlohmann::json drift_of(const std::vector<std::string>& args) {
  const auto r = run(args);
  REQUIRE(r.status == 0);
  return nlohmann::json::parse(r.out)["temperature"];
}
// The drift's figures (every point's rest point and gain, each part's zero-TC point), which
// must be the same numbers however the law was given.
void same_drift(const nlohmann::json& a, const nlohmann::json& b) {
  CHECK(a["points"] == b["points"]);
  REQUIRE(a["zero_tc"].size() == b["zero_tc"].size());
  for (std::size_t k = 0; k < a["zero_tc"].size(); ++k) {
    CHECK(a["zero_tc"][k]["id_a"] == b["zero_tc"][k]["id_a"]);
    CHECK(a["zero_tc"][k]["vov_v"] == b["zero_tc"][k]["vov_v"]);
    CHECK(a["zero_tc"][k]["law"]["vp_drift_v_per_k"] == b["zero_tc"][k]["law"]["vp_drift_v_per_k"]);
    CHECK(a["zero_tc"][k]["law"]["beta_exponent"] == b["zero_tc"][k]["law"]["beta_exponent"]);
  }
}
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

TEST_CASE("bias --temperature: a part's own [jfet] vp_drift and beta_exponent drift it as the options do") {
  // The same law given two ways must give the same figures: the file's keys (-3.1 mV/K, m = -2.2)
  // and --vp-drift -3.1 --beta-exponent -2.2 on the plain preset; and --set the same.
  const pinchoff::testing::scratch_dir dir;
  const std::string plain = preset("bass-booster-9v.toml");
  const std::string own = dir.file("own.toml");
  write(own, with_jfet_keys(read_all(plain), "vp_drift = \"-3.1mV/K\"\nbeta_exponent = -2.2\n"));
  const nlohmann::json by_key = drift_of({"bias", own, "--temperature", "0..50", "--json"});
  const nlohmann::json by_option =
      drift_of({"bias", plain, "--temperature", "0..50", "--vp-drift", "-3.1", "--beta-exponent", "-2.2", "--json"});
  same_drift(by_key, by_option);
  // A value with its unit or prefix is the same drift as the plain number in mV/K.
  for (const char* written : {"-3.1m", "-3.1mV/K"})
    same_drift(by_option, drift_of({"bias", plain, "--temperature", "0..50", "--vp-drift", written, "--beta-exponent", "-2.2", "--json"}));
  CHECK(by_key["law"]["vp_drift_from"] == "part");
  CHECK(by_key["law"]["beta_exponent_from"] == "part");
  CHECK(by_option["law"]["vp_drift_from"] == "option");
  CHECK(std::fabs(by_key["law"]["vp_drift_v_per_k"].get<double>() / -3.1e-3 - 1.0) < 1e-12);
  // The default law gives other figures: the keys are read.
  const nlohmann::json by_default = drift_of({"bias", plain, "--temperature", "0..50", "--json"});
  CHECK(by_default["points"] != by_key["points"]);
  CHECK(by_default["law"]["vp_drift_from"] == "default");
  const nlohmann::json by_set = drift_of({"bias", plain, "--set", "jfet.vp_drift=-3.1m", "--set", "jfet.beta_exponent=-2.2",
                                          "--temperature", "0..50", "--json"});
  same_drift(by_set, by_key);
  // The text report says where the law came from.
  const auto text = run({"bias", own, "--temperature", "0..50"});
  REQUIRE(text.status == 0);
  CHECK(text.out.find("VP -3.10 mV/K (the part's own), beta ∝ T^-2.20 (the part's own)") != std::string::npos);
}

TEST_CASE("bias --temperature: an option overrides the part's own key, the other key still counts") {
  const pinchoff::testing::scratch_dir dir;
  const std::string plain = preset("bass-booster-9v.toml");
  const std::string own = dir.file("own.toml");
  write(own, with_jfet_keys(read_all(plain), "vp_drift = \"-3.1m\"\nbeta_exponent = -2.2\n"));
  // --vp-drift replaces the key's -3.1 mV/K; the key's m = -2.2 stays.
  const nlohmann::json over = drift_of({"bias", own, "--temperature", "0..50", "--vp-drift", "-1.2", "--json"});
  const nlohmann::json want =
      drift_of({"bias", plain, "--temperature", "0..50", "--vp-drift", "-1.2", "--beta-exponent", "-2.2", "--json"});
  same_drift(over, want);
  CHECK(over["law"]["vp_drift_from"] == "option");
  CHECK(over["law"]["beta_exponent_from"] == "part");
  // Both options: the keys count for nothing.
  const nlohmann::json both =
      drift_of({"bias", own, "--temperature", "0..50", "--vp-drift", "-1.2", "--beta-exponent", "-1", "--json"});
  same_drift(both, drift_of({"bias", plain, "--temperature", "0..50", "--vp-drift", "-1.2", "--beta-exponent", "-1", "--json"}));
}

TEST_CASE("bias --temperature: in a chain each [stage.jfet] takes its own law, and a device class may give one") {
  const pinchoff::testing::scratch_dir dir;
  std::string chain = read_all(preset("two-stage-boost-9v.toml"));
  // Stage 2's [stage.jfet] gets the keys; stage 1 keeps the default law.
  const std::size_t second = chain.find("[stage.jfet]\n", chain.find("[stage.jfet]\n") + 1);
  REQUIRE(second != std::string::npos);
  chain.insert(second + 13, "vp_drift = \"-3.1m\"\nbeta_exponent = -2.2\n");
  write(dir.file("chain.toml"), chain);
  const nlohmann::json d = drift_of({"bias", dir.file("chain.toml"), "--temperature", "0..50", "--json"});
  REQUIRE(d["zero_tc"].size() == 2);
  CHECK(d["zero_tc"][0]["law"]["vp_drift_from"] == "default");
  CHECK(d["zero_tc"][1]["law"]["vp_drift_from"] == "part");
  CHECK(std::fabs(d["zero_tc"][1]["law"]["vp_drift_v_per_k"].get<double>() / -3.1e-3 - 1.0) < 1e-12);
  // The same through --set stage2.jfet.KEY on the preset.
  same_drift(drift_of({"bias", preset("two-stage-boost-9v.toml"), "--set", "stage2.jfet.vp_drift=-3.1m", "--set",
                       "stage2.jfet.beta_exponent=-2.2", "--temperature", "0..50", "--json"}),
             d);
  const auto text = run({"bias", dir.file("chain.toml"), "--temperature", "0..50"});
  REQUIRE(text.status == 0);
  CHECK(text.out.find("stage 2: VP -3.10 mV/K (the part's own)") != std::string::npos);
  // A class that gives a drift: a stage naming it takes it, and its own key wins over it.
  write(dir.file("devices.toml"), "[warm]\nidss = \"2m..10m\"\nvp = \"-0.8..-3\"\ntypical_idss = \"5m\"\n"
                                  "typical_vp = -1.8\nvp_drift = \"-3.1m\"\nbeta_exponent = -2.2\n");
  write(dir.file("classed.toml"), "[supply]\nvolts = 9\n[jfet]\nclass = \"warm\"\n[gate]\nresistor = \"1M\"\n"
                                  "[drain]\nresistor = \"3.3k\"\n[source]\nresistor = \"680\"\n");
  const nlohmann::json c = drift_of({"bias", dir.file("classed.toml"), "--temperature", "0..50", "--json"});
  CHECK(std::fabs(c["law"]["vp_drift_v_per_k"].get<double>() / -3.1e-3 - 1.0) < 1e-12);
  CHECK(c["law"]["beta_exponent"].get<double>() == -2.2);
  const nlohmann::json ck =
      drift_of({"bias", dir.file("classed.toml"), "--set", "jfet.vp_drift=-1m", "--temperature", "0..50", "--json"});
  CHECK(std::fabs(ck["law"]["vp_drift_v_per_k"].get<double>() / -1e-3 - 1.0) < 1e-12);
}

}  // namespace test_temperature_cli
