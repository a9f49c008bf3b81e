// The square-law device equations against their closed forms.
#include <cmath>

#include <doctest/doctest.h>

#include "model/device/jfet.hpp"

namespace test_jfet {

using namespace pinchoff::model;

namespace {
jfet_params part(double idss, double vp, double lambda = 0.0) {
  jfet_params p;
  p.idss_a = idss;
  p.vp_v = vp;
  p.lambda_per_v = lambda;
  return p;
}
}  // namespace

TEST_CASE("saturation current follows Shockley's equation") {
  // Shockley: ID = IDSS (1 - VGS/VP)^2 (Boylestad & Nashelsky ch. 6; any edition).
  struct row {
    const char* source;
    double idss, vp, vgs, id;
  };
  const row rows[] = {
      {"closed form: id = idss at vgs = 0", 8e-3, -4.0, 0.0, 8e-3},
      {"closed form: Shockley at vgs = vp/2 gives idss/4", 8e-3, -4.0, -2.0, 2e-3},
      {"Boylestad & Nashelsky Ex. 7.1 (from memory): IDSS 10 mA, VP -8 V, VGS -2 V", 10e-3, -8.0, -2.0, 5.625e-3},
      {"closed form: cutoff at vgs = vp", 5e-3, -1.8, -1.8, 0.0},
      {"closed form: cutoff below vp", 5e-3, -1.8, -2.5, 0.0},
  };
  for (const row& r : rows) {
    CAPTURE(r.source);
    const channel_eval c = drain_current(part(r.idss, r.vp), r.vgs, 10.0);
    CHECK(c.id_a == doctest::Approx(r.id).epsilon(1e-12).scale(1e-3));
  }
}

TEST_CASE("triode current and channel-length modulation follow the level-1 model") {
  // SPICE2 level-1 JFET (Massobrio & Antognetti; from memory):
  // triode id = beta vds (2 vgst - vds)(1 + lambda vds), saturation beta vgst^2 (1 + lambda vds).
  const jfet_params p = part(6e-3, -2.0, 0.02);
  const double beta = 6e-3 / 4.0;
  struct row {
    const char* source;
    double vgs, vds, id;
  };
  const row rows[] = {
      {"level-1 triode", -0.5, 0.5, beta * 0.5 * (2 * 1.5 - 0.5) * (1 + 0.02 * 0.5)},
      {"level-1 triode near the edge", -1.0, 0.99, beta * 0.99 * (2 * 1.0 - 0.99) * (1 + 0.02 * 0.99)},
      {"level-1 saturation with lambda", -1.0, 6.0, beta * 1.0 * (1 + 0.02 * 6.0)},
      {"level-1 inverse mode: id(vgs, -v) = -id(vgs + v, v)", -1.0, -0.3,
       -beta * 0.3 * (2 * (-1.0 + 0.3 + 2.0) - 0.3) * (1 + 0.02 * 0.3)},
  };
  for (const row& r : rows) {
    CAPTURE(r.source);
    CHECK(drain_current(p, r.vgs, r.vds).id_a == doctest::Approx(r.id).epsilon(1e-12));
  }
}

TEST_CASE("derivatives agree with central differences in every region") {
  const jfet_params p = part(5e-3, -1.8, 0.01);
  const double h = 1e-6;
  for (double vgs : {-2.5, -1.5, -0.9, -0.2, 0.0, 0.3}) {
    for (double vds : {-2.0, -0.4, 0.0, 0.2, 0.9, 1.6, 5.0}) {
      CAPTURE(vgs);
      CAPTURE(vds);
      const channel_eval c = drain_current(p, vgs, vds);
      const double gm = (drain_current(p, vgs + h, vds).id_a - drain_current(p, vgs - h, vds).id_a) / (2 * h);
      const double gds = (drain_current(p, vgs, vds + h).id_a - drain_current(p, vgs, vds - h).id_a) / (2 * h);
      // Central differences are O(h^2) accurate away from the region edges; at an edge
      // the first derivative is continuous, so the error stays O(h).
      CHECK(c.gm_s == doctest::Approx(gm).epsilon(1e-5).scale(1e-3));
      CHECK(c.gds_s == doctest::Approx(gds).epsilon(1e-5).scale(1e-3));
    }
  }
}

TEST_CASE("current and slope are continuous at the triode/saturation edge") {
  // Level-1 model is C1 at vds = vgst (ENGINE.md).
  const jfet_params p = part(5e-3, -1.8, 0.01);
  const double vgs = -0.6, edge = vgs - p.vp_v;
  const channel_eval below = drain_current(p, vgs, edge * (1 - 1e-12));
  const channel_eval above = drain_current(p, vgs, edge * (1 + 1e-12));
  CHECK(below.id_a == doctest::Approx(above.id_a).epsilon(1e-9).scale(0));
  CHECK(below.gm_s == doctest::Approx(above.gm_s).epsilon(1e-9).scale(0));
  CHECK(below.gds_s == doctest::Approx(above.gds_s).epsilon(1e-6).scale(1e-6));
}

TEST_CASE("gm equals gm0 (1 - VGS/VP)") {
  // Boylestad & Nashelsky Ex. 8.1 (numbers from memory): IDSS 8 mA, VP -4 V: gm0 = 2 IDSS/|VP|
  // = 4 mS; gm = 3.5 / 2.5 / 1.5 mS at VGS = -0.5 / -1.5 / -2.5 V.
  const jfet_params p = part(8e-3, -4.0);
  struct row {
    double vgs, gm;
  };
  for (row r : {row{0.0, 4e-3}, row{-0.5, 3.5e-3}, row{-1.5, 2.5e-3}, row{-2.5, 1.5e-3}}) {
    CAPTURE(r.vgs);
    CHECK(drain_current(p, r.vgs, 10.0).gm_s == doctest::Approx(r.gm).epsilon(1e-12));
  }
}

TEST_CASE("gate junction is the diode equation") {
  jfet_params p = part(5e-3, -1.8);
  p.is_a = 1e-14;
  p.n = 1.2;
  const double vt = thermal_voltage(300.15);
  // CHECKS.md: kT/q at 300.15 K = 25.865 mV (exact SI k and q).
  CHECK(vt == doctest::Approx(25.865e-3).epsilon(2e-5).scale(0));
  for (double v : {-5.0, -0.1, 0.0, 0.3, 0.6}) {
    CAPTURE(v);
    const junction_eval j = junction_current(p, v, vt);
    // Shockley diode equation: i = Is (exp(v / (n Vt)) - 1), g = Is exp(v/(n Vt)) / (n Vt).
    CHECK(j.i_a == doctest::Approx(1e-14 * (std::exp(v / (1.2 * vt)) - 1)).epsilon(1e-12).scale(1e-20));
    CHECK(j.g_s == doctest::Approx(1e-14 * std::exp(v / (1.2 * vt)) / (1.2 * vt)).epsilon(1e-12).scale(1e-20));
  }
  // Far forward the exponential is continued linearly and stays finite.
  const junction_eval far = junction_current(p, 50.0, vt);
  CHECK(std::isfinite(far.i_a));
  CHECK(std::isfinite(far.g_s));
}

TEST_CASE("regions are classified as the model defines them") {
  const jfet_params p = part(5e-3, -1.8);
  CHECK(region_of(p, -2.0, 5.0) == jfet_region::cutoff);
  CHECK(region_of(p, -1.0, 0.5) == jfet_region::triode);
  CHECK(region_of(p, -1.0, 0.9) == jfet_region::saturation);
}

TEST_CASE("junction limiting keeps a large forward step logarithmic") {
  // Nagel 1975 (pnjlim): above vcrit a step larger than 2 n Vt is compressed.
  jfet_params p = part(5e-3, -1.8);
  const double vt = thermal_voltage(300.15);
  const double vcrit = critical_voltage(p, vt);
  CHECK(vcrit == doctest::Approx(vt * std::log(vt / (std::sqrt(2.0) * 1e-14))).epsilon(1e-12));
  const double lim = limit_junction(5.0, 0.6, vt, vcrit);
  CHECK(lim < 1.0);
  CHECK(lim > 0.6);
  CHECK(limit_junction(0.3, 0.2, vt, vcrit) == 0.3);  // below vcrit: untouched
}

}  // namespace test_jfet
