// Intermodulation: the analysis on synthetic records, and the square law in closed form.
#include <cmath>
#include <numbers>
#include <vector>

#include <doctest/doctest.h>

#include "base/error.hpp"
#include "dsp/intermod.hpp"
#include "model/analysis/imd.hpp"
#include "support/stages.hpp"

namespace test_imd {

using namespace pinchoff;

namespace {
constexpr double two_pi = 2.0 * std::numbers::pi;
// A coherent record with tones and lines at chosen bins (peak volts, sine phase).
std::vector<double> record(std::size_t n, const std::vector<std::pair<std::size_t, double>>& lines) {
  std::vector<double> x(n, 0.0);
  for (auto [k, a] : lines)
    for (std::size_t i = 0; i < n; ++i) x[i] += a * std::sin(two_pi * double(k) * double(i) / double(n) + 0.3 * double(k));
  return x;
}
// The ideal square-law stage: gate DC-coupled to the generator (VGSQ = 0), grounded
// source, lambda = 0, no gate current, resistive drain load.
const std::string square_law =
    "[supply]\nvolts = 30\n[jfet]\nidss = \"4m\"\nvp = -2\nis = 0\n[gate]\nresistor = \"1M\"\n[drain]\nresistor = \"2k\"\n";
}  // namespace

TEST_CASE("SMPTE analysis reads known sidebands") {
  // Definition (SMPTE RP120; CHECKS.md): d_n = (U(f2 - n f1) + U(f2 + n f1)) / U(f2).
  const std::size_t n = 6400, k1 = 1, k2 = 117;
  const auto x = record(n, {{k1, 1.0}, {k2, 0.25}, {k2 - 1, 0.01}, {k2 + 1, 0.005}, {k2 - 2, 0.001}, {k2 + 3, 0.0002}});
  const dsp::smpte_imd r = dsp::analyse_smpte(x, 384000.0, k1, k2, 4);
  REQUIRE(r.orders.size() == 4);
  CHECK(r.f1_hz == doctest::Approx(60.0).epsilon(1e-12));
  CHECK(r.orders[0].d_ratio == doctest::Approx(0.015 / 0.25).epsilon(1e-10));
  CHECK(r.orders[1].d_ratio == doctest::Approx(0.001 / 0.25).epsilon(1e-9).scale(0));
  CHECK(r.orders[2].d_ratio == doctest::Approx(0.0002 / 0.25).epsilon(1e-8).scale(0));
  CHECK(r.orders[3].d_ratio < 1e-12);
  const double total = std::sqrt(std::pow(0.06, 2) + std::pow(0.004, 2) + std::pow(0.0008, 2));
  CHECK(r.imd_ratio == doctest::Approx(total).epsilon(1e-9));
}

TEST_CASE("difference-frequency analysis reads known products") {
  // Definition (IEC 60268-3; CHECKS.md): d2 = U(f2 - f1)/U_ref, d3 = (U(2f1 - f2) +
  // U(2f2 - f1))/U_ref, U_ref = 2 U(f2).
  const std::size_t n = 384, k1 = 19, k2 = 20;
  const auto x = record(n, {{k1, 0.5}, {k2, 0.5}, {1, 0.002}, {18, 0.003}, {21, 0.001}});
  const dsp::difference_imd r = dsp::analyse_difference(x, 384000.0, k1, k2);
  CHECK(r.d2_ratio == doctest::Approx(0.002).epsilon(1e-9).scale(0));
  CHECK(r.d3_ratio == doctest::Approx(0.004).epsilon(1e-9).scale(0));
  CHECK_THROWS_AS(dsp::analyse_difference(x, 384000.0, 5, 20), input_error);  // wider than an octave
}

TEST_CASE("square law: SMPTE sidebands are 4 HD2 of the low tone, nothing beyond") {
  // Closed form: with id = beta (vgst0 + x)^2 and x = A1 cos w1 t + A2 cos w2 t, the
  // sidebands w2 +- w1 each have beta A1 A2 against 2 beta vgst0 A2 at w2, so
  // d_1 = A1 / vgst0 = 4 HD2 of the low tone (HD2 = A1 / (4 vgst0), Gray, Hurst, Lewis &
  // Meyer; from memory), and a square law makes no w2 +- n w1 for n >= 2.
  model::imd_settings s;
  s.level_vpk = 0.05;
  const model::imd_result r = model::run_imd(test::stage_from(square_law), s);
  const double a1 = 0.8 * 0.05, vgst0 = 2.0;
  REQUIRE(r.smpte.orders.size() >= 2);
  CHECK(r.smpte.orders[0].d_ratio == doctest::Approx(a1 / vgst0).epsilon(1e-6).scale(0));
  CHECK(r.smpte.orders[1].d_ratio < 1e-7);
  CHECK(r.converged);
}

TEST_CASE("square law: twin-tone d2 equals HD2 at the per-tone level, no d3") {
  // Closed form: the difference line has beta A^2 against U_ref = 2 * 2 beta vgst0 A, so
  // d2 = A / (4 vgst0) = HD2 of one tone of peak A; third-order products need a cubic term.
  model::imd_settings s;
  s.method = model::imd_method::twin_tone;
  s.level_vpk = 0.1;
  const model::imd_result r = model::run_imd(test::stage_from(square_law), s);
  const double a = 0.05, vgst0 = 2.0;
  CHECK(r.difference.d2_ratio == doctest::Approx(a / (4.0 * vgst0)).epsilon(1e-6).scale(0));
  CHECK(r.difference.d3_ratio < 1e-7);
}

TEST_CASE("the tones are snapped to whole cycles of the record") {
  model::imd_settings s;
  s.method = model::imd_method::din;
  const model::imd_result r = model::run_imd(test::stage_from(square_law), s);
  CHECK(r.f1_hz == doctest::Approx(250.0).epsilon(1e-12));  // DIN 45403: 250 Hz + 8 kHz
  CHECK(r.f2_hz == doctest::Approx(8000.0).epsilon(1e-12));
  s.base_rate_hz = 16000.0;
  CHECK_THROWS_AS(model::run_imd(test::stage_from(square_law), s), input_error);
}

}  // namespace test_imd
