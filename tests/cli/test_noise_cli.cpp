// pinchoff noise from the command line: its JSON keys, CSV, plot, and the line bias prints.
#include <cmath>
#include <filesystem>
#include <string>

#include <doctest/doctest.h>
#include <nlohmann/json.hpp>

#include "support/cli_runner.hpp"

namespace test_noise_cli {

namespace {
using result = pinchoff::testing::cli_result;
constexpr auto run = pinchoff::testing::run_cli;
std::string preset(const char* name) { return std::string(PINCHOFF_PRESETS_DIR) + "/" + name; }

double sum_of(const nlohmann::json& rows, const char* key) {
  double s = 0.0;
  for (const auto& c : rows) s += c[key].get<double>();
  return s;
}
}  // namespace

TEST_CASE("noise --json gives the issue's keys; EIN is the input noise in dBu") {
  const result r = run({"noise", preset("clean-preamp-18v.toml"), "--set", "signal.impedance=150", "--json", "--points", "20",
                        "--level", "-10dBu"});
  REQUIRE(r.status == 0);
  const nlohmann::json j = nlohmann::json::parse(r.out);
  for (const char* k : {"band_hz", "output_noise_v", "output_noise_a_v", "output_noise_468_v", "input_noise_v",
                        "input_noise_a_v", "ein_dbu", "ein_a_dbu", "noise_figure_db", "self_noise_dba_spl", "snr_db",
                        "snr_level_db", "density", "contributions"})
    CHECK_MESSAGE(j.contains(k), k);
  CHECK(j["band_hz"][0] == 20.0);
  CHECK(j["band_hz"][1] == 20000.0);
  // dBu: 0 dBu = sqrt(0.6) V rms (common practice).
  CHECK(std::fabs(j["ein_dbu"].get<double>() - 20.0 * std::log10(j["input_noise_v"].get<double>() / std::sqrt(0.6))) < 1e-9);
  CHECK(j["noise_figure_db"].get<double>() > 0.0);
  CHECK(j["self_noise_dba_spl"].is_null());
  REQUIRE(j["density"].size() == 20);
  for (const char* k : {"frequency_hz", "output_v_per_rthz", "input_v_per_rthz"}) CHECK(j["density"][0].contains(k));
  CHECK(std::fabs(sum_of(j["contributions"], "share_percent_a") - 100.0) < 1e-6);
  CHECK(std::fabs(sum_of(j["contributions"], "share_percent_1k") - 100.0) < 1e-6);
  CHECK(j["contributions"][0].contains("part"));
  // The source's own resistance is reported apart.
  bool source_row = false;
  for (const auto& c : j["contributions"]) source_row = source_row || (c["part"] == "signal.impedance" && c["source"] == true);
  CHECK(source_row);
}

TEST_CASE("noise on a capsule gives its self-noise in dB(A) SPL; on a chain, per stage") {
  const result mic = run({"noise", preset("phantom-mic-follower.toml"), "--json", "--points", "10"});
  REQUIRE(mic.status == 0);
  const nlohmann::json m = nlohmann::json::parse(mic.out);
  REQUIRE(m["self_noise_dba_spl"].is_number());
  CHECK(m["noise_figure_db"].is_null());
  const result chain = run({"noise", preset("two-stage-boost-9v.toml"), "--json", "--points", "10"});
  REQUIRE(chain.status == 0);
  const nlohmann::json c = nlohmann::json::parse(chain.out);
  REQUIRE(c["stages"].size() == 2);
  // The last stage's output is the load.
  CHECK(std::fabs(c["stages"][1]["output_noise_v"].get<double>() / c["output_noise_v"].get<double>() - 1.0) < 1e-9);
}

TEST_CASE("noise --csv, --plot and the text report") {
  const std::string svg = (std::filesystem::temp_directory_path() / "pinchoff_cli_noise.svg").string();
  const result csv = run({"noise", preset("bass-booster-9v.toml"), "--csv", "--points", "5", "--plot", svg});
  REQUIRE(csv.status == 0);
  CHECK(csv.out.rfind("frequency_hz,output_v_per_rthz,input_v_per_rthz,", 0) == 0);
  CHECK(std::filesystem::file_size(svg) > 1000);
  std::filesystem::remove(svg);
  const result text = run({"noise", preset("bass-booster-9v.toml"), "--band", "20..15k"});
  REQUIRE(text.status == 0);
  for (const char* w : {"A-weighted", "ITU-R 468", "EIN", "which part hisses", "drain.resistor"})
    CHECK_MESSAGE(text.out.find(w) != std::string::npos, w);
  const result help = run({"noise", "--help"});
  CHECK(help.status == 0);
  CHECK(help.out.find("Examples:") != std::string::npos);
}

TEST_CASE("bias prints the A-weighted EIN, or a capsule's self-noise") {
  const result b = run({"bias", preset("bass-booster-9v.toml")});
  REQUIRE(b.status == 0);
  CHECK(b.out.find("EIN") != std::string::npos);
  const result m = run({"bias", preset("phantom-mic-follower.toml")});
  REQUIRE(m.status == 0);
  CHECK(m.out.find("dB(A) SPL") != std::string::npos);
  const result j = run({"bias", preset("phantom-mic-follower.toml"), "--json"});
  REQUIRE(j.status == 0);
  CHECK(nlohmann::json::parse(j.out)["noise"]["self_noise_dba_spl"].is_number());
}

TEST_CASE("a capsule's dynamic range runs from its self-noise to its maximum SPL at 1 % THD") {
  // IEC 60268-4 usage: the dynamic range is the maximum SPL less the A-weighted self-noise
  // (both in dB SPL); the maximum SPL is the one sweep and compare give at 1 kHz.
  const result r = run({"noise", preset("phantom-mic-follower.toml"), "--json", "--points", "20"});
  REQUIRE(r.status == 0);
  const nlohmann::json j = nlohmann::json::parse(r.out);
  const result c = run({"compare", preset("phantom-mic-follower.toml"), preset("phantom-mic-follower.toml"), "--json"});
  REQUIRE(c.status == 0);
  const double max_spl = nlohmann::json::parse(c.out)["designs"][0]["max_spl_1_percent_db"].get<double>();
  CHECK(j["max_spl_1_percent_db"].get<double>() == doctest::Approx(max_spl).epsilon(1e-9));
  CHECK(j["dynamic_range_db"].get<double>() ==
        doctest::Approx(max_spl - j["self_noise_dba_spl"].get<double>()).epsilon(1e-9));
  const result text = run({"noise", preset("phantom-mic-follower.toml"), "--points", "20"});
  REQUIRE(text.status == 0);
  CHECK(text.out.find("dynamic range") != std::string::npos);
}

}  // namespace test_noise_cli
