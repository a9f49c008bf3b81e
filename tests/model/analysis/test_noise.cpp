// Noise at the operating point (model/analysis/noise.hpp) against closed forms.
#include <cmath>
#include <complex>
#include <numbers>
#include <string>
#include <vector>

#include <doctest/doctest.h>

#include "base/error.hpp"
#include "base/units.hpp"
#include "model/analysis/noise.hpp"
#include "model/analysis/small_signal.hpp"
#include "model/circuit/network.hpp"
#include "model/circuit/operating_point.hpp"
#include "model/circuit/stage_file.hpp"
#include "support/stages.hpp"

namespace test_noise {

using namespace pinchoff;
using namespace pinchoff::model;

namespace {
constexpr double k_boltzmann = 1.380649e-23;  // J/K, SI 2019 (exact)
constexpr double two_pi = 2.0 * std::numbers::pi;

struct solved {
  stage st;
  network net;
  operating_point op;
};
solved solve(const std::string& text) {
  solved s{test::stage_from(text), {}, {}};
  s.net = build_network(s.st);
  s.op = solve_operating_point(s.net);
  return s;
}
}  // namespace

TEST_CASE("a lone source resistor gives 4 k T R over the band, referred to the input") {
  // Closed form (Johnson 1928, Nyquist 1928): e^2 = 4 k T R B. 150 Ω at 300 K over 20 kHz is
  // -130.8 dBu, the thermal floor preamp makers quote (common practice).
  const double t = 300.0, r = 150.0;
  const double floor_v = std::sqrt(4.0 * k_boltzmann * t * r * 20000.0);
  CHECK(std::fabs(dbu_of_rms(floor_v) - (-130.8)) < 0.05);

  // A follower with no capacitors at all: the gain from the source's open-circuit voltage
  // is flat, and the source resistor's noise is a voltage in series with it, so referred
  // to the input it is 4 k T R at every frequency.
  const solved s = solve("topology = \"source-follower\"\ntemperature = 300\n[supply]\nvolts = 24\n"
                         "[signal]\nimpedance = 150\n[jfet]\nidss = \"6m\"\nvp = -2\nis = 0\n"
                         "[gate]\nresistor = \"1M\"\n[source]\nresistor = \"2.2k\"\n");
  noise_settings ns;
  ns.band_lo_hz = 20.0;
  ns.band_hi_hz = 20020.0;  // B = 20 kHz exactly
  const noise_result res = analyse_noise(s.net, s.op, ns);
  CHECK(std::fabs(res.temperature_k - t) < 1e-9);
  REQUIRE(res.has_source_resistance);
  const double referred = std::sqrt(res.from_source.unweighted) / res.gain_1k_abs;
  CAPTURE(referred);
  CHECK(std::fabs(referred / floor_v - 1.0) < 1e-6);
  for (const noise_point& p : res.density) {
    double src = 0.0;
    for (std::size_t j = 0; j < res.sources.size(); ++j)
      if (res.sources[j].of_source) src += p.source_v2_hz[j];
    CAPTURE(p.frequency_hz);
    CHECK(std::fabs(src / std::norm(p.gain) / (4.0 * k_boltzmann * t * r) - 1.0) < 1e-9);
  }
  // The stage adds its own: EIN above the floor, the noise figure above 0 dB.
  CHECK(res.input_v() > floor_v);
  CHECK(res.noise_figure_db > 0.0);
}

TEST_CASE("a common-source stage with a large drain resistor: input noise sqrt(8kT/(3 gm))") {
  // van der Ziel (Proc. IRE 50, 1962): channel noise (8/3) k T gm in saturation, referred to
  // the gate by 1/gm^2. The gate sits on the ideal generator (no source impedance, no
  // coupling capacitor), the source is bypassed by 1 F (159 µΩ at 1 kHz), and the drain
  // resistor's share, 3/(2 gm Rd) of the channel's power, is 4.5e-4 here (gm Rd = 3.3e3),
  // 2.3e-4 of the density.
  const solved s = solve("topology = \"common-source\"\ntemperature = 300\n[supply]\nvolts = 500\n"
                         "[jfet]\nidss = \"1m\"\nvp = -1\nis = 0\n[gate]\nresistor = \"1M\"\n"
                         "[drain]\nresistor = \"10M\"\n[source]\nresistor = \"30k\"\nbypass_cap = 1\n");
  const jfet_linear lin = linearise(s.net, s.op);
  CAPTURE(lin.gm_s);
  CAPTURE(s.op.at.vds_v);
  REQUIRE(s.op.at.region == jfet_region::saturation);
  CHECK(lin.gm_s * 10e6 > 3000.0);
  const double kt = k_boltzmann * 300.0;
  const double expected = std::sqrt(8.0 * kt / (3.0 * lin.gm_s));
  const std::vector<noise_source> src = noise_sources(s.net, s.op);
  for (double f : {1000.0, 10000.0}) {
    const noise_point p = noise_at(s.net, s.op, src, f);
    CAPTURE(f);
    CHECK(std::fabs(std::sqrt(p.input_v2_hz) / expected - 1.0) < 1e-3);  // the 0.1 %
    // The channel alone: exact to rounding.
    for (std::size_t j = 0; j < src.size(); ++j)
      if (src[j].mechanism == noise_mechanism::channel)
        CHECK(std::fabs(std::sqrt(p.source_v2_hz[j] / std::norm(p.gain)) / expected - 1.0) < 1e-6);
  }
}

TEST_CASE("a gate resistor shunted by the capsule: sqrt(4kTR)/|1 + j 2 pi f R C| at the gate") {
  // Closed form: the resistor's noise current 4kT/R into R || C (the capsule's other side is
  // its open-circuit voltage, an AC ground) gives sqrt(4kTR)/|1 + j w R C|. No stray, no
  // junction capacitance, is = 0, so R and C are alone at the gate.
  const solved s = solve("topology = \"source-follower\"\ntemperature = 300\n[supply]\nvolts = 24\n"
                         "[signal]\nkind = \"capsule\"\ncapacitance = \"50p\"\nsensitivity = \"12m\"\n"
                         "[jfet]\nidss = \"6m\"\nvp = -1.5\nis = 0\n[gate]\nresistor = \"1G\"\n[source]\nresistor = \"2.2k\"\n");
  network at_gate = s.net;
  at_gate.output_node = s.net.jfet().gate;  // read the noise at the gate
  const std::vector<noise_source> src = noise_sources(at_gate, s.op);
  const double r = 1e9, c = 50e-12, kt = k_boltzmann * 300.0;
  for (double f : {1.0, 3.18, 20.0, 100.0, 1000.0, 10000.0}) {
    const noise_point p = noise_at(at_gate, s.op, src, f);
    double gate_r = -1.0;
    for (std::size_t j = 0; j < src.size(); ++j)
      if (src[j].part == "gate.resistor") gate_r = p.source_v2_hz[j];
    const double expected = std::sqrt(4.0 * kt * r) / std::abs(std::complex<double>(1.0, two_pi * f * r * c));
    CAPTURE(f);
    CHECK(std::fabs(std::sqrt(gate_r) / expected - 1.0) < 1e-6);
  }
}

TEST_CASE("the contributions add up to the total, and the adjoint transfer equals the direct one") {
  // Superposition of uncorrelated sources (their powers add) and the adjoint network's
  // reciprocity (Director & Rohrer, IEEE Trans. Circuit Theory 16, 1969): the transfer of a
  // current injected between a and b, found by solving the transposed system once, equals
  // the output of a direct solve with that current. Checked on a two-stage chain with a
  // supply resistor, flicker noise and gate leakage, at every frequency of the sweep.
  std::string text = test::two_stage_text(18.0, 100.0, 8e-3, -2.0, 1000.0, 6800.0, 5e-3, -1.5, 820.0, 10000.0);
  const std::string extra = "flicker_coefficient = 1e-17\nflicker_exponent = 1.2\ngate_leakage = \"1n\"\n";
  for (std::size_t at = text.find("[stage.jfet]\n"); at != std::string::npos; at = text.find("[stage.jfet]\n", at + 1))
    text.insert(at + 13, extra);
  const solved s = solve(text);
  noise_settings ns;
  ns.points = 25;
  ns.band_points_per_decade = 40;
  const noise_result res = analyse_noise(s.net, s.op, ns);
  bool flicker = false, shot = false;
  for (const noise_source& src : res.sources) {
    flicker = flicker || src.mechanism == noise_mechanism::flicker;
    shot = shot || src.mechanism == noise_mechanism::gate_shot;
  }
  CHECK(flicker);
  CHECK(shot);
  const std::vector<jfet_linear> lins = linearise_all(s.net, s.op);
  for (const noise_point& p : res.density) {
    double direct_total = 0.0;
    for (const noise_source& src : res.sources) {
      ac_setup one;
      one.midband = false;
      one.s = {0.0, two_pi * p.frequency_hz};
      one.generator_v = 0.0;
      one.inject_a = src.a;
      one.inject_b = src.b;
      direct_total += std::norm(solve_small_signal(s.net, lins, one)[s.net.output_node]) * src.density(p.frequency_hz);
    }
    double sum = 0.0;
    for (double v : p.source_v2_hz) sum += v;
    CAPTURE(p.frequency_hz);
    CHECK(std::fabs(sum / p.output_v2_hz - 1.0) < 1e-12);
    CHECK(std::fabs(direct_total / p.output_v2_hz - 1.0) < 1e-9);
  }
  double share = 0.0, share_a = 0.0, share_1k = 0.0, stage_share = 0.0;
  for (const noise_contribution& c : res.contributions) {
    share += c.share_percent;
    share_a += c.share_percent_a;
    share_1k += c.share_percent_1k;
  }
  for (const noise_stage_figures& st : res.stages) stage_share += st.share_percent;
  for (const noise_contribution& c : res.contributions)
    if (c.stage < 0) stage_share += c.share_percent;
  CHECK(std::fabs(share - 100.0) < 1e-9);
  CHECK(std::fabs(share_a - 100.0) < 1e-9);
  CHECK(std::fabs(share_1k - 100.0) < 1e-9);
  CHECK(std::fabs(stage_share - 100.0) < 1e-9);
  REQUIRE(res.stages.size() == 2);
  // The last stage's output is the load.
  CHECK(std::fabs(res.stages[1].at_output.unweighted / res.output.unweighted - 1.0) < 1e-12);
  for (std::size_t k = 1; k < res.contributions.size(); ++k)
    CHECK(res.contributions[k - 1].share_percent_a >= res.contributions[k].share_percent_a);
}

TEST_CASE("the channel's thermal noise in the triode region and at vds = 0") {
  // van der Ziel's long-channel form, 4 k T gd0 (2/3)(1 + a + a^2)/(1 + a), a = 1 - vds/vdsat:
  // at vds -> 0 (a = 1) it is the channel resistance's own thermal noise 4 k T gd0
  // (Johnson-Nyquist). A stage biased hard into triode (a drain resistor far larger than its
  // saturation limit) sits near vds = 0.
  const solved s = solve("topology = \"common-source\"\ntemperature = 300\n[supply]\nvolts = 9\n"
                         "[jfet]\nidss = \"10m\"\nvp = -3\nis = 0\n[gate]\nresistor = \"1M\"\n"
                         "[drain]\nresistor = \"1M\"\n[source]\nresistor = \"1\"\n");
  REQUIRE(s.op.at.region == jfet_region::triode);
  const double vgs = s.op.at.vgs_v, vds = s.op.at.vds_v, vov = vgs + 3.0;
  const double gd0 = 2.0 * 10e-3 / 9.0 * vov;
  const double a = 1.0 - vds / vov;
  const double kt = k_boltzmann * 300.0;
  CAPTURE(vds);
  for (const noise_source& src : noise_sources(s.net, s.op))
    if (src.mechanism == noise_mechanism::channel) {
      CHECK(std::fabs(src.white_a2_hz / (4.0 * kt * gd0 * (2.0 / 3.0) * (1 + a + a * a) / (1 + a)) - 1.0) < 1e-9);
      CHECK(std::fabs(src.white_a2_hz / (4.0 * kt * gd0) - 1.0) < 1e-3);  // a is within 1e-3 of 1
    }
}

TEST_CASE("a capsule's self-noise in dB(A) SPL") {
  // IEC 60268-4 usage: L = 94 + 20 log10(Vn / S); 1 Pa is 94 dB SPL (20 log10(1/20e-6) = 93.98,
  // rounded to 94 by that usage). 1 µV against 10 mV/Pa is 14 dB(A).
  CHECK(std::fabs(self_noise_db_spl(1e-6, 10e-3) - 14.0) < 1e-12);
  CHECK(std::fabs(dbu_of_rms(0.7745966692414834)) < 1e-12);
  CHECK(std::fabs(dbv_of_rms(1.0)) < 1e-12);
}

TEST_CASE("noise settings are checked by field") {
  const solved s = solve(test::self_bias_text(12.0, 5e-3, -2.0, 1000.0, 4700.0));
  noise_settings bad;
  bad.band_lo_hz = 20e3;
  bad.band_hi_hz = 20.0;
  try {
    analyse_noise(s.net, s.op, bad);
    FAIL("no error");
  } catch (const setting_error& e) {
    CHECK(e.field() == "band");
  }
  noise_settings bad_f;
  bad_f.from_hz = 0.0;
  CHECK_THROWS_AS(analyse_noise(s.net, s.op, bad_f), setting_error);
}

}  // namespace test_noise
