// Temperature drift of the rest point (model/analysis/temperature_drift.hpp) against the
// laws it implements and the zero-TC point's closed form.
#include <cmath>
#include <string>

#include <doctest/doctest.h>

#include "base/error.hpp"
#include "model/analysis/temperature_drift.hpp"
#include "model/circuit/network.hpp"
#include "model/circuit/operating_point.hpp"
#include "support/stages.hpp"

namespace test_temperature_drift {

using namespace pinchoff;
using namespace pinchoff::model;

namespace {
// A grounded-source square-law stage: the gate at 0 V through 1 Mohm, so VGS = 0 and ID = IDSS
// at every temperature (is = 0: no gate current; lambda = 0).
stage grounded(double idss, double vp, const std::string& extra = "") {
  return test::stage_from("[supply]\nvolts = 30\n[jfet]\nidss = " + test::num(idss) + "\nvp = " + test::num(vp) +
                          "\nis = 0\n" + extra + "[gate]\nresistor = \"1M\"\n[drain]\nresistor = \"2k\"\n");
}
double id_at(const stage& st, double t_k) {
  const stage s = at_temperature(st, t_k);
  const network net = build_network(s);
  return solve_operating_point(net).at.id_a;
}
}  // namespace

TEST_CASE("temperature laws: VP moves -2.2 mV/K, beta as T^-1.5, the gate leakage doubles every 10 K") {
  // The laws as the header cites them (Horowitz & Hill; Sze & Ng; common practice; from memory).
  const stage st = grounded(4e-3, -2.0, "gate_leakage = \"10p\"\n");
  const double t0 = st.temperature_k;
  for (double dt : {-27.0, 10.0, 23.0}) {
    CAPTURE(dt);
    const stage s = at_temperature(st, t0 + dt);
    const double vp = -2.0 - 2.2e-3 * dt;
    const double beta = 4e-3 / 4.0 * std::pow((t0 + dt) / t0, -1.5);
    CHECK(std::fabs(s.jfet.vp_v - vp) < 1e-12);
    CHECK(std::fabs(s.jfet.idss_a / (beta * vp * vp) - 1.0) < 1e-12);
    CHECK(std::fabs(s.jfet.gate_leakage_a / (10e-12 * std::exp2(dt / 10.0)) - 1.0) < 1e-12);
    CHECK(s.temperature_k == t0 + dt);
  }
  // A p-channel part mirrors: VP > 0 grows as it warms.
  stage p = st;
  p.pol = polarity::p;
  p.jfet.vp_v = 2.0;
  CHECK(std::fabs(at_temperature(p, t0 + 10.0).jfet.vp_v - (2.0 + 0.022)) < 1e-12);
}

TEST_CASE("the zero-TC drain current is the closed form's, and the model's ID is stationary there") {
  // closed form (the header's): at a fixed VGS, dID/dT = 0 where VGS - VP = 2 T dVP/dT / m,
  // so I_ZTC = IDSS (2 T dVP/dT / (m VP))^2; 0.8804 V above VP at 300.15 K with
  // dVP/dT = -2.2 mV/K and m = -1.5.
  const double t0 = default_temperature_k;
  const double vov = 2.0 * t0 * -2.2e-3 / -1.5;
  CHECK(std::fabs(vov - 0.88044) < 1e-5);
  for (double vp : {-0.5, -1.0, -2.0, -3.0}) {
    CAPTURE(vp);
    const stage st = grounded(5e-3, vp);
    const zero_tc_point z = zero_tc(st.jfet, st.pol, t0);
    CHECK(std::fabs(z.vov_v / vov - 1.0) < 1e-12);
    CHECK(std::fabs(z.id_a / (5e-3 * std::pow(vov / vp, 2)) - 1.0) < 1e-12);
    CHECK(std::fabs(z.vgs_v - (vp + vov)) < 1e-12);
    CHECK(z.below_idss == (vp + vov <= 0.0));
  }
  // With VGS = 0 held by the circuit, the stage sits at the zero-TC point when VP = -vov:
  // the drain current's slope in T there is 0 up to second order, against a part 0.5 V
  // either side of it, whose slopes have the signs the closed form gives (above the ZTC
  // overdrive the mobility wins, ID falls; below, the pinch-off shift wins, ID rises).
  auto slope = [&](double vp) {
    const stage st = grounded(5e-3, vp);
    return (id_at(st, t0 + 1.0) - id_at(st, t0 - 1.0)) / 2.0 / id_at(st, t0);  // 1/K
  };
  const double at_ztc = slope(-vov), above = slope(-vov - 0.5), below = slope(-vov + 0.5);
  CAPTURE(at_ztc);
  CAPTURE(above);
  CAPTURE(below);
  // closed form: d ln ID / dT = m / T - 2 dVP/dT / (VGS - VP): at VP = -vov it is 0, and the
  // central difference over +-1 K errs by its second-order term, below 1e-6 /K here.
  CHECK(std::fabs(at_ztc) < 1e-6);
  CHECK(std::fabs(above - (-1.5 / t0 + 2.0 * 2.2e-3 / (vov + 0.5))) < 1e-6);
  CHECK(std::fabs(below - (-1.5 / t0 + 2.0 * 2.2e-3 / (vov - 0.5))) < 1e-6);
  CHECK(above < 0.0);
  CHECK(below > 0.0);
}

TEST_CASE("temperature drift of a self-biased stage: every point solved, the reference reproduced") {
  const stage st = test::stage_from(test::self_bias_text(9.0, 6e-3, -2.5, 680.0, 3300.0, "bypass_cap = \"47u\"\n"));
  const double t0 = st.temperature_k;
  const temperature_drift d = analyse_temperature_drift(st, {273.15, t0, 323.15});
  REQUIRE(d.points.size() == 3);
  for (const drift_point& p : d.points) CHECK(p.solved);
  CHECK(std::fabs(d.points[1].stages[0].id_a / d.rest[0].id_a - 1.0) < 1e-12);
  // The bias sits above the zero-TC current (Vov = VGS - VP > 0.88 V): ID falls as it warms.
  CHECK(d.rest[0].vgs_v - -2.5 > d.zero_tc[0].vov_v);
  CHECK(d.points[2].stages[0].id_a < d.points[0].stages[0].id_a);
  // A law out of its range is refused by its field.
  temperature_law_setting bad;
  bad.vp_drift_v_per_k = 2e-3;
  CHECK_THROWS_AS(analyse_temperature_drift(st, {t0}, bad), setting_error);
  // A pinch-off crossing 0 V makes that point unsolved, with the reason.
  const temperature_drift far = analyse_temperature_drift(grounded(1e-3, -0.05), {t0 - 40.0});
  CHECK_FALSE(far.points[0].solved);
  CHECK(far.points[0].failure.find("would cross 0 V") != std::string::npos);
}

TEST_CASE("a part's own coefficients ([jfet] vp_drift, beta_exponent) move it by its own law; a setting overrides them") {
  // The laws of the header with the part's coefficients in place of the defaults: VP(T) =
  // VP(T0) + dVP/dT (T - T0), beta(T) = beta(T0) (T / T0)^m (closed form).
  const double t0 = default_temperature_k, dt = 23.0;
  const stage own = grounded(4e-3, -2.0, "vp_drift = \"-3.1mV/K\"\nbeta_exponent = -2.2\n");
  REQUIRE(own.tempco.vp_drift_v_per_k);
  CHECK(std::fabs(*own.tempco.vp_drift_v_per_k / -3.1e-3 - 1.0) < 1e-12);
  CHECK(*own.tempco.beta_exponent == -2.2);
  auto check_law = [&](const stage& s, double drift, double m) {
    const double vp = -2.0 + drift * dt;
    const double beta = 4e-3 / 4.0 * std::pow((t0 + dt) / t0, m);
    CHECK(std::fabs(s.jfet.vp_v - vp) < 1e-12);
    CHECK(std::fabs(s.jfet.idss_a / (beta * vp * vp) - 1.0) < 1e-12);
  };
  check_law(at_temperature(own, t0 + dt), -3.1e-3, -2.2);
  const part_law l = law_of(own, 0);
  CHECK(l.vp_drift_from == coefficient_source::part);
  CHECK(l.beta_exponent_from == coefficient_source::part);
  // A setting wins over the part's own, coefficient by coefficient.
  temperature_law_setting set;
  set.vp_drift_v_per_k = -1.0e-3;
  check_law(at_temperature(own, t0 + dt, set), -1.0e-3, -2.2);
  CHECK(law_of(own, 0, set).vp_drift_from == coefficient_source::setting);
  CHECK(law_of(own, 0, set).beta_exponent_from == coefficient_source::part);
  // A p-channel part gives its drift in real signs (VP > 0 grows): mirrored, the same law.
  const stage p = test::stage_from("[supply]\nvolts = -30\n[jfet]\npolarity = \"p\"\nidss = \"4m\"\nvp = 2\nis = 0\n"
                                   "vp_drift = \"3.1m\"\nbeta_exponent = -2.2\n[gate]\nresistor = \"1M\"\n[drain]\n"
                                   "resistor = \"2k\"\n");
  const stage pw = at_temperature(p, t0 + dt);
  CHECK(std::fabs(pw.jfet.vp_v - (2.0 + 3.1e-3 * dt)) < 1e-12);
  CHECK(std::fabs(pw.jfet.idss_a / at_temperature(own, t0 + dt).jfet.idss_a - 1.0) < 1e-12);
  // In a chain each stage's part takes its own: stage 2's keys leave stage 1 on the defaults.
  const stage chain = test::stage_from(
      "[supply]\nvolts = 9\n[output]\nload = \"100k\"\n"
      "[[stage]]\n[stage.jfet]\nidss = \"5m\"\nvp = -1.8\n[stage.gate]\ncoupling_cap = \"100n\"\nresistor = \"1M\"\n"
      "[stage.drain]\nresistor = \"3.3k\"\n[stage.source]\nresistor = \"680\"\n[stage.output]\ncoupling_cap = \"100n\"\n"
      "[[stage]]\nbetween = [ { pot = \"100k\", position = 0.5 } ]\n[stage.jfet]\nidss = \"5m\"\nvp = -1.8\nvp_drift = \"-4m\"\nbeta_exponent = -1\n[stage.gate]\n"
      "coupling_cap = \"100n\"\nresistor = \"1M\"\n[stage.drain]\nresistor = \"3.3k\"\n[stage.source]\n"
      "resistor = \"680\"\n[stage.output]\ncoupling_cap = \"1u\"\n");
  const stage cw = at_temperature(chain, t0 + dt);
  CHECK(std::fabs(cw.part(0).jfet.vp_v - (-1.8 - 2.2e-3 * dt)) < 1e-12);
  CHECK(std::fabs(cw.part(1).jfet.vp_v - (-1.8 - 4e-3 * dt)) < 1e-12);
  CHECK(std::fabs(cw.part(1).jfet.idss_a / (5e-3 / (1.8 * 1.8) * (t0 / (t0 + dt)) * std::pow(1.8 + 4e-3 * dt, 2)) - 1.0) <
        1e-12);
  const temperature_drift d = analyse_temperature_drift(chain, {t0 + dt});
  REQUIRE(d.laws.size() == 2);
  CHECK(d.laws[0].vp_drift_from == coefficient_source::law_default);
  CHECK(std::fabs(d.laws[1].law.vp_drift_v_per_k / -4e-3 - 1.0) < 1e-12);
  CHECK(std::fabs(d.zero_tc[1].vov_v - 2.0 * t0 * -4e-3 / -1.0) < 1e-12);  // closed form with its own law
}

}  // namespace test_temperature_drift
