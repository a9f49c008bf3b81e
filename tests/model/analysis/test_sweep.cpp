// Drive sweeps against closed forms, the small-signal analysis and themselves.
#include <cmath>
#include <numeric>

#include <doctest/doctest.h>

#include "base/error.hpp"
#include "base/units.hpp"
#include "model/circuit/network.hpp"
#include "model/circuit/operating_point.hpp"
#include "model/analysis/response.hpp"
#include "model/analysis/small_signal.hpp"
#include "model/circuit/stage_file.hpp"
#include "model/analysis/sweep.hpp"
#include "support/stages.hpp"

using namespace pinchoff;
using namespace pinchoff::model;

namespace {
const char* presets[] = {"bass-booster-9v.toml", "clean-preamp-18v.toml", "phantom-mic-follower.toml"};
stage preset(const std::string& name) { return read_stage_file(std::string(PINCHOFF_PRESETS_DIR) + "/" + name); }
}  // namespace

TEST_CASE("ideal square-law stage: H2 = A / (4 (VGSQ - VP)) and no H3") {
  // Gray, Hurst, Lewis & Meyer, distortion of a square-law device (from memory; CHECKS.md):
  // a gate driven by VGSQ + A cos wt gives HD2 = A / (4 (VGSQ - VP)) exactly. Here the gate
  // is DC-coupled to the generator (VGSQ = 0), the source grounded, lambda = 0, no gate
  // current, a resistive drain load: the drain current is the square law itself.
  const std::string text =
      "[supply]\nvolts = 30\n[jfet]\nidss = \"4m\"\nvp = -2\nis = 0\n[gate]\nresistor = \"1M\"\n[drain]\nresistor = \"2k\"\n";
  const stage st = test::stage_from(text);
  sweep_settings s;
  s.drives_vpk = {0.01, 0.05, 0.2};
  const sweep_result r = run_sweep(st, s);
  for (const sweep_point& p : r.points) {
    CAPTURE(p.drive_vpk);
    const double hd2 = p.drive_vpk / (4.0 * (0.0 - -2.0));
    CHECK(p.harmonics_dbc[0] == doctest::Approx(base::db_from_ratio(hd2)).epsilon(0.01 / 40));
    CHECK(p.harmonics_dbc[1] < -150.0);  // numerical noise only
  }
}

TEST_CASE("tiny-drive gain equals the small-signal gain") {
  // The same circuit linearised: against the complex small-signal solve at the simulated
  // frequency (the trapezoidal rule's frequency warping is (f/fs)^2-small at 384 kHz), and
  // against the mid-band gain of `bias`, where every capacitor is a short at 1 kHz, to
  // 0.01 dB as required.
  for (const std::string name : presets) {
    CAPTURE(name);
    const stage st = preset(name);
    sweep_settings s;
    s.drives_vpk = {1e-4};
    const sweep_result r = run_sweep(st, s);
    const network net = build_network(st);
    const operating_point op = solve_operating_point(net);
    const double ac_db = base::db_from_ratio(std::abs(response_at(net, op, r.frequency_hz).gain));
    const double mid_db = base::db_from_ratio(std::fabs(analyse_small_signal(net, op).gain_midband));
    CHECK(std::fabs(r.points[0].gain_db - ac_db) < 1e-3);
    // The same stage with every coupling and bypass capacitor 1000 times larger and no
    // junction capacitance, so that at 1 kHz each is a short (or open) as the mid-band
    // analysis assumes: the simulated gain must equal the mid-band gain.
    stage big = st;
    big.gate.coupling_cap_f *= 1000;
    big.source.bypass_cap_f *= 1000;
    big.output.coupling_cap_f *= 1000;
    big.supply.capacitance_f *= 1000;
    big.jfet.cgs_f = big.jfet.cgd_f = 0.0;
    const double sim_big = run_sweep(big, s).points[0].gain_db;
    CHECK(std::fabs(sim_big - mid_db) < 0.01);
  }
}

TEST_CASE("harmonics have converged in the oversampling at 8x") {
  // The criterion: H2..H5 change by less than 0.1 dB between 8x and 32x for a
  // 1 kHz fundamental wherever they are above -100 dBc.
  for (const std::string name : presets) {
    CAPTURE(name);
    const stage st = preset(name);
    sweep_settings s;
    s.drives_vpk = {0.05, 0.5, 3.0};
    const sweep_result a = run_sweep(st, s);
    s.oversample = 32;
    const sweep_result b = run_sweep(st, s);
    for (std::size_t i = 0; i < s.drives_vpk.size(); ++i)
      for (int h = 0; h < 4; ++h) {
        CAPTURE(s.drives_vpk[i]);
        CAPTURE(h + 2);
        const double x = a.points[i].harmonics_dbc[static_cast<std::size_t>(h)];
        const double y = b.points[i].harmonics_dbc[static_cast<std::size_t>(h)];
        if (x > -100.0 || y > -100.0) CHECK(std::fabs(x - y) < 0.1);
      }
  }
}

TEST_CASE("hard drive into every preset gives finite results") {
  for (const std::string name : presets) {
    CAPTURE(name);
    sweep_settings s;
    s.drives_vpk = {20.0};
    const sweep_result r = run_sweep(preset(name), s);
    const sweep_point& p = r.points[0];
    CHECK(std::isfinite(p.output_vpk));
    CHECK(std::isfinite(p.thd_percent));
    CHECK(std::isfinite(p.alias_dbc));
    CHECK(p.newton.failed == 0);
    CHECK(p.converged);
  }
}

