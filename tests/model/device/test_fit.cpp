// Fitting square-law parameters to bench readings.
#include <cmath>
#include <random>
#include <vector>

#include <doctest/doctest.h>

#include "base/csv.hpp"
#include "base/error.hpp"
#include "model/device/fit.hpp"
#include "support/bench_readings.hpp"
#include "model/circuit/stage_file.hpp"

namespace test_fit {

using namespace pinchoff;
using namespace pinchoff::model;

namespace {
// Readings from the closed forms (tests/support/bench_readings.hpp).
using pinchoff::testing::shockley;
double jig(double idss, double vp, double rs) { return pinchoff::testing::self_bias_current(idss, vp, rs); }
double unit(std::mt19937_64& g) { return static_cast<double>(g() >> 11) * 0x1.0p-53; }
double gauss(std::mt19937_64& g) {
  // Box-Muller (Box & Muller 1958) on the raw generator, reproducible across platforms.
  const double u1 = 1.0 - unit(g), u2 = unit(g);
  return std::sqrt(-2.0 * std::log(u1)) * std::cos(2.0 * 3.141592653589793 * u2);
}
}  // namespace

TEST_CASE("exact gate-sweep readings give back the part to 1e-6") {
  // Closed form readings from Shockley's equation with lambda; the fit must recover them.
  const double idss = 6.3e-3, vp = -2.2, lambda = 0.012;
  std::vector<bench_reading> rd;
  int line = 2;
  for (double vgs : {0.0, -0.4, -0.8, -1.2, -1.6, -1.9}) {
    for (double vds : {4.0, 9.0}) rd.push_back({vgs, shockley(idss, vp, lambda, vgs, vds), vds, true, line++});
  }
  const fit_result f = fit_square_law(reading_kind::gate_sweep, rd);
  CHECK(f.lambda_fitted);
  CHECK(f.idss_a == doctest::Approx(idss).epsilon(1e-6).scale(0));
  CHECK(f.vp_v == doctest::Approx(vp).epsilon(1e-6));
  CHECK(f.lambda_per_v == doctest::Approx(lambda).epsilon(1e-6).scale(0));
  CHECK(f.rms_residual_ratio < 1e-9);
}

TEST_CASE("exact self-bias jig readings give back the part to 1e-6") {
  const double idss = 3.1e-3, vp = -1.15;
  std::vector<bench_reading> rd;
  for (double rs : {47.0, 220.0, 1e3, 4.7e3}) rd.push_back({rs, jig(idss, vp, rs), 0.0, false, 1});
  const fit_result f = fit_square_law(reading_kind::self_bias_jig, rd);
  CHECK_FALSE(f.lambda_fitted);
  CHECK(f.idss_a == doctest::Approx(idss).epsilon(1e-6).scale(0));
  CHECK(f.vp_v == doctest::Approx(vp).epsilon(1e-6));
}

TEST_CASE("a p-channel part is fitted from bench signs") {
  // Mirror symmetry (common practice): negated readings of an n-channel part.
  std::vector<bench_reading> rd;
  for (double vgs : {0.0, 0.5, 1.0, 1.5}) rd.push_back({vgs, -shockley(4e-3, -2.0, 0.0, -vgs, 0.0), 0.0, false, 1});
  const fit_result f = fit_square_law(reading_kind::gate_sweep, rd);
  CHECK(f.p_channel);
  CHECK(f.idss_a == doctest::Approx(4e-3).epsilon(1e-6).scale(0));
  CHECK(f.vp_v == doctest::Approx(2.0).epsilon(1e-6));
}

TEST_CASE("two readings determine the part exactly") {
  // Closed form: two points fix the two parameters of Shockley's equation; with a
  // self-bias jig, id at two source resistors (Boylestad & Nashelsky ch. 7 quadratic).
  const std::vector<bench_reading> two{{100.0, jig(4e-3, -1.4, 100.0), 0, false, 2},
                                       {2200.0, jig(4e-3, -1.4, 2200.0), 0, false, 3}};
  const fit_result f = fit_square_law(reading_kind::self_bias_jig, two);
  CHECK(f.idss_a == doctest::Approx(4e-3).epsilon(1e-6).scale(0));
  CHECK(f.vp_v == doctest::Approx(-1.4).epsilon(1e-6));
  CHECK(std::isnan(f.idss_se_a));
  CHECK(jfet_block(f).find("no error estimate") != std::string::npos);
}

TEST_CASE("with 1 % reading noise the truth lies within the reported standard errors") {
  // Statistics of least squares (any text on regression): with the scatter estimated
  // from 7 - 2 = 5 degrees of freedom, |estimate - truth| / SE follows Student's t with 5
  // degrees of freedom, and P(|t| < 2) = 0.898 (t table, e.g. Abramowitz & Stegun 26.7;
  // from memory). Over 300 seeds the binomial spread is 1.7 %, so we ask for 84 % to 95 %.
  const double idss = 5.0e-3, vp = -1.8;
  int within_idss = 0, within_vp = 0;
  constexpr int seeds = 300;
  for (int seed = 1; seed <= seeds; ++seed) {
    std::mt19937_64 g(static_cast<std::uint64_t>(seed));
    std::vector<bench_reading> rd;
    for (double vgs : {0.0, -0.25, -0.5, -0.75, -1.0, -1.25, -1.5})
      rd.push_back({vgs, shockley(idss, vp, 0.0, vgs, 0.0) * (1.0 + 0.01 * gauss(g)), 0.0, false, 1});
    const fit_result f = fit_square_law(reading_kind::gate_sweep, rd);
    if (std::fabs(f.idss_a - idss) <= 2.0 * f.idss_se_a) ++within_idss;
    if (std::fabs(f.vp_v - vp) <= 2.0 * f.vp_se_v) ++within_vp;
  }
  CAPTURE(within_idss);
  CAPTURE(within_vp);
  CHECK(within_idss >= 0.84 * seeds);
  CHECK(within_vp >= 0.84 * seeds);
  CHECK(within_idss <= 0.95 * seeds);
  CHECK(within_vp <= 0.95 * seeds);
}

TEST_CASE("an outlier row is flagged") {
  std::vector<bench_reading> rd;
  int line = 2;
  for (double vgs : {0.0, -0.2, -0.4, -0.6, -0.8, -1.0, -1.2, -1.4})
    rd.push_back({vgs, shockley(5e-3, -1.8, 0.0, vgs, 0.0) * (1.0 + 0.002 * ((line % 3) - 1)), 0.0, false, line++});
  rd[3].id_a *= 1.3;  // a misread meter
  const fit_result f = fit_square_law(reading_kind::gate_sweep, rd);
  CHECK(f.rows[3].flagged);
  int flagged = 0;
  for (const auto& r : f.rows) flagged += r.flagged ? 1 : 0;
  CHECK(flagged == 1);
}

TEST_CASE("readings no square-law part can produce are refused") {
  const std::vector<bench_reading> rising{{0.0, 1e-3, 0, false, 2}, {-0.5, 2e-3, 0, false, 3}, {-1.0, 3e-3, 0, false, 4}};
  CHECK_THROWS_AS(fit_square_law(reading_kind::gate_sweep, rising), input_error);
  const std::vector<bench_reading> one{{0.0, 5e-3, 0, false, 2}};
  CHECK_THROWS_WITH_AS(fit_square_law(reading_kind::gate_sweep, one), doctest::Contains("too few readings"), input_error);
  const std::vector<bench_reading> same{{-0.5, 3e-3, 0, false, 2}, {-0.5, 3.1e-3, 0, false, 3}};
  CHECK_THROWS_WITH_AS(fit_square_law(reading_kind::gate_sweep, same), doctest::Contains("same vgs_v"), input_error);
  const std::vector<bench_reading> zero{{0.0, 5e-3, 0, false, 2}, {-0.5, 3e-3, 0, false, 3}, {-3.0, 0.0, 0, false, 4}};
  CHECK_THROWS_WITH_AS(fit_square_law(reading_kind::gate_sweep, zero), doctest::Contains("line 4"), input_error);
}

TEST_CASE("the pasted block reads back as the fitted part") {
  std::vector<bench_reading> rd;
  for (double vgs : {0.0, -0.5, -1.0, -1.5}) rd.push_back({vgs, shockley(5.17e-3, -1.96, 0.0, vgs, 0.0), 0.0, false, 1});
  const fit_result f = fit_square_law(reading_kind::gate_sweep, rd);
  const std::string text = "[supply]\nvolts = 9\n" + jfet_block(f) + "[gate]\nresistor = \"1M\"\n[drain]\nresistor = \"2k\"\n";
  const stage s = parse_stage(text, "pasted.toml");
  CHECK(s.jfet.idss_a == doctest::Approx(5.17e-3).epsilon(1e-3).scale(0));
  CHECK(s.jfet.vp_v == doctest::Approx(-1.96).epsilon(1e-3));
}

TEST_CASE("bad CSV names the row and the column") {
  try {
    base::parse_csv("vgs_v,id_a\n0,5m\n-0.5,three\n", "bench.csv");
    FAIL("expected an error");
  } catch (const input_error& e) {
    const std::string m = e.what();
    CHECK(m.find("bench.csv:3") != std::string::npos);
    CHECK(m.find("'id_a' (column 2)") != std::string::npos);
    CHECK(m.find("three") != std::string::npos);
  }
  CHECK_THROWS_WITH_AS(base::parse_csv("vgs_v,id_a\n0\n", "b.csv"), doctest::Contains("b.csv:2"), input_error);
  CHECK_THROWS_WITH_AS(base::parse_csv("", "b.csv"), doctest::Contains("empty"), input_error);
  CHECK_THROWS_WITH_AS(base::parse_csv("a,a\n1,2\n", "b.csv"), doctest::Contains("twice"), input_error);
  const base::csv_table t = base::parse_csv("# bench notes\nvgs_v, id_a\r\n\n0, 5.1m\n\"-0.5\",2.9m\n", "b.csv");
  REQUIRE(t.rows.size() == 2);
  CHECK(t.rows[1][0] == -0.5);
  CHECK(t.line_of_row[1] == 5);
}

TEST_CASE("the outlier test agrees with refitting without each row, the method it replaces") {
  // The deleted-residual test of Cook & Weisberg (1982): row i does not fit when the fit of
  // the other rows predicts it more than 4 of their standard deviations off. The fit now
  // takes the deleted fit from the deletion identities at its linearisation (one pass, so
  // linear in rows); here each deleted fit is run in full, as it once was, and the two must
  // flag the same rows, except within 10 % of the threshold where the linearisation may
  // round either way.
  std::mt19937_64 g(2024);
  int compared = 0, near_threshold = 0;
  for (int table = 0; table < 12; ++table) {
    std::vector<bench_reading> rd;
    for (int k = 0; k < 10; ++k) {
      const double vgs = -1.5 * k / 9.0;
      rd.push_back({vgs, shockley(5e-3, -1.8, 0.0, vgs, 0.0) * (1.0 + 0.01 * gauss(g)), 0.0, false, k + 2});
    }
    rd[static_cast<std::size_t>(table % 10)].id_a *= 1.0 + 0.02 * table;  // a misread of 0 to 22 %
    const fit_result f = fit_square_law(reading_kind::gate_sweep, rd);
    for (std::size_t i = 0; i < rd.size(); ++i) {
      std::vector<bench_reading> others = rd;
      others.erase(others.begin() + static_cast<std::ptrdiff_t>(i));
      const fit_result loo = fit_square_law(reading_kind::gate_sweep, others);
      const double s_loo = loo.rms_residual_ratio * std::sqrt((others.size()) / (others.size() - 2.0));
      const double pred = shockley(loo.idss_a, loo.vp_v, 0.0, rd[i].x, 0.0) / rd[i].id_a - 1.0;
      const double ratio = std::fabs(pred) / s_loo;
      CAPTURE(table);
      CAPTURE(i);
      CAPTURE(ratio);
      if (std::fabs(ratio - 4.0) < 0.4) {
        ++near_threshold;
        continue;
      }
      CHECK(f.rows[i].flagged == (ratio > 4.0));
      ++compared;
    }
  }
  CAPTURE(near_threshold);
  CHECK(compared >= 100);
}

TEST_CASE("a long bench table fits, with its outlier found") {
  // 20,000 readings (a curve tracer's export): the leave-one-out test once refitted the
  // table once per row, so this took minutes; the result must still find the one bad row.
  std::mt19937_64 g(99);
  std::vector<bench_reading> rd;
  for (int k = 0; k < 20000; ++k) {
    const double vgs = -1.6 * k / 20000.0;
    rd.push_back({vgs, shockley(5e-3, -1.8, 0.0, vgs, 0.0) * (1.0 + 0.005 * gauss(g)), 0.0, false, k + 2});
  }
  rd[777].id_a *= 1.2;
  const fit_result f = fit_square_law(reading_kind::gate_sweep, rd);
  CHECK(f.idss_a == doctest::Approx(5e-3).epsilon(1e-3).scale(0));
  CHECK(f.vp_v == doctest::Approx(-1.8).epsilon(1e-3));
  CHECK(f.rows[777].flagged);
  int flagged = 0;
  for (const auto& r : f.rows) flagged += r.flagged ? 1 : 0;
  CHECK(flagged <= 6);  // the bad row and chance: 4 standard deviations, 20,000 normal rows, about 1.3 (Poisson, at most 5 in 99.8 %)
}

}  // namespace test_fit
