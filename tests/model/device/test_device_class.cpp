// Device classes: the bundled file, a stage naming a class, spreads over a class.
#include <doctest/doctest.h>

#include "base/error.hpp"
#include "model/device/device_class.hpp"
#include "model/analysis/spread.hpp"
#include "model/circuit/stage_file.hpp"
#include "model/circuit/network.hpp"
#include "model/circuit/operating_point.hpp"
#include "model/analysis/warnings.hpp"

namespace test_device_class {

using namespace pinchoff;
using namespace pinchoff::model;

namespace {
const std::string devices = std::string(PINCHOFF_PRESETS_DIR) + "/devices.toml";
const std::string stage_text =
    "[supply]\nvolts = 9\n[jfet]\nclass = \"general-purpose\"\n[gate]\nresistor = \"1M\"\n[drain]\nresistor = \"3.3k\"\n"
    "[source]\nresistor = \"680\"\n";
}  // namespace

TEST_CASE("the bundled classes are well formed") {
  const std::vector<device_class> all = read_device_classes(devices);
  REQUIRE(all.size() >= 3);
  for (const device_class& c : all) {
    CAPTURE(c.name);
    CHECK_FALSE(c.summary.empty());
    CHECK(c.idss_a.lo > 0);
    CHECK(c.idss_a.lo < c.idss_a.hi);
    CHECK(c.vp_v.hi < 0);
    // Typical values lie inside the class's own ranges.
    CHECK(c.typical_idss_a >= c.idss_a.lo);
    CHECK(c.typical_idss_a <= c.idss_a.hi);
    CHECK(c.typical_vp_v >= c.vp_v.lo);
    CHECK(c.typical_vp_v <= c.vp_v.hi);
  }
}

TEST_CASE("a stage naming a class takes its typical values; given values win") {
  const device_class gp = find_device_class("general-purpose", devices);
  const stage s = parse_stage(stage_text, "test.toml", {}, devices);
  REQUIRE(s.jfet_class);
  CHECK(s.jfet.idss_a == gp.typical_idss_a);
  CHECK(s.jfet.vp_v == gp.typical_vp_v);
  CHECK(s.jfet.lambda_per_v == gp.lambda_per_v);
  CHECK(s.jfet.cgs_f == gp.cgs_f);
  std::string with_idss = stage_text;
  with_idss.replace(with_idss.find("class"), 5, "idss = \"7m\"\nclass");
  CHECK(parse_stage(with_idss, "test.toml", {}, devices).jfet.idss_a == doctest::Approx(7e-3).epsilon(1e-15));
  std::string p = stage_text;
  p.replace(p.find("volts = 9"), 9, "volts = -9");
  p.replace(p.find("class"), 5, "polarity = \"p\"\nclass");
  CHECK(parse_stage(p, "test.toml", {}, devices).jfet.vp_v == -gp.typical_vp_v);
}

TEST_CASE("an unknown class is named with the known ones") {
  std::string bad = stage_text;
  bad.replace(bad.find("general-purpose"), 15, "general-purpos");
  try {
    parse_stage(bad, "bass.toml", {}, devices);
    FAIL("expected an error");
  } catch (const input_error& e) {
    const std::string m = e.what();
    CHECK(m.find("bass.toml:4:9") != std::string::npos);
    CHECK(m.find("did you mean 'general-purpose'") != std::string::npos);
  }
}

TEST_CASE("a spread over a class stays inside the class's ranges") {
  const stage s = parse_stage(stage_text, "test.toml", {}, devices);
  spread_settings set;
  set.idss_a = s.jfet_class->idss_a;
  set.vp_v = s.jfet_class->vp_v;
  set.runs = 400;
  for (int i = 0; i < set.runs; ++i) {
    const spread_draw d = draw_part(set, s, i);
    CHECK(d.idss_a >= s.jfet_class->idss_a.lo);
    CHECK(d.idss_a <= s.jfet_class->idss_a.hi);
    CHECK(d.vp_v >= s.jfet_class->vp_v.lo);
    CHECK(d.vp_v <= s.jfet_class->vp_v.hi);
  }
}

TEST_CASE("a class's drain-source rating reaches the stage, and a drain above it warns") {
  // The bundled general-purpose class is rated 25 V (typical of small-signal parts of the
  // kind, common practice). At a 46 V supply the drain sits about 41 V above the source; at
  // 30 V with a large drain resistor the rest VDS is under 25 V, but the drain reaches the
  // rail when the part cuts off (common practice).
  auto stage_at = [](const char* volts, const char* rd) {
    std::string t = stage_text;
    t.replace(t.find("volts = 9"), 9, std::string("volts = ") + volts);
    t.replace(t.find("\"3.3k\""), 6, std::string("\"") + rd + "\"");
    return parse_stage(t, "class-stage.toml", {}, devices);
  };
  auto warnings = [](const stage& s) {
    const network net = build_network(s);
    std::string all;
    for (const std::string& w : operating_warnings(s, net, solve_operating_point(net))) all += w + "\n";
    return all;
  };
  const stage hot = stage_at("46", "3.3k");
  REQUIRE(hot.ratings.vds_max_v.has_value());
  CHECK(*hot.ratings.vds_max_v == 25.0);
  CHECK(warnings(hot).find("exceeds the rating vds_max 25") != std::string::npos);
  const std::string rail = warnings(stage_at("30", "15k"));
  CHECK(rail.find("the supply 30") != std::string::npos);
  CHECK(rail.find("drain reaches the rail") != std::string::npos);
  CHECK(warnings(stage_at("9", "3.3k")).find("vds_max") == std::string::npos);
  // A stage's own rating wins over its class's.
  std::string own = stage_text;
  own.replace(own.find("class = "), 8, "vds_max = 50\nclass = ");
  CHECK(*parse_stage(own, "own.toml", {}, devices).ratings.vds_max_v == 50.0);
}

}  // namespace test_device_class
