// DC operating point against closed forms and textbook worked examples.
#include <cmath>

#include <doctest/doctest.h>

#include "model/circuit/network.hpp"
#include "model/circuit/operating_point.hpp"
#include "support/stages.hpp"

namespace test_operating_point {

using namespace pinchoff;
using namespace pinchoff::model;

namespace {

// Closed-form self/divider bias with the square law, lambda = 0, no gate current:
// vgs = vg - id rs and id = idss (1 - vgs/vp)^2 give a quadratic in id; the physical
// root is the one with vgs above vp (Boylestad & Nashelsky, ch. 7, any edition).
double closed_form_id(double idss, double vp, double rs, double vg) {
  // Let u = 1 - (vg - id rs)/vp = c + k id with c = 1 - vg/vp, k = rs/vp (< 0).
  const double c = 1.0 - vg / vp, k = rs / vp;
  // id = idss (c + k id)^2  ->  idss k^2 id^2 + (2 idss c k - 1) id + idss c^2 = 0
  const double a = idss * k * k, b = 2.0 * idss * c * k - 1.0, cc = idss * c * c;
  const double disc = std::sqrt(b * b - 4.0 * a * cc);
  const double r1 = (-b - disc) / (2.0 * a), r2 = (-b + disc) / (2.0 * a);
  // Physical root: u = c + k id > 0.
  return (c + k * r1 > 0) ? r1 : r2;
}

}  // namespace

TEST_CASE("self bias matches the closed-form quadratic over a grid of parts") {
  // Closed form (see closed_form_id); tolerance 1e-9 relative as the solver converges
  // to ~1e-12 on the step.
  for (double idss : {1e-3, 5e-3, 12e-3, 30e-3}) {
    for (double vp : {-0.5, -1.8, -4.0, -8.0}) {
      for (double rs : {100.0, 1e3, 10e3}) {
        CAPTURE(idss);
        CAPTURE(vp);
        CAPTURE(rs);
        const stage s = test::stage_from(test::self_bias_text(60.0, idss, vp, rs, 100.0));
        const network net = build_network(s);
        const operating_point op = solve_operating_point(net);
        const double id = closed_form_id(idss, vp, rs, 0.0);
        CHECK(op.at.id_a == doctest::Approx(id).epsilon(1e-9).scale(0));
        CHECK(op.at.vgs_v == doctest::Approx(-id * rs).epsilon(1e-9));
        CHECK(op.at.region == jfet_region::saturation);
      }
    }
  }
}

TEST_CASE("textbook self-bias example") {
  // Boylestad & Nashelsky, Electronic Devices and Circuit Theory, Ex. 7.2 (numbers from
  // memory, arithmetic verified in CHECKS.md): IDSS 8 mA, VP -6 V, RS 1 k, RD 3.3 k,
  // RG 1 M, VDD 20 V -> exact quadratic ID 2.5876 mA, VGS -2.5876 V, VDS 8.873 V.
  const stage s = test::stage_from(test::self_bias_text(20.0, 8e-3, -6.0, 1e3, 3.3e3));
  const operating_point op = solve_operating_point(build_network(s));
  CHECK(op.at.id_a == doctest::Approx(2.5876e-3).epsilon(5e-5).scale(0));
  CHECK(op.at.vgs_v == doctest::Approx(-2.5876).epsilon(5e-5));
  CHECK(op.at.vds_v == doctest::Approx(8.873).epsilon(1e-4));
}

TEST_CASE("textbook divider-bias example") {
  // Boylestad & Nashelsky Ex. 7.5 (numbers from memory, verified in CHECKS.md): VDD 16 V,
  // R1 2.1 M, R2 270 k, RD 2.4 k, RS 1.5 k, IDSS 8 mA, VP -4 V -> VG 1.82 V; exact
  // ID 2.4163 mA, VGS -1.8017 V, VDS 6.576 V.
  const std::string text =
      "[supply]\nvolts = 16\n[jfet]\nidss = \"8m\"\nvp = -4\nis = 0\n[gate]\ncoupling_cap = \"100n\"\n"
      "bias_top = \"2.1M\"\nbias_bottom = \"270k\"\n[drain]\nresistor = \"2.4k\"\n[source]\nresistor = \"1.5k\"\n";
  const operating_point op = solve_operating_point(build_network(test::stage_from(text)));
  CHECK(op.at.vg_v == doctest::Approx(1.82).epsilon(1e-3));
  CHECK(op.at.id_a == doctest::Approx(2.4163e-3).epsilon(5e-5).scale(0));
  CHECK(op.at.vgs_v == doctest::Approx(-1.8017).epsilon(5e-5));
  CHECK(op.at.vds_v == doctest::Approx(6.576).epsilon(1e-4));
  // And the closed form to solver precision.
  const double vg = 16.0 * 270e3 / (2.1e6 + 270e3);
  CHECK(op.at.id_a == doctest::Approx(closed_form_id(8e-3, -4.0, 1.5e3, vg)).epsilon(1e-9).scale(0));
}

TEST_CASE("supply resistance, split source resistor and follower match closed forms") {
  // Closed forms: the gate draws no current, so the supply delivers id alone and
  // vd = VDD - id (Rsupply + RD); the source resistance is unbypassed + resistor.
  SUBCASE("common source with supply resistance and split source resistor") {
    const std::string text = test::self_bias_text(18.0, 6e-3, -2.0, 1.2e3, 3.3e3, "unbypassed = 330\n") +
                             "";
    // self_bias_text puts 'resistor' in [source]; 'unbypassed' lands there as well.
    stage s = test::stage_from(text);
    s.supply.resistance_ohm = 220.0;
    const operating_point op = solve_operating_point(build_network(s));
    const double id = closed_form_id(6e-3, -2.0, 1.2e3 + 330.0, 0.0);
    CHECK(op.at.id_a == doctest::Approx(id).epsilon(1e-9).scale(0));
    CHECK(op.at.vd_v == doctest::Approx(18.0 - id * (220.0 + 3.3e3)).epsilon(1e-9));
    CHECK(op.at.vs_v == doctest::Approx(id * 1530.0).epsilon(1e-9));
  }
  SUBCASE("source follower") {
    const std::string text =
        "topology = \"source-follower\"\n[supply]\nvolts = 24\n[jfet]\nidss = \"4m\"\nvp = -1.5\nis = 0\n"
        "[gate]\ncoupling_cap = \"10n\"\nresistor = \"10M\"\n[source]\nresistor = \"2.7k\"\n";
    const operating_point op = solve_operating_point(build_network(test::stage_from(text)));
    const double id = closed_form_id(4e-3, -1.5, 2.7e3, 0.0);
    CHECK(op.at.id_a == doctest::Approx(id).epsilon(1e-9).scale(0));
    CHECK(op.at.vd_v == doctest::Approx(24.0).epsilon(1e-12));
  }
}

TEST_CASE("a p-channel stage is the mirror image of its n-channel twin") {
  // Complementary-circuit symmetry (common practice): negating every voltage and current
  // of a circuit with mirrored devices gives a solution.
  const std::string n_text = test::self_bias_text(20.0, 8e-3, -6.0, 1e3, 3.3e3);
  std::string p_text =
      "topology = \"common-source\"\n[supply]\nvolts = -20\n[jfet]\npolarity = \"p\"\nidss = \"8m\"\nvp = 6\nis = 0\n"
      "[gate]\ncoupling_cap = \"100n\"\nresistor = \"1M\"\n[drain]\nresistor = \"3.3k\"\n[source]\nresistor = \"1k\"\n";
  const operating_point n = solve_operating_point(build_network(test::stage_from(n_text)));
  const operating_point p = solve_operating_point(build_network(test::stage_from(p_text)));
  CHECK(p.at.id_a == doctest::Approx(-n.at.id_a).epsilon(1e-12));
  CHECK(p.at.vd_v == doctest::Approx(-n.at.vd_v).epsilon(1e-12));
  CHECK(p.at.vgs_v == doctest::Approx(-n.at.vgs_v).epsilon(1e-12));
  CHECK(p.at.region == n.at.region);
}

TEST_CASE("triode and cutoff bias are recognised") {
  // Closed form: with the gate grounded and no source resistor, id would be IDSS; a drain
  // resistor that drops more than the supply forces the triode region.
  const std::string triode =
      "[supply]\nvolts = 9\n[jfet]\nidss = \"10m\"\nvp = -2\nis = 0\n[gate]\nresistor = \"1M\"\n[drain]\nresistor = \"10k\"\n";
  CHECK(solve_operating_point(build_network(test::stage_from(triode))).at.region == jfet_region::triode);
  // Closed form: a huge source resistor leaves only a vanishing current (id -> 0 as
  // rs -> infinity, vgs -> vp).
  const std::string nearly_off = test::self_bias_text(9.0, 5e-3, -1.0, 1e8, 1e3);
  const operating_point op = solve_operating_point(build_network(test::stage_from(nearly_off)));
  CHECK(op.at.id_a < 1e-7);
  CHECK(op.at.id_a == doctest::Approx(closed_form_id(5e-3, -1.0, 1e8, 0.0)).epsilon(1e-6).scale(0));
}

TEST_CASE("a gate's reverse leakage drops across the gate resistor: VG = I R, the current law") {
  // A self-biased follower with its gate on 1 GΩ to ground and no junction current of its
  // own (is = 0): the leakage leaves the gate through the resistor, so the gate sits at
  // +I R for an n-channel part and -I R for a p-channel one (Kirchhoff's current law; the
  // drift of a high-impedance gate with leakage is common practice). The leakage flows from
  // the source to the gate, so RS carries ID - I: VGS = VG - (ID - I) RS = I (RG + RS) - ID RS;
  // with the square law, closed_form_id with vg = I (RG + RS). (Leaving out I RS moves ID by
  // 1.1e-7 of itself here.)
  for (const bool p : {false, true}) {
    CAPTURE(p);
    const double s = p ? -1.0 : 1.0;
    const double leak = 100e-12, rg = 1e9, rs = 1.5e3, idss = 6e-3, vp = -1.5 * s;
    const std::string text = std::string("topology = \"source-follower\"\n[supply]\nvolts = ") + test::num(24.0 * s) +
                             "\n[jfet]\n" + (p ? "polarity = \"p\"\n" : "") + "idss = \"6m\"\nvp = " + test::num(vp) +
                             "\nis = 0\ngate_leakage = \"100p\"\n[gate]\ncoupling_cap = \"1u\"\nresistor = \"1G\"\n[source]\nresistor = \"1.5k\"\n";
    const network net = build_network(test::stage_from(text));
    const operating_point op = solve_operating_point(net);
    CHECK(op.at.vg_v == doctest::Approx(s * leak * rg).epsilon(1e-6).scale(0));
    CHECK(op.at.ig_a == doctest::Approx(-s * leak).epsilon(1e-9).scale(0));
    CHECK(op.at.id_a == doctest::Approx(s * closed_form_id(idss, -1.5, rs, leak * (rg + rs))).epsilon(1e-7).scale(0));
  }
}

}  // namespace test_operating_point
