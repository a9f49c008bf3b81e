// Sources at the command line: levels in dB SPL on a capsule stage, and the bundled
// microphone preset's response checked by hand.
#include <cmath>
#include <numbers>
#include <string>

#include <doctest/doctest.h>
#include <nlohmann/json.hpp>

#include "support/cli_runner.hpp"

namespace test_sources {

namespace {
using result = pinchoff::testing::cli_result;
constexpr auto run = pinchoff::testing::run_cli;

std::string preset(const char* name) { return std::string(PINCHOFF_PRESETS_DIR) + "/" + name; }

// 0 dB SPL = 20 µPa rms (IEC 60268-4, ISO 1683): 94 dB SPL = 20e-6 x 10^(94/20) Pa.
const double pa_at_94 = 20e-6 * std::pow(10.0, 94.0 / 20.0);
constexpr double sensitivity = 12e-3;  // the preset's signal.sensitivity, V/Pa
}  // namespace

TEST_CASE("--drive 94dBSPL is the capsule's sensitivity times 1.002 Pa, as a sine's peak") {
  // IEC 60268-4: the open-circuit sensitivity is V rms per Pa rms; the drive is a sine, so
  // its peak is sqrt 2 times that.
  const double vpk = sensitivity * pa_at_94 * std::numbers::sqrt2;
  const result r = run({"sweep", preset("phantom-mic-follower.toml"), "--drive", "94dBSPL", "--json"});
  CAPTURE(r.err);
  REQUIRE(r.status == 0);
  const nlohmann::json j = nlohmann::json::parse(r.out);
  CHECK(j["points"][0]["drive_vpk"].get<double>() == doctest::Approx(vpk).epsilon(1e-12));
  // "94 dB SPL" with spaces, any case, is the same level.
  const result spaced = run({"sweep", preset("phantom-mic-follower.toml"), "--drive", "94 dB spl", "--json"});
  REQUIRE(spaced.status == 0);
  CHECK(nlohmann::json::parse(spaced.out)["points"][0]["drive_vpk"].get<double>() == doctest::Approx(vpk).epsilon(1e-12));
}

TEST_CASE("bias reports a capsule stage's output at 94 dB SPL and what the capsule sees") {
  const result r = run({"bias", preset("phantom-mic-follower.toml"), "--json"});
  REQUIRE(r.status == 0);
  const nlohmann::json j = nlohmann::json::parse(r.out);
  const double gain = std::fabs(j["small_signal"]["gain_midband_v_per_v"].get<double>());
  // The definition: sensitivity x pressure x gain, and dBV = 20 log10(V rms / 1 V).
  const double vrms = sensitivity * pa_at_94 * gain;
  CHECK(j["input"]["output_at_94_db_spl_vrms"].get<double>() == doctest::Approx(vrms).epsilon(1e-12));
  CHECK(j["input"]["output_at_94_db_spl_dbv"].get<double>() == doctest::Approx(20.0 * std::log10(vrms)).epsilon(1e-12));
  CHECK(j["input"]["capacitance_f"].get<double>() > 0.0);
  const result text = run({"bias", preset("phantom-mic-follower.toml")});
  REQUIRE(text.status == 0);
  for (const char* part : {"What the source sees", "input capacitance", "output at 94 dB SPL", "dBV"}) {
    CAPTURE(part);
    CHECK(text.out.find(part) != std::string::npos);
  }
}

TEST_CASE("the pickup preset: response and bias report its resonance where the coil meets the capacitance") {
  // presets/pickup-buffer-9v.toml: 2.5 H against 120 pF + 3 m at 100 pF/m (common practice)
  // plus the buffer's input capacitance, which bias reports: Thomson's 1/(2 pi sqrt(L C)).
  // The coil's 6 kΩ and the buffer's 1.5 MΩ damp it, and the RLC divider's peak (closed form,
  // as in tests/model/analysis/test_pickup.cpp) lies 0.22 % below it: a 0.3 % tolerance holds
  // the reported peak to Thomson's formula with that damping.
  const result b = run({"bias", preset("pickup-buffer-9v.toml"), "--json"});
  CAPTURE(b.err);
  REQUIRE(b.status == 0);
  const nlohmann::json in = nlohmann::json::parse(b.out)["input"];
  const double c_total = 420e-12 + in["capacitance_f"].get<double>();
  CHECK(in["pickup_capacitance_f"].get<double>() == doctest::Approx(420e-12).epsilon(1e-12).scale(0));
  const double f0 = 1.0 / (2.0 * std::numbers::pi * std::sqrt(2.5 * c_total));
  const double f_bias = in["loaded_resonance"]["frequency_hz"].get<double>();
  CHECK(f_bias == doctest::Approx(f0).epsilon(3e-3));
  CHECK(f_bias < f0);
  const result r = run({"response", preset("pickup-buffer-9v.toml"), "--json"});
  REQUIRE(r.status == 0);
  const nlohmann::json res = nlohmann::json::parse(r.out)["resonance"];
  // A buffer's gain is flat there: the load's peak is the input's.
  CHECK(res["frequency_hz"].get<double>() == doctest::Approx(f_bias).epsilon(1e-3));
  CHECK(res["peak_db"].get<double>() > 10.0);
  CHECK(res["below_3db_hz"].get<double>() < res["frequency_hz"].get<double>());
  CHECK(res["above_3db_hz"].get<double>() > res["frequency_hz"].get<double>());
  const result text = run({"response", preset("pickup-buffer-9v.toml")});
  REQUIRE(text.status == 0);
  for (const char* part : {"resonance", "dB above mid-band", "-3 dB from the peak", "the coil's resistance alone"}) {
    CAPTURE(part);
    CHECK(text.out.find(part) != std::string::npos);
  }
}

TEST_CASE("compare --at-drive in dB SPL drives each capsule at its own voltage and rates its maximum SPL") {
  // Design 2's capsule is 2.5 times as sensitive (30 mV/Pa): at one pressure its drive is
  // 2.5 times design 1's (the definition: sensitivity x pressure).
  const result r = run({"compare", preset("phantom-mic-follower.toml"), preset("phantom-mic-follower.toml"), "--set",
                        "2:signal.sensitivity=30m", "--at-drive", "94dBSPL", "--json"});
  CAPTURE(r.err);
  REQUIRE(r.status == 0);
  const nlohmann::json j = nlohmann::json::parse(r.out);
  CHECK(j["drive_db_spl"].get<double>() == 94.0);
  const nlohmann::json& d = j["designs"];
  CHECK(d[0]["drive_vpk"].get<double>() == doctest::Approx(sensitivity * pa_at_94 * std::numbers::sqrt2).epsilon(1e-12));
  CHECK(d[1]["drive_vpk"].get<double>() == doctest::Approx(30e-3 * pa_at_94 * std::numbers::sqrt2).epsilon(1e-12));
  CHECK(d[0]["drive_db_spl"].get<double>() == doctest::Approx(94.0).epsilon(1e-12));
  // The same converter behind a 2.5x more sensitive capsule clips at a pressure
  // 20 log10(2.5) = 7.96 dB lower (the circuits are the same; the search stops within 1e-4
  // of the THD, so within about 0.002 dB).
  const double shift = 20.0 * std::log10(2.5);
  // Absolute, in dB.
  CHECK(std::fabs(d[0]["max_spl_1_percent_db"].get<double>() - d[1]["max_spl_1_percent_db"].get<double>() - shift) <= 0.004);
  CHECK(std::fabs(d[0]["max_spl_half_percent_db"].get<double>() - d[1]["max_spl_half_percent_db"].get<double>() - shift) <= 0.004);
  CHECK(d[0]["max_spl_half_percent_db"].get<double>() < d[0]["max_spl_1_percent_db"].get<double>());
}

TEST_CASE("sweep on a capsule stage gives a pressure column and the maximum SPL at 0.5 % and 1 % THD") {
  const result r = run({"sweep", preset("phantom-mic-follower.toml"), "--drive", "94dBSPL,120dBSPL", "--json"});
  CAPTURE(r.err);
  REQUIRE(r.status == 0);
  const nlohmann::json j = nlohmann::json::parse(r.out);
  CHECK(j["points"][1]["drive_db_spl"].get<double>() == doctest::Approx(120.0).epsilon(1e-12));
  // The same figure compare gives: one search, one definition.
  const result c = run({"compare", preset("phantom-mic-follower.toml"), preset("phantom-mic-follower.toml"), "--json"});
  REQUIRE(c.status == 0);
  const nlohmann::json cj = nlohmann::json::parse(c.out);
  CHECK(j["max_spl_1_percent"]["db_spl"].get<double>() ==
        doctest::Approx(cj["designs"][0]["max_spl_1_percent_db"].get<double>()).epsilon(1e-9));
  CHECK(j["max_spl_half_percent"]["db_spl"].get<double>() ==
        doctest::Approx(cj["designs"][0]["max_spl_half_percent_db"].get<double>()).epsilon(1e-9));
  const result text = run({"sweep", preset("phantom-mic-follower.toml"), "--drive", "94dBSPL"});
  REQUIRE(text.status == 0);
  for (const char* part : {"pressure", "94.00 dB SPL", "max SPL at 0.5 % THD", "max SPL at 1 % THD"}) {
    CAPTURE(part);
    CHECK(text.out.find(part) != std::string::npos);
  }
}

}  // namespace test_sources
