// Sources at the command line: levels in dB SPL on a capsule stage, and the bundled
// microphone preset's response checked by hand.
#include <cmath>
#include <numbers>
#include <string>

#include <doctest/doctest.h>
#include <nlohmann/json.hpp>

#include "support/cli_runner.hpp"

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
  CHECK(in["pickup_capacitance_f"].get<double>() == doctest::Approx(420e-12).epsilon(1e-12));
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
