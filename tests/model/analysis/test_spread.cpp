// Monte Carlo spread against closed forms and distribution theory.
#include <algorithm>
#include <cmath>
#include <numbers>

#include <doctest/doctest.h>

#include "base/error.hpp"
#include "model/analysis/spread.hpp"
#include "model/analysis/sweep.hpp"
#include "model/device/fit.hpp"
#include "support/stages.hpp"

namespace test_spread {

using namespace pinchoff;
using namespace pinchoff::model;

namespace {
// Self-bias closed form (Boylestad & Nashelsky ch. 7): id = idss (1 - id rs/|vp|)^2.
double self_bias_id(double idss, double vp, double rs) {
  const double a = rs / std::fabs(vp);
  return ((2 * idss * a + 1) - std::sqrt(4 * idss * a + 1)) / (2 * idss * a * a);
}
}  // namespace

TEST_CASE("with only IDSS varied, the spread maps through the self-bias closed form") {
  const double vp = -1.6, rs = 680.0, rd = 3.3e3, vdd = 9.0;
  const stage st = test::stage_from(test::self_bias_text(vdd, 4.5e-3, vp, rs, rd));
  spread_settings s;
  s.idss_a = base::value_range{2e-3, 8e-3};
  s.runs = 2000;
  s.seed = 7;
  const spread_result r = run_spread(st, s, {});
  REQUIRE(r.unsolved == 0);
  // Per run: the tool's current is the closed form of the drawn IDSS.
  for (const spread_run& run : r.runs) {
    CHECK(run.values.at("id") == doctest::Approx(self_bias_id(run.draw.idss_a, vp, rs)).epsilon(1e-9).scale(0));
    CHECK(run.values.at("vd") == doctest::Approx(vdd - rd * self_bias_id(run.draw.idss_a, vp, rs)).epsilon(1e-9));
  }
  // Percentiles: id is increasing in IDSS, so the population p-quantile of id is the
  // closed form at the p-quantile of IDSS, lo + p (hi - lo). The empirical CDF of 2000
  // draws stays within 0.04 of the true one with probability 1 - 2 exp(-2 n 0.04^2) =
  // 99.7 % (Dvoretzky-Kiefer-Wolfowitz inequality, Massart 1990).
  const quantity_stats& id = r.stats.at("id");
  for (const auto& quantile : {std::pair{0.05, id.p5}, std::pair{0.50, id.p50}, std::pair{0.95, id.p95}}) {
    const double p = quantile.first, got = quantile.second;  // plain locals: CAPTURE takes them by reference
    CAPTURE(p);
    const double lo = self_bias_id(2e-3 + std::max(0.0, p - 0.04) * 6e-3, vp, rs);
    const double hi = self_bias_id(2e-3 + std::min(1.0, p + 0.04) * 6e-3, vp, rs);
    CHECK(got >= lo);
    CHECK(got <= hi);
  }
  CHECK(id.min >= self_bias_id(2e-3, vp, rs));
  CHECK(id.max <= self_bias_id(8e-3, vp, rs));
}

TEST_CASE("the same seed gives the same runs on one thread or two") {
  const stage st = test::stage_from(test::self_bias_text(9.0, 4.5e-3, -1.6, 680.0, 3.3e3));
  spread_settings s;
  s.idss_a = base::value_range{2e-3, 8e-3};
  s.vp_v = base::value_range{-3.0, -0.8};
  s.supply_v = base::value_range{7.0, 9.6};
  s.resistor_tolerance = 0.05;
  s.runs = 300;
  s.seed = 42;
  s.threads = 1;
  const spread_result one = run_spread(st, s, {});
  s.threads = 2;
  const spread_result two = run_spread(st, s, {});
  REQUIRE(one.runs.size() == two.runs.size());
  for (std::size_t i = 0; i < one.runs.size(); ++i) {
    CHECK(one.runs[i].draw.idss_a == two.runs[i].draw.idss_a);
    CHECK(one.runs[i].values == two.runs[i].values);
  }
  s.seed = 43;
  CHECK(run_spread(st, s, {}).runs[0].draw.idss_a != one.runs[0].draw.idss_a);
}

TEST_CASE("IDSS and |VP| are correlated as the Gaussian copula predicts") {
  // For uniform margins from a Gaussian copula with correlation rho, the correlation of
  // the uniforms is Spearman's rho = (6/pi) arcsin(rho/2) (Kruskal 1958; from memory).
  // With 20000 draws the sampling error is about 1/sqrt(n) = 0.007; tolerance 0.03.
  const stage st = test::stage_from(test::self_bias_text(9.0, 4.5e-3, -1.6, 680.0, 3.3e3));
  spread_settings s;
  s.idss_a = base::value_range{2e-3, 8e-3};
  s.vp_v = base::value_range{-3.0, -0.8};
  s.correlation = 0.7;
  s.runs = 20000;
  double sx = 0, sy = 0, sxx = 0, syy = 0, sxy = 0;
  for (int i = 0; i < s.runs; ++i) {
    const spread_draw d = draw_part(s, st, i);
    const double x = d.idss_a, y = std::fabs(d.vp_v);
    CHECK(x >= 2e-3);
    CHECK(x <= 8e-3);
    CHECK(y >= 0.8);
    CHECK(y <= 3.0);
    sx += x; sy += y; sxx += x * x; syy += y * y; sxy += x * y;
  }
  const double n = s.runs;
  const double corr = (sxy / n - sx / n * sy / n) / std::sqrt((sxx / n - sx * sx / n / n) * (syy / n - sy * sy / n / n));
  CHECK(std::fabs(corr - 6.0 / std::numbers::pi * std::asin(0.35)) <= 0.03);  // absolute, on a correlation of 0.68
}

TEST_CASE("yield counts the runs that meet every requirement") {
  const stage st = test::stage_from(test::self_bias_text(9.0, 4.5e-3, -1.6, 680.0, 3.3e3));
  spread_settings s;
  s.idss_a = base::value_range{2e-3, 8e-3};
  s.vp_v = base::value_range{-3.0, -0.8};
  s.runs = 500;
  const std::vector<requirement> reqs{{"vd", 3.5, 6.0}, {"id", 1e-3, INFINITY}};
  const spread_result r = run_spread(st, s, reqs);
  int meets = 0;
  for (const spread_run& run : r.runs) {
    const double vd = run.values.at("vd"), id = run.values.at("id");
    const bool ok = vd >= 3.5 && vd <= 6 && id >= 1e-3 && run.values.at("vds") > run.values.at("vgs") - run.draw.vp_v;
    CHECK(run.meets == ok);
    meets += ok ? 1 : 0;
  }
  CHECK(r.yield == doctest::Approx(meets / 500.0).epsilon(1e-12));
}

TEST_CASE("a wrong spread setting is named by its field, never by an option") {
  // The command line maps each field to its option (cli/common.cpp, map_spread_fields).
  const stage st = test::stage_from(test::self_bias_text(9.0, 4.5e-3, -1.6, 680.0, 3.3e3));
  struct row {
    const char* field;
    spread_settings s;
    const char* words;
  };
  auto with = [](auto change) {
    spread_settings s;
    change(s);
    return s;
  };
  const row rows[] = {
      {"idss_a", with([](spread_settings& s) { s.idss_a = base::value_range{0.0, 2e-3}; }), "above 0 A"},
      {"vp_v", with([](spread_settings& s) { s.vp_v = base::value_range{1.0, 2.0}; }), "negative for an n-channel part"},
      {"supply_v", with([](spread_settings& s) { s.supply_v = base::value_range{-9.0, -7.0}; }), "positive like the stage's supply"},
      {"correlation", with([](spread_settings& s) { s.correlation = 2.0; }), "-1 to 1, got 2"},
      {"resistor_tolerance", with([](spread_settings& s) { s.resistor_tolerance = 0.6; }), "below 50 %, got 60.0 %"},
      {"runs", with([](spread_settings& s) { s.runs = 0; }), "1 to 100000, got 0"},
  };
  for (const row& r : rows) {
    const std::string words = r.words;
    CAPTURE(words);
    try {
      validate(r.s, st);
      FAIL("accepted");
    } catch (const setting_error& e) {
      CHECK(e.field() == r.field);
      CHECK(std::string(e.what()).find(r.words) != std::string::npos);
      CHECK(std::string(e.what()).find("--") == std::string::npos);
    }
  }
}

TEST_CASE("percentiles interpolate between order statistics") {
  // Hyndman & Fan 1996, definition 7 (the default of R and NumPy).
  const std::vector<double> v{1, 2, 3, 4, 5};
  CHECK(percentile_sorted(v, 0) == 1);
  CHECK(percentile_sorted(v, 50) == 3);
  CHECK(percentile_sorted(v, 5) == doctest::Approx(1.2).epsilon(1e-12));
  CHECK(percentile_sorted(v, 100) == 5);
}

TEST_CASE("a trimmer sized over the batch brings every part to the target") {
  // Closed form per part (square law, lambda = 0): rs = |vp| (1 - sqrt(id/idss)) / id
  // with id = (VDD - vd)/RD.
  const double vdd = 9.0, rd = 3.3e3, vd = 4.5;
  const stage st = test::stage_from(test::self_bias_text(vdd, 4.5e-3, -1.6, 680.0, rd));
  spread_settings s;
  s.idss_a = base::value_range{2e-3, 8e-3};
  s.vp_v = base::value_range{-3.0, -0.8};
  s.runs = 200;
  const trim_result t = size_trimmer(st, "source.resistor", {target_kind::vd, vd}, s, base::eseries::e24);
  const double id = (vdd - vd) / rd;
  for (int i = 0; i < s.runs; ++i) {
    const spread_draw d = draw_part(s, st, i);
    const double need = std::fabs(d.vp_v) * (1 - std::sqrt(id / d.idss_a)) / id;
    CHECK(t.exact_ohm[static_cast<std::size_t>(i)] == doctest::Approx(need).epsilon(1e-8));
  }
  CHECK(t.reachable == s.runs);
  CHECK(t.fixed_ohm <= t.r_min);
  CHECK(t.fixed_ohm + t.trimmer_ohm >= t.r_max);
  CHECK(t.coverage == 1.0);
  // The smallest standard trimmer that spans the range (common practice values).
  for (double smaller : standard_trimmers_ohm())
    if (smaller < t.trimmer_ohm) CHECK(t.fixed_ohm + smaller < t.r_max);
}

TEST_CASE("a trimmer sized over the batch for a gain target: every part's drain resistor from the closed form") {
  // Self bias with the source fully bypassed, square law (is = 0, lambda = 0): the rest
  // current is set by RS alone, id from VGS = -id RS and id = idss (1 - VGS/vp)^2, so gm =
  // 2 sqrt(idss id) / |vp| (Shockley) is fixed per part and the mid-band gain gm (RD || RL)
  // (Sedra & Smith, any edition) gives the drain resistor each part needs:
  // RD || RL = 10^(G/20) / gm.
  const double vdd = 18.0, rs = 1e3, rl = 47e3, gain_db = 12.0;
  const stage st = test::stage_from(test::self_bias_text(vdd, 4.5e-3, -1.6, rs, 2.2e3,
                                                         "bypass_cap = \"100u\"\n[output]\nload = \"47k\"\n"
                                                         "coupling_cap = \"2.2u\"\n"));
  spread_settings s;
  s.idss_a = base::value_range{2e-3, 8e-3};
  s.vp_v = base::value_range{-3.0, -0.8};
  s.runs = 60;
  const trim_result t = size_trimmer(st, "drain.resistor", {target_kind::gain, gain_db}, s, base::eseries::e24);
  int checked = 0;
  for (int i = 0; i < s.runs; ++i) {
    const spread_draw d = draw_part(s, st, i);
    const double a = std::fabs(d.vp_v);
    // id = idss (1 - id rs / a)^2, the root below idss on the square law's falling branch.
    const double k = rs / a;
    const double id = ((2 * k * d.idss_a + 1) - std::sqrt(4 * k * d.idss_a + 1)) / (2 * k * k * d.idss_a);
    const double gm = 2.0 * std::sqrt(d.idss_a * id) / a;
    const double rdl = std::pow(10.0, gain_db / 20.0) / gm;
    const double need = rdl * rl / (rl - rdl);
    CAPTURE(i);
    const double got = t.exact_ohm[static_cast<std::size_t>(i)];
    // A part the target would push out of saturation at that resistor is unreachable.
    if (std::isnan(got)) {
      CHECK(vdd - need * id < id * rs + (a - id * rs));
      continue;
    }
    CHECK(got == doctest::Approx(need).epsilon(1e-6));
    ++checked;
  }
  CHECK(checked > s.runs / 2);
  CHECK(t.fixed_ohm <= t.r_min);
  CHECK(t.fixed_ohm + t.trimmer_ohm >= t.r_max);
}

TEST_CASE("THD over a batch follows the square-law closed form per part") {
  // Ideal square law (gate DC-coupled at 0 V, grounded source, lambda = 0, no gate
  // current): HD2 = A / (4 (VGSQ - VP)) with VGSQ = 0 and no higher harmonics (Gray,
  // Hurst, Lewis & Meyer; from memory), so THD = A / (4 |VP|) for every drawn part.
  const std::string text =
      "[supply]\nvolts = 30\n[jfet]\nidss = \"4m\"\nvp = -2\nis = 0\n[gate]\nresistor = \"1M\"\n[drain]\nresistor = \"1k\"\n";
  const stage st = test::stage_from(text);
  spread_settings s;
  s.vp_v = base::value_range{-3.0, -1.5};
  s.runs = 40;
  sweep_settings sw;
  sw.drives_vpk = {0.05};
  sw.threads = 1;
  const spread_result r = run_spread(st, s, {{"thd", -INFINITY, 1.0}},
                                     [&](const stage& drawn, std::map<std::string, double>& v) {
                                       v["thd"] = run_sweep(drawn, sw).points[0].thd_percent;
                                     });
  int meets = 0;
  for (const spread_run& run : r.runs) {
    const double expect = 100.0 * 0.05 / (4.0 * std::fabs(run.draw.vp_v));
    CHECK(run.values.at("thd") == doctest::Approx(expect).epsilon(1e-6));
    meets += expect <= 1.0 ? 1 : 0;
  }
  CHECK(r.yield == doctest::Approx(meets / 40.0).epsilon(1e-12));
}

TEST_CASE("on a chain every stage's bias is its own self-bias closed form, per drawn part") {
  // Two AC-coupled stages on an ideal supply: each stage is the closed form above with its
  // own drawn part (draw.idss_a for stage 1, draw.later[0] for stage 2).
  const double vdd = 9.0, rs1 = 680.0, rd1 = 3.3e3, rs2 = 470.0, rd2 = 2.7e3;
  const stage st = test::stage_from(test::two_stage_text(vdd, 0.0, 4.5e-3, -1.6, rs1, rd1, 4e-3, -1.4, rs2, rd2));
  spread_settings s;
  s.idss_a = base::value_range{2e-3, 8e-3};
  s.vp_v = base::value_range{-3.0, -0.8};
  s.runs = 300;
  s.seed = 11;
  const std::vector<std::string> names = spread_quantity_names(st);
  CHECK(names == std::vector<std::string>{"stage1.id", "stage1.vd", "stage1.vs", "stage1.vds", "stage1.vgs", "stage2.id",
                                          "stage2.vd", "stage2.vs", "stage2.vds", "stage2.vgs", "gain", "swing", "thd", "noise", "noise_a", "ein", "ein_a"});
  const spread_result r = run_spread(st, s, {{"stage2.vd", 3.5, 6.0}});
  REQUIRE(r.unsolved == 0);
  int meets = 0, differ = 0, checked = 0;
  for (const spread_run& run : r.runs) {
    REQUIRE(run.draw.later.size() == 1);
    CHECK(run.values.count("id") == 0);
    // The parts are drawn independently: the two stages' IDSS differ.
    differ += run.draw.idss_a != run.draw.later[0].idss_a ? 1 : 0;
    // The closed form holds in saturation (vds >= vgs - vp), which it predicts itself; a
    // part it puts in the triode region is in no stage's yield.
    const double id1 = self_bias_id(run.draw.idss_a, run.draw.vp_v, rs1);
    const double id2 = self_bias_id(run.draw.later[0].idss_a, run.draw.later[0].vp_v, rs2);
    const double vd1 = vdd - rd1 * id1, vd2 = vdd - rd2 * id2;
    const bool sat1 = vd1 - rs1 * id1 >= -rs1 * id1 - run.draw.vp_v;
    const bool sat2 = vd2 - rs2 * id2 >= -rs2 * id2 - run.draw.later[0].vp_v;
    if (sat1 && sat2) {
      ++checked;
      CHECK(run.values.at("stage1.id") == doctest::Approx(id1).epsilon(1e-9).scale(0));
      CHECK(run.values.at("stage1.vd") == doctest::Approx(vd1).epsilon(1e-9));
      CHECK(run.values.at("stage2.id") == doctest::Approx(id2).epsilon(1e-9).scale(0));
      CHECK(run.values.at("stage2.vd") == doctest::Approx(vd2).epsilon(1e-9));
      CHECK(run.values.at("stage2.vs") == doctest::Approx(rs2 * id2).epsilon(1e-9));
    }
    // The yield needs both stages in saturation and the requirement on stage 2.
    const bool ok = sat1 && sat2 && vd2 >= 3.5 && vd2 <= 6.0;
    CHECK(run.meets == ok);
    meets += ok ? 1 : 0;
  }
  CHECK(differ == s.runs);
  CHECK(checked > s.runs / 2);
  CHECK(r.yield == doctest::Approx(meets / 300.0).epsilon(1e-12));
  CHECK(r.stats.count("stage2.vd") == 1);
  CHECK(r.stats.count("gain") == 1);
}

TEST_CASE("a chain's requirement names its stage; a refusal names the field and the choices") {
  const stage chain = test::stage_from(test::two_stage_text(9.0, 0.0, 4.5e-3, -1.6, 680.0, 3.3e3, 4e-3, -1.4, 470.0, 2.7e3));
  const stage single = test::stage_from(test::self_bias_text(9.0, 4.5e-3, -1.6, 680.0, 3.3e3));
  struct row {
    const stage* st;
    const char* quantity;
    const char* words;  // nullptr: accepted
    const char* resolved;
  };
  const row rows[] = {
      {&chain, "stage2.vd", nullptr, "stage2.vd"},
      {&chain, "gain", nullptr, "gain"},
      {&single, "vd", nullptr, "vd"},
      {&single, "stage1.vd", nullptr, "vd"},
      {&chain, "vd", "stage1.vd or stage2.vd", ""},
      {&chain, "stage3.id", "the chain has 2 stages, so there is no stage 3", ""},
      {&single, "stage2.vd", "describes one stage, so there is no stage 2", ""},
      {&chain, "stage1.swing", "swing is the whole design's", ""},
  };
  for (const row& r : rows) {
    CAPTURE(r.quantity);
    const std::vector<requirement> reqs{{r.quantity, 1.0, 2.0}};
    if (r.words == nullptr) {
      CHECK(resolve_requirements(*r.st, reqs).at(0).quantity == r.resolved);
      continue;
    }
    try {
      (void)resolve_requirements(*r.st, reqs);
      FAIL("accepted");
    } catch (const setting_error& e) {
      CHECK(e.field() == "requirements");
      CHECK(std::string(e.what()).find(r.words) != std::string::npos);
      CHECK(std::string(e.what()).find("--") == std::string::npos);
    }
  }
}

TEST_CASE("trimmers for two stages over one batch: each part's pair of values is the closed form") {
  // A shared supply resistance couples the stages: the rail sits at VDD - Rsup (id1 + id2).
  // With vd_k = target on both, the rail and currents are linear in each other:
  //   id_k = (rail - vd) / RD_k,  rail = (VDD + Rsup vd G) / (1 + Rsup G),  G = 1/RD1 + 1/RD2,
  // and each part's source resistor is the self-bias closed form rs = |vp| (1 - sqrt(id/idss)) / id.
  const double vdd = 12.0, rsup = 1e3, rd1 = 3.3e3, rd2 = 2.7e3, vd = 6.0;
  const stage st = test::stage_from(test::two_stage_text(vdd, rsup, 4.5e-3, -1.6, 680.0, rd1, 4e-3, -1.4, 470.0, rd2));
  spread_settings s;
  s.idss_a = base::value_range{3e-3, 8e-3};
  s.vp_v = base::value_range{-3.0, -1.0};
  s.runs = 40;
  const std::vector<tune_pair> pairs{{"stage1.source.resistor", {target_kind::vd, vd, 0}},
                                     {"stage2.source.resistor", {target_kind::vd, vd, 1}}};
  const trim_set set = size_trimmers(st, pairs, s, base::eseries::e24);
  const double g = 1 / rd1 + 1 / rd2;
  const double rail = (vdd + rsup * vd * g) / (1 + rsup * g);
  const double id1 = (rail - vd) / rd1, id2 = (rail - vd) / rd2;
  REQUIRE(set.trims.size() == 2);
  CHECK(set.settled == s.runs);
  CHECK(set.unsettled == 0);
  // The stages interact through the shared resistance, so a part takes more than one round.
  CHECK(set.most_rounds > 1);
  // Settled within 1 ppm + 1 uV of the drain target: about 3e-6 of each current, so each
  // resistor within 1e-4 of its closed form.
  for (int i = 0; i < s.runs; ++i) {
    CAPTURE(i);
    const spread_draw d = draw_part(s, st, i);
    const double rs1 = std::fabs(d.vp_v) * (1 - std::sqrt(id1 / d.idss_a)) / id1;
    const double rs2 = std::fabs(d.later[0].vp_v) * (1 - std::sqrt(id2 / d.later[0].idss_a)) / id2;
    CHECK(set.trims[0].exact_ohm[static_cast<std::size_t>(i)] == doctest::Approx(rs1).epsilon(1e-4));
    CHECK(set.trims[1].exact_ohm[static_cast<std::size_t>(i)] == doctest::Approx(rs2).epsilon(1e-4));
  }
  for (const trim_result& t : set.trims) {
    CHECK(t.fixed_ohm <= t.r_min);
    CHECK(t.fixed_ohm + t.trimmer_ohm >= t.r_max);
  }
  CHECK(set.coverage_all == 1.0);
}

TEST_CASE("over a bag of measured parts: every part once, each by its self-bias closed form") {
  // Three measured parts (IDSS at VDS 9 V), a stage with lambda 0.01: each part's model IDSS
  // is idss / (1 + 0.01 * 9) (level-1 saturation, Massobrio & Antognetti); a part with its own
  // fitted lambda keeps it. Run i takes part i, and its current is the self-bias closed form.
  const double vp_stage = -1.6, rs = 680.0, rd = 3.3e3, vdd = 9.0;
  const stage st = test::stage_from(test::self_bias_text(vdd, 4.5e-3, vp_stage, rs, rd, "") + "");
  auto measured = [](const char* name, double idss, double vp, double lambda) {
    part_figures p;
    p.name = name;
    p.idss_a = idss;
    p.vp_v = vp;
    p.lambda_per_v = lambda;
    p.idss_vds_v = 9.0;
    return p;
  };
  stage lam = st;
  lam.jfet.lambda_per_v = 0.01;
  const std::vector<bag_part> bag =
      parts_for_spread({measured("A", 5e-3, -1.9, 0.0), measured("B", 3e-3, -1.1, 0.0), measured("C", 7e-3, -2.4, 0.02)}, lam);
  REQUIRE(bag.size() == 3);
  CHECK(bag[0].idss_a == doctest::Approx(5e-3 / 1.09).epsilon(1e-15));
  CHECK(std::isnan(bag[0].lambda_per_v));
  CHECK(bag[2].idss_a == doctest::Approx(7e-3 / 1.18).epsilon(1e-15));
  CHECK(bag[2].lambda_per_v == 0.02);
  spread_settings s;
  s.parts = parts_for_spread({measured("A", 5e-3, -1.9, 0.0), measured("B", 3e-3, -1.1, 0.0), measured("C", 7e-3, -2.4, 0.0)}, st);
  s.runs = 3;
  const spread_result r = run_spread(st, s, {});
  REQUIRE(r.runs.size() == 3);
  const double idss[] = {5e-3, 3e-3, 7e-3}, vp[] = {-1.9, -1.1, -2.4};
  for (int i = 0; i < 3; ++i) {
    CAPTURE(i);
    CHECK(r.runs[static_cast<std::size_t>(i)].draw.bag_index == i);
    CHECK(r.runs[static_cast<std::size_t>(i)].values.at("id") == doctest::Approx(self_bias_id(idss[i], vp[i], rs)).epsilon(1e-9).scale(0));
  }
  // The trimmer spans exactly the bag: the smallest and largest need of the three parts.
  const double vd = 4.5, id = (vdd - vd) / rd;
  const trim_result t = size_trimmer(st, "source.resistor", {target_kind::vd, vd}, s, base::eseries::e24);
  std::vector<double> need;
  for (int i = 0; i < 3; ++i) need.push_back(std::fabs(vp[i]) * (1 - std::sqrt(id / idss[i])) / id);
  CHECK(t.r_min == doctest::Approx(*std::min_element(need.begin(), need.end())).epsilon(1e-8));
  CHECK(t.r_max == doctest::Approx(*std::max_element(need.begin(), need.end())).epsilon(1e-8));
  CHECK(t.coverage == 1.0);
  // Drawn from the bag: every run takes one of the three.
  s.parts_drawn = true;
  s.runs = 50;
  for (int i = 0; i < s.runs; ++i) {
    const spread_draw d = draw_part(s, st, i);
    REQUIRE(d.bag_index >= 0);
    REQUIRE(d.bag_index < 3);
    CHECK(d.idss_a == s.parts[static_cast<std::size_t>(d.bag_index)].idss_a);
  }
  // Ranges beside parts, a count of runs that is not the bag's, a part of the other polarity.
  spread_settings bad = s;
  bad.parts_drawn = false;
  CHECK_THROWS_AS(run_spread(st, bad, {}), setting_error);
  bad.runs = 3;
  bad.idss_a = base::value_range{2e-3, 8e-3};
  CHECK_THROWS_AS(run_spread(st, bad, {}), setting_error);
  part_figures pch = measured("P", 5e-3, 1.9, 0.0);
  pch.p_channel = true;
  CHECK_THROWS_WITH_AS(parts_for_spread({pch}, st), doctest::Contains("part 'P' is p-channel"), setting_error);
}

}  // namespace test_spread