TEST_CASE("aliasing falls with the oversampling factor while THD stays put") {
  // ENGINE.md (measured): folding, not integration accuracy, is what oversampling fixes:
  // the largest folded line fell from -19 dB at 1x to -34, -45 and below -93 dB at 2x, 4x
  // and 8x, while the in-band THD was the same at every factor. The record puts folded
  // lines between the harmonic bins, where alias_dbc sees them. A 3 V drive at about 5 kHz
  // clips the booster hard (about 50 % THD).
  double prev_alias = 0.0, thd_at_2x = 0.0;
  for (int os : {1, 2, 4, 8, 16}) {
    CAPTURE(os);
    sweep_settings s;
    s.frequency_hz = 4987.0;
    s.drives_vpk = {3.0};
    s.oversample = os;
    const sweep_point p = run_sweep(preset("bass-booster-9v.toml"), s).points[0];
    CAPTURE(p.alias_dbc);
    if (os > 1) CHECK(p.alias_dbc < prev_alias - 6.0);  // at least 6 dB per doubling
    if (os == 2) thd_at_2x = p.thd_db;
    if (os > 2) CHECK(std::fabs(p.thd_db - thd_at_2x) < 0.1);
    prev_alias = p.alias_dbc;
  }
  CHECK(prev_alias < -65.0);  // 16x
}

TEST_CASE("the record is whole cycles and the frequency is snapped") {
  for (double f : {20.0, 82.4, 1000.0, 4987.0, 19000.0}) {
    CAPTURE(f);
    const int m = record_samples(f, 384000.0, 3);
    CHECK(std::gcd(m, 3) == 1);
    const double snapped = 384000.0 * 3 / m;
    CHECK(std::fabs(snapped - f) <= 384000.0 * 3 / (double(m) * m) * 2);
  }
  sweep_settings s;
  s.drives_vpk = {0.1};
  s.frequency_hz = 24000.0;
  CHECK_THROWS_AS(validate(s), input_error);
}

TEST_CASE("a wrong sweep setting is named by its field, with its range and the value given") {
  // The command line maps each field to its option (cli/cmd_sweep.cpp); the model never
  // names an option.
  struct row {
    const char* field;
    sweep_settings s;
    const char* words;
  };
  auto with = [](auto change) {
    sweep_settings s;
    s.drives_vpk = {0.1};
    change(s);
    return s;
  };
  const row rows[] = {
      {"oversampling", with([](sweep_settings& s) { s.oversample = 100; }), "oversampling must be 1 to 64, got 100"},
      {"base_rate_hz", with([](sweep_settings& s) { s.base_rate_hz = 4000; }), "8 kHz to 768 kHz, got 4.00 kHz"},
      {"frequency_hz", with([](sweep_settings& s) { s.frequency_hz = 30000; }), "30.0 kHz is at or above the Nyquist limit"},
      {"frequency_hz", with([](sweep_settings& s) { s.frequency_hz = 0.5; }), "at least 1 Hz"},
      {"harmonics", with([](sweep_settings& s) { s.harmonics = 0; }), "1 to 100, got 0"},
      {"bandwidth_hz", with([](sweep_settings& s) { s.bandwidth_hz = 1e9; }), "below half the simulation rate (192 kHz)"},
      {"drives_vpk", with([](sweep_settings& s) { s.drives_vpk = {0.1, 0.0}; }), "above 0 V"},
      {"drives_vpk", with([](sweep_settings& s) { s.drives_vpk.clear(); }), "no drive levels"},
  };
  for (const row& r : rows) {
    const std::string words = r.words;
    CAPTURE(words);
    try {
      (void)plan_sweep(r.s);
      FAIL("accepted");
    } catch (const setting_error& e) {
      CHECK(e.field() == r.field);
      CHECK(std::string(e.what()).find(r.words) != std::string::npos);
      CHECK(std::string(e.what()).find("--") == std::string::npos);
    }
  }
}

TEST_CASE("a sweep run on a plan is the sweep run on its settings") {
  sweep_settings s;
  s.drives_vpk = {0.3};
  s.frequency_hz = 997.0;
  const stage st = preset("bass-booster-9v.toml");
  const sweep_plan plan = plan_sweep(s);
  const sweep_result a = run_sweep(st, plan), b = run_sweep(st, s);
  CHECK(plan.frequency_hz() == a.frequency_hz);  // the snapped frequency, as reported
  CHECK(a.frequency_hz == b.frequency_hz);
  CHECK(a.points[0].thd_percent == b.points[0].thd_percent);  // the same computation: bit for bit
  CHECK(a.points[0].output_vpk == b.points[0].output_vpk);
}

TEST_CASE("a sweep does not depend on the thread count") {
  sweep_settings s;
  s.drives_vpk = {0.01, 0.1, 1.0, 5.0};
  s.threads = 1;
  const sweep_result a = run_sweep(preset("clean-preamp-18v.toml"), s);
  s.threads = 2;
  const sweep_result b = run_sweep(preset("clean-preamp-18v.toml"), s);
  for (std::size_t i = 0; i < a.points.size(); ++i) {
    CHECK(a.points[i].output_vpk == b.points[i].output_vpk);
    CHECK(a.points[i].harmonics_dbc == b.points[i].harmonics_dbc);
  }
}
