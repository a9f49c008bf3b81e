// Solving for a resistor against closed forms.
#include <cmath>

#include <doctest/doctest.h>

#include "base/error.hpp"
#include "model/analysis/tune.hpp"
#include "model/circuit/stage_file.hpp"
#include "support/stages.hpp"

namespace test_tune {

using namespace pinchoff;
using namespace pinchoff::model;

TEST_CASE("source resistor for a drain-voltage target matches the closed form") {
  // Closed form (square law, lambda = 0, no gate current): the target vd fixes
  // id = (VDD - vd)/RD, Shockley gives vgs = vp (1 - sqrt(id/idss)), and rs = -vgs/id.
  const double vdd = 9.0, idss = 4.5e-3, vp = -1.6, rd = 3.3e3;
  const stage s = test::stage_from(test::self_bias_text(vdd, idss, vp, 680.0, rd));
  for (double vd : {3.5, 4.5, 6.0}) {
    CAPTURE(vd);
    const tune_result r = tune_resistor(s, "source.resistor", {target_kind::vd, vd}, base::eseries::e24);
    const double id = (vdd - vd) / rd;
    const double rs = -vp * (1.0 - std::sqrt(id / idss)) / id;
    CHECK(r.exact_ohm == doctest::Approx(rs).epsilon(1e-9));
    CHECK(r.exact.at.vd_v == doctest::Approx(vd).epsilon(1e-9));
    REQUIRE(r.candidates.size() == 2);
    CHECK(r.candidates[0].point.value_ohm <= r.exact_ohm);
    CHECK(r.candidates[1].point.value_ohm >= r.exact_ohm);
  }
}

TEST_CASE("drain resistor for a current target") {
  // Closed form: adjusting RS, rs = vp (sqrt(id/idss) - 1)/id. With RS fixed, id does not
  // depend on RD in saturation (lambda = 0), so RD reaches a lower current only by
  // pushing the part into the triode region.
  const stage s = test::stage_from(test::self_bias_text(9.0, 4.5e-3, -1.6, 680.0, 3.3e3));
  const tune_result r = tune_resistor(s, "source.resistor", {target_kind::id, 1e-3}, base::eseries::e12);
  CHECK(r.exact_ohm == doctest::Approx(-1.6 * (std::sqrt(1e-3 / 4.5e-3) - 1.0) / 1e-3).epsilon(1e-9));
  const tune_result d = tune_resistor(s, "drain.resistor", {target_kind::id, 1e-3}, base::eseries::e12);
  CHECK(d.exact.at.id_a == doctest::Approx(1e-3).epsilon(1e-9).scale(0));
  CHECK(d.exact.at.region == jfet_region::triode);
}

TEST_CASE("an unreachable target says what range can be reached") {
  const stage s = test::stage_from(test::self_bias_text(9.0, 4.5e-3, -1.6, 680.0, 3.3e3));
  try {
    tune_resistor(s, "source.resistor", {target_kind::vd, 12.0}, base::eseries::e24);
    FAIL("expected an error");
  } catch (const input_error& e) {
    const std::string m = e.what();
    CHECK(m.find("out of reach") != std::string::npos);
    CHECK(m.find("9.000 V") != std::string::npos);  // the supply bounds vd
  }
  CHECK_THROWS_AS(tune_resistor(s, "drain.resistr", {target_kind::vd, 4.0}, base::eseries::e24), input_error);
}

TEST_CASE("center maximises the symmetric swing") {
  // Definition: at the optimum, nudging the resistor either way cannot enlarge the
  // smaller of the two swings.
  const stage s = test::stage_from(test::self_bias_text(
      9.0, 4.5e-3, -1.6, 680.0, 3.3e3, "bypass_cap = \"47u\"\n[output]\ncoupling_cap = \"1u\"\nload = \"100k\"\n"));
  const tune_result r = tune_resistor(s, "source.resistor", {target_kind::center, 0.0}, base::eseries::e24);
  const double best = r.exact.headroom.symmetric_output_vpk;
  for (double f : {0.97, 1.03}) {
    CAPTURE(f);
    CHECK(evaluate_with(s, "source.resistor", r.exact_ohm * f).headroom.symmetric_output_vpk <= best * (1 + 1e-9));
  }
  // At the optimum the two limits meet (closed form of a max-min of a rising and a falling curve).
  CHECK(std::fabs(r.exact.headroom.up.output_v) == doctest::Approx(std::fabs(r.exact.headroom.down.output_v)).epsilon(1e-4));
}

TEST_CASE("a resistor tuning cannot adjust is named by the field adjust_key") {
  const stage s = test::stage_from(test::self_bias_text(9.0, 4.5e-3, -1.6, 680.0, 3.3e3));
  for (const char* key : {"jfet.idss", "gate.bias_top"}) {  // not a resistor; a divider the stage lacks
    CAPTURE(key);
    try {
      (void)solve_resistor(s, key, {target_kind::vd, 4.5});
      FAIL("accepted");
    } catch (const setting_error& e) {
      CHECK(e.field() == "adjust_key");
      CHECK(std::string(e.what()).find(key) != std::string::npos);
      CHECK(std::string(e.what()).find("--") == std::string::npos);
    }
  }
}

TEST_CASE("two resistors solved together on a shared supply resistance meet the closed form") {
  // Closed form (square law, lambda = 0, no gate current; AC-coupled stages): with the drain
  // targets vd1 and vd2 the currents and the shared rail are linear in each other,
  //   id_k = (rail - vd_k) / RD_k,  rail = VDD - Rsup (id1 + id2),
  // and each source resistor is rs = |vp| (1 - sqrt(id/idss)) / id.
  const double vdd = 12.0, rsup = 1e3, rd1 = 3.3e3, rd2 = 2.7e3, vd1 = 6.5, vd2 = 5.5;
  const double idss1 = 4.5e-3, vp1 = -1.6, idss2 = 4e-3, vp2 = -1.4;
  const stage s = test::stage_from(test::two_stage_text(vdd, rsup, idss1, vp1, 680.0, rd1, idss2, vp2, 470.0, rd2));
  const std::vector<tune_pair> pairs{{"stage1.source.resistor", {target_kind::vd, vd1, -1}},
                                     {"stage2.source.resistor", {target_kind::vd, vd2, -1}}};
  const joint_solution sol = solve_resistors(s, pairs);
  const double g = 1 / rd1 + 1 / rd2;
  const double rail = (vdd + rsup * (vd1 / rd1 + vd2 / rd2)) / (1 + rsup * g);
  const double id1 = (rail - vd1) / rd1, id2 = (rail - vd2) / rd2;
  REQUIRE(sol.settled);
  CHECK(sol.rounds > 1);  // they interact through the shared resistance
  CHECK(sol.rounds < joint_max_rounds);
  // Settled within 1 ppm + 1 uV of each drain target: about 3e-6 of each current, so each
  // resistor within 1e-4 of the closed form.
  CHECK(sol.ohm[0] == doctest::Approx(std::fabs(vp1) * (1 - std::sqrt(id1 / idss1)) / id1).epsilon(1e-4));
  CHECK(sol.ohm[1] == doctest::Approx(std::fabs(vp2) * (1 - std::sqrt(id2 / idss2)) / id2).epsilon(1e-4));
  // Solving each alone on the nominal design misses: the other resistor moves the rail.
  const double alone = solve_resistor(s, pairs[0].adjust, pairs[0].target);
  CHECK(std::fabs(alone - sol.ohm[0]) > 1e-3 * sol.ohm[0]);
}

TEST_CASE("stages that share nothing settle in one round") {
  // Ideal supply, AC coupling: a stage-2 resistor cannot move stage 1's bias.
  const stage s = test::stage_from(test::two_stage_text(9.0, 0.0, 4.5e-3, -1.6, 680.0, 3.3e3, 4e-3, -1.4, 470.0, 2.7e3));
  const joint_solution sol = solve_resistors(s, {{"stage1.source.resistor", {target_kind::vd, 4.5, -1}},
                                                 {"stage2.drain.resistor", {target_kind::id, 1e-3, -1}}});
  REQUIRE(sol.settled);
  CHECK(sol.rounds == 1);
}

TEST_CASE("pairs that cannot be solved together are named by their field") {
  const stage s = test::stage_from(test::two_stage_text(9.0, 0.0, 4.5e-3, -1.6, 680.0, 3.3e3, 4e-3, -1.4, 470.0, 2.7e3));
  struct row {
    std::vector<tune_pair> pairs;
    const char* field;
    const char* words;
  };
  const row rows[] = {
      {{{"stage1.source.resistor", {target_kind::vd, 4.5, -1}}, {"stage1.source.resistor", {target_kind::id, 1e-3, -1}}},
       "adjust_key", "adjusted twice"},
      {{{"stage1.source.resistor", {target_kind::vd, 4.5, -1}}, {"stage1.drain.resistor", {target_kind::vd, 5.0, -1}}},
       "target", "stage1.vd is the target of two resistors"},
      {{{"stage1.source.resistor", {target_kind::center, 0, -1}}, {"stage2.source.resistor", {target_kind::vd, 4.5, -1}}},
       "target", "center is a search of its own"},
  };
  for (const row& r : rows) {
    CAPTURE(r.words);
    try {
      (void)solve_resistors(s, r.pairs);
      FAIL("accepted");
    } catch (const setting_error& e) {
      CHECK(e.field() == r.field);
      CHECK(std::string(e.what()).find(r.words) != std::string::npos);
    }
  }
}

namespace {
// The degenerated common-source stage's mid-band gain, lambda = 0 (Sedra & Smith, any
// edition): |A| = gm (RD || RL) / (1 + gm RSu), gm = 2 sqrt(idss id) / |vp| (Shockley).
double cs_gain_db(double idss, double vp, double id, double rd, double rl, double ru) {
  const double gm = 2.0 * std::sqrt(idss * id) / std::fabs(vp);
  const double rdl = rd * rl / (rd + rl);
  return 20.0 * std::log10(gm * rdl / (1.0 + gm * ru));
}
const std::string gain_stage_text = test::self_bias_text(18.0, 8e-3, -2.5, 2.2e3, 4.7e3,
                                                         "unbypassed = 470\nbypass_cap = \"22u\"\n[output]\nload = \"47k\"\n"
                                                         "coupling_cap = \"2.2u\"\n");
}  // namespace

TEST_CASE("a gain target: the stage built from the tuned resistor gives the gain to 0.01 dB") {
  const stage s = test::stage_from(gain_stage_text);
  for (const char* key : {"drain.resistor", "source.unbypassed"}) {
    for (double want : {14.0, 17.0}) {
      CAPTURE(key);
      CAPTURE(want);
      const tune_result r = tune_resistor(s, key, {target_kind::gain, want}, base::eseries::e24);
      stage built = s;
      *resistor_field(built, key) = r.exact_ohm;
      const double got = midband_gain_db(built);
      CHECK(std::fabs(got - want) < 0.01);
      CHECK(std::fabs(r.exact.gain_db - want) < 0.01);
      // The closed form at the tuned value's own operating point agrees.
      const double rd = std::string(key) == "drain.resistor" ? r.exact_ohm : 4.7e3;
      const double ru = std::string(key) == "source.unbypassed" ? r.exact_ohm : 470.0;
      CHECK(std::fabs(cs_gain_db(8e-3, -2.5, r.exact.at.id_a, rd, 47e3, ru) - want) < 1e-4);
      // Every candidate carries its gain; more drain resistance or less degeneration, more gain.
      REQUIRE(r.candidates.size() == 2);
      const bool rising = std::string(key) == "drain.resistor";
      CHECK((r.candidates[0].point.gain_db <= want) == rising);
      CHECK((r.candidates[1].point.gain_db >= want) == rising);
    }
  }
  CHECK_THROWS_WITH_AS(tune_resistor(s, "source.unbypassed", {target_kind::gain, 60.0}, base::eseries::e24),
                       doctest::Contains("out of reach"), input_error);
}

TEST_CASE("two targets met together: a gain and a drain voltage, and the standard-value pairs around them") {
  // With vd = 9 V on 18 V the current is 9 V / RD, and the closed-form gain of that current
  // and RD must be the target: both hold at the joint solution.
  const stage s = test::stage_from(gain_stage_text);
  const std::vector<tune_pair> pairs{{"drain.resistor", {target_kind::gain, 16.0}}, {"source.resistor", {target_kind::vd, 9.0}}};
  const joint_solution sol = solve_resistors(s, pairs);
  REQUIRE(sol.settled);
  stage built = s;
  built.drain_resistor_ohm = sol.ohm[0];
  built.source.resistor_ohm = sol.ohm[1];
  CHECK(std::fabs(midband_gain_db(built) - 16.0) < 0.01);
  const tune_point p = evaluate_with(built, "drain.resistor", sol.ohm[0]);
  CHECK(std::fabs(p.at.vd_v - 9.0) < 1e-4);
  const double id = 9.0 / sol.ohm[0];
  CHECK(std::fabs(cs_gain_db(8e-3, -2.5, id, sol.ohm[0], 47e3, 470.0) - 16.0) < 1e-3);
  // The standard-value pairs: E24 values either side of each exact value, every
  // combination, closest first.
  const std::vector<joint_candidate> c = joint_candidates(s, pairs, sol, base::eseries::e24);
  REQUIRE(c.size() == 4);
  for (const joint_candidate& k : c) {
    CHECK(k.ohm.size() == 2);
    CHECK(std::fabs(k.ohm[0] - sol.ohm[0]) <= 0.1 * sol.ohm[0]);  // E24 steps are under 10 % (IEC 60062)
    CHECK(std::fabs(k.ohm[1] - sol.ohm[1]) <= 0.1 * sol.ohm[1]);
    CHECK(k.achieved[0] == doctest::Approx(k.gain_db).epsilon(1e-15));
  }
  for (std::size_t k = 1; k < c.size(); ++k) CHECK(c[k].error >= c[k - 1].error);
}

TEST_CASE("two targets out of reach one resistor at a time are still met together") {
  // On the clean preamp preset 20 dB is beyond the drain resistor alone while the source
  // resistor stays at the file's 2.2 kΩ (at most 17.2 dB), yet with the drain at 9 V both
  // hold together (13 kΩ and 6.8 kΩ are the nearest E24 pair). The stage built from the
  // solved values gives both.
  const stage s = read_stage_file(std::string(PINCHOFF_PRESETS_DIR) + "/clean-preamp-18v.toml");
  const std::vector<tune_pair> pairs{{"drain.resistor", {target_kind::gain, 20.0}}, {"source.resistor", {target_kind::vd, 9.0}}};
  CHECK_THROWS_AS(solve_resistor(s, "drain.resistor", {target_kind::gain, 20.0}), input_error);
  const joint_solution sol = solve_resistors(s, pairs);
  REQUIRE(sol.settled);
  stage built = s;
  built.drain_resistor_ohm = sol.ohm[0];
  built.source.resistor_ohm = sol.ohm[1];
  CHECK(std::fabs(midband_gain_db(built) - 20.0) < 0.01);
  CHECK(std::fabs(evaluate_with(built, "drain.resistor", sol.ohm[0]).at.vd_v - 9.0) < 1e-4);
}

}  // namespace test_tune
