// A bag of parts: one CSV of many parts' readings, the parts table, and IDSS at its VDS.
#include <cmath>
#include <sstream>
#include <string>
#include <vector>

#include <doctest/doctest.h>

#include "base/csv.hpp"
#include "base/error.hpp"
#include "model/circuit/stage_file.hpp"
#include "model/device/fit.hpp"
#include "support/bench_readings.hpp"
#include "model/device/jfet.hpp"

namespace test_parts {

using namespace pinchoff;
using namespace pinchoff::model;

namespace {
// Readings from the closed forms (tests/support/bench_readings.hpp).
using pinchoff::testing::shockley;
double jig(double idss, double vp, double rs) { return pinchoff::testing::self_bias_current(idss, vp, rs); }
std::string num(double v) {
  std::ostringstream os;
  os.precision(12);
  os << v;
  return os.str();
}
struct made_part {
  const char* name;
  double idss, vp;
};
const made_part bag[] = {{"A1", 5.2e-3, -1.9}, {"A2", 3.1e-3, -1.15}, {"B7", 8.4e-3, -2.6}};
}  // namespace

TEST_CASE("a parts file of gate sweeps gives back every part to 1e-6") {
  // Closed form: each row is Shockley's current at its VGS; the rows of the parts are
  // interleaved, so the part column alone tells them apart.
  std::string csv = "part,vgs_v,id_a\n";
  for (double vgs : {0.0, -0.3, -0.6, -0.9})
    for (const made_part& p : bag) csv += std::string(p.name) + "," + num(vgs) + "," + num(shockley(p.idss, p.vp, 0, vgs, 0)) + "\n";
  const base::csv_table t = base::parse_csv(csv, "bag.csv", bench_layout());
  const std::vector<part_readings> parts = parts_from_table(t);
  REQUIRE(parts.size() == 3);
  for (std::size_t k = 0; k < 3; ++k) {
    CAPTURE(bag[k].name);
    CHECK(parts[k].name == bag[k].name);
    CHECK(parts[k].table.readings.size() == 4);
    CHECK(parts[k].first_line == static_cast<int>(2 + k));
    const fit_result f = fit_square_law(parts[k].table.kind, parts[k].table.readings);
    CHECK(std::fabs(f.idss_a / bag[k].idss - 1) < 1e-6);
    CHECK(std::fabs(f.vp_v / bag[k].vp - 1) < 1e-6);
  }
}

TEST_CASE("a self-bias jig read as its source voltage: VGS = -VS, ID = VS/RS") {
  // The jig's closed form gives each part's current at each source resistor; the meter
  // reads VS = ID RS, written with a space before the unit as a display is copied.
  std::string csv = "part,rs_ohm,vs_v,vds_v\n";
  for (const made_part& p : bag)
    for (double rs : {47.0, 220.0, 1e3, 4.7e3}) {
      const double id = jig(p.idss, p.vp, rs);
      csv += std::string(p.name) + "," + num(rs) + " Ω," + num(id * rs * 1e3) + " mV,9\n";
    }
  const base::csv_table t = base::parse_csv(csv, "jig.csv", bench_layout());
  const std::vector<part_figures> figs = read_parts(t);
  REQUIRE(figs.size() == 3);
  for (std::size_t k = 0; k < 3; ++k) {
    CAPTURE(bag[k].name);
    CHECK(figs[k].name == bag[k].name);
    CHECK(std::fabs(figs[k].idss_a / bag[k].idss - 1) < 1e-6);
    CHECK(std::fabs(figs[k].vp_v / bag[k].vp - 1) < 1e-6);
    CHECK(figs[k].idss_vds_v == 9.0);  // the readings' VDS, lambda not fitted
  }
  // A zero source resistor has no current to give.
  CHECK_THROWS_WITH_AS(read_parts(base::parse_csv("part,rs_ohm,vs_v\nX,0,0.3\nX,1k,1\n", "z.csv", bench_layout())),
                       doctest::Contains("z.csv:2: rs_ohm must be above 0"), input_error);
  CHECK_THROWS_WITH_AS(parts_from_table(base::parse_csv("part,vgs_v,id_a\n,0,5m\n", "e.csv", bench_layout())),
                       doctest::Contains("e.csv:2: the 'part' cell is empty"), input_error);
}

TEST_CASE("a cell may hold a space between the number and its unit") {
  // common practice: a meter's reading copied as it shows, "3.965 mA".
  const base::csv_table t = base::parse_csv("id_a,rs_ohm\n3.965 mA,4.7 k\n12 uA,100R\n", "u.csv", bench_layout());
  CHECK(t.rows[0][0] == doctest::Approx(3.965e-3).epsilon(1e-15));
  CHECK(t.rows[0][1] == doctest::Approx(4700.0).epsilon(1e-15));
  CHECK(t.rows[1][0] == doctest::Approx(12e-6).epsilon(1e-15));
  // Only between a number and a word: "1 2" is not twelve, and a unit of another column's kind is refused.
  CHECK_THROWS_WITH_AS(base::parse_csv("id_a\n1 2\n", "b.csv", bench_layout()), doctest::Contains("'1 2' is not a number"), input_error);
  CHECK_THROWS_AS(base::parse_csv("id_a\n3 mV\n", "b.csv", bench_layout()), input_error);
  CHECK_THROWS_AS(base::parse_csv("id_a\n3 m A\n", "b.csv", bench_layout()), input_error);
}

TEST_CASE("IDSS is reported at the readings' VDS, and idss_vds gives the model's IDSS back") {
  // Closed form: the level-1 current at VGS = 0 is idss0 (1 + lambda vds) (Massobrio &
  // Antognetti), so at the mean VDS 6.5 V the part's IDSS is idss0 (1 + 6.5 lambda).
  const double idss0 = 6.3e-3, vp = -2.2, lambda = 0.012;
  std::vector<bench_reading> rd;
  for (double vgs : {0.0, -0.4, -0.8, -1.2, -1.6})
    for (double vds : {4.0, 9.0}) rd.push_back({vgs, shockley(idss0, vp, lambda, vgs, vds), vds, true, 1});
  const fit_result f = fit_square_law(reading_kind::gate_sweep, rd);
  REQUIRE(f.lambda_fitted);
  CHECK(f.idss_vds_v == doctest::Approx(6.5).epsilon(1e-12));
  CHECK(std::fabs(f.idss_at_vds_a / (idss0 * (1 + lambda * 6.5)) - 1) < 1e-6);
  // The pasted block carries idss_vds; the stage reader divides it out again.
  const std::string text = "[supply]\nvolts = 9\n" + jfet_block(f) + "[gate]\nresistor = \"1M\"\n[drain]\nresistor = \"2k\"\n";
  CHECK(text.find("idss_vds = 6.50") != std::string::npos);
  const stage s = parse_stage(text, "pasted.toml");
  CHECK(std::fabs(s.jfet.idss_a / idss0 - 1) < 1e-3);  // the block rounds to 4 digits
  // A datasheet-style figure: 5 mA at VDS = 10 V with lambda 0.01 is a model IDSS of 5m / 1.1,
  // and the model's own current at VGS = 0, VDS = 10 V is 5 mA again.
  const stage d = parse_stage("[supply]\nvolts = 9\n[jfet]\nidss = \"5m\"\nidss_vds = 10\nvp = -2\nlambda = 0.01\n"
                              "[gate]\nresistor = \"1M\"\n[drain]\nresistor = \"2k\"\n",
                              "d.toml");
  CHECK(d.jfet.idss_a == doctest::Approx(5e-3 / 1.1).epsilon(1e-12));
  CHECK(drain_current(d.jfet, 0.0, 10.0).id_a == doctest::Approx(5e-3).epsilon(1e-12));
  CHECK_THROWS_WITH_AS(parse_stage("[supply]\nvolts = 9\n[jfet]\nbeta = 0.001\nvto = -2\nidss_vds = 10\n[gate]\nresistor = \"1M\"\n"
                                   "[drain]\nresistor = \"2k\"\n",
                                   "b.toml"),
                       doctest::Contains("no meaning beside beta"), input_error);
}

TEST_CASE("the parts table reads back as the parts it lists") {
  const base::csv_table t = base::parse_csv(
      "part,idss_a,vp_v,lambda_per_v,idss_vds_v,idss_se_a,vp_se_v,lambda_se_per_v,readings,rms_misfit_percent,flagged_lines\n"
      "A1,0.0052,-1.9,0.01,9,1e-6,,,4,0.1,\n"
      "\"P,2\",-0.003,1.2,0,0,,,,3,0.2,7 9\n",
      "parts.csv", bench_layout());
  REQUIRE(is_parts_table(t));
  const std::vector<part_figures> p = read_parts(t);
  REQUIRE(p.size() == 2);
  CHECK(p[0].name == "A1");
  CHECK(p[0].idss_a == 0.0052);
  CHECK(p[0].model_idss_a() == doctest::Approx(0.0052 / 1.09).epsilon(1e-15));
  CHECK(p[1].name == "P,2");
  CHECK(p[1].p_channel);
  CHECK(p[1].idss_a == 0.003);
  CHECK_THROWS_WITH_AS(read_parts(base::parse_csv("part,idss_a,vp_v\nA,5m,-2\nA,4m,-1\n", "d.csv", bench_layout())),
                       doctest::Contains("d.csv:3: part 'A' is listed twice"), input_error);
  CHECK_THROWS_WITH_AS(read_parts(base::parse_csv("part,idss_a,vp_v\nA,5m,2\n", "s.csv", bench_layout())),
                       doctest::Contains("opposite signs"), input_error);
  CHECK_THROWS_WITH_AS(read_parts(base::parse_csv("part,idss_a,vp_v\nA,5,-2\n", "r.csv", bench_layout())),
                       doctest::Contains("r.csv:2: idss_a"), input_error);
}

}  // namespace test_parts
