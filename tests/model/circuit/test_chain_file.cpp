// Reading chain files: what each key of a [[stage]] becomes, the shared sections, overrides
// by stage, and messages that name the stage's key and its place in the file.
#include <string>
#include <vector>

#include <doctest/doctest.h>

#include "base/error.hpp"
#include "model/circuit/network.hpp"
#include "model/circuit/stage_file.hpp"

namespace test_chain_file {

using namespace pinchoff;
using namespace pinchoff::model;

namespace {

const std::string chain_text = R"(name = "two"
[supply]
volts = 9
resistance = "47"
capacitance = "100u"
[signal]
impedance = "10k"
[output]
load = "100k"
[[stage]]
name = "first"
[stage.jfet]
idss = "5m"
vp = -1.8
[stage.gate]
coupling_cap = "47n"
resistor = "1M"
[stage.drain]
resistor = "3.9k"
shunt_cap = "1n"
[stage.source]
resistor = "680"
[stage.output]
coupling_cap = "100n"
[[stage]]
topology = "source-follower"
between = [ { series = "10k" }, { shunt_cap = "2n2" }, { pot = "100k", position = 0.5, taper = "log" } ]
[stage.rail]
resistance = "100"
capacitance = "47u"
[stage.jfet]
idss = "8m"
vp = -2.5
[stage.gate]
resistor = "1M"
[stage.source]
resistor = "2.2k"
[stage.output]
coupling_cap = "1u"
)";

std::string error_of(const std::string& text, std::vector<stage_override> overrides = {}) {
  try {
    parse_stage(text, "chain.toml", overrides);
  } catch (const std::exception& e) {
    return e.what();
  }
  return "";
}

}  // namespace

TEST_CASE("a chain file gives each stage its own parts and the chain the shared ones") {
  const stage st = parse_stage(chain_text, "chain.toml");
  REQUIRE(st.stage_count() == 2);
  CHECK(st.is_chain());
  CHECK(st.part(0).label == "first");
  CHECK(st.part(0).drain_resistor_ohm == doctest::Approx(3.9e3));
  CHECK(st.part(0).drain_shunt_cap_f == doctest::Approx(1e-9).epsilon(1e-12).scale(0));
  CHECK(st.part(0).output.load_ohm == 0.0);
  CHECK(st.part(1).topo == topology::source_follower);
  CHECK(st.part(1).rail.resistance_ohm == doctest::Approx(100.0));
  CHECK(st.part(1).rail.capacitance_f == doctest::Approx(47e-6).epsilon(1e-12).scale(0));
  REQUIRE(st.part(1).between.size() == 3);
  CHECK(st.part(1).between[0].kind == between_kind::series);
  CHECK(st.part(1).between[1].kind == between_kind::shunt_cap);
  CHECK(st.part(1).between[1].value == doctest::Approx(2.2e-9).epsilon(1e-12).scale(0));
  CHECK(st.part(1).between[2].kind == between_kind::pot);
  CHECK(st.part(1).between[2].taper == pot_taper::log);
  CHECK(st.last().output.load_ohm == doctest::Approx(100e3));
  CHECK(st.supply.resistance_ohm == doctest::Approx(47.0));
  CHECK(st.signal_impedance_ohm == doctest::Approx(10e3));

  const network net = build_network(st);
  CHECK(net.devices() == 2);
  REQUIRE(net.stages.size() == 2);
  // The follower's drain is its own filtered rail, and the log pot at half rotation leaves
  // 10 % of its track below the wiper.
  CHECK(net.node_names[static_cast<std::size_t>(net.jfets[1].drain)] == "stage2.rail");
  bool bottom = false;
  for (const net_resistor& r : net.resistors)
    if (r.key == "stage2.between[3].pot.bottom") bottom = r.ohm == doctest::Approx(10e3);
  CHECK(bottom);
}

TEST_CASE("overrides name a stage of the chain") {
  const std::vector<stage_override> set{{"drain", "resistor", "4.7k", 1}, {"between", "3.position", "1", 2},
                                        {"supply", "volts", "12"}};
  const stage st = parse_stage(chain_text, "chain.toml", set);
  CHECK(st.part(0).drain_resistor_ohm == doctest::Approx(4.7e3));
  CHECK(st.part(1).between[2].position == doctest::Approx(1.0));
  CHECK(st.supply.volts_v == doctest::Approx(12.0));
  CHECK(override_key(set[0]) == "stage1.drain.resistor");

  CHECK(error_of(chain_text, {{"drain", "resistor", "1k"}}).find("name the stage, as stage1.drain.resistor") !=
        std::string::npos);
  CHECK(error_of(chain_text, {{"drain", "resistor", "1k", 3}}).find("no stage 3") != std::string::npos);
  CHECK(error_of(chain_text, {{"between", "4.position", "1", 2}}).find("no element 4") != std::string::npos);
  CHECK(error_of(chain_text, {{"drain", "resistor", "-1", 1}}).find("stage1.drain.resistor must not be negative") !=
        std::string::npos);
}

TEST_CASE("chain messages give the stage's key and its line and column") {
  std::string t = chain_text;
  t.replace(t.find("resistor = \"3.9k\""), 17, "resistor = \"-3.9k\"");
  CHECK(error_of(t).find("chain.toml:19:12: stage1.drain.resistor must not be negative") != std::string::npos);
  t = chain_text;
  t.replace(t.find("position = 0.5"), 14, "position = 2");
  CHECK(error_of(t).find("chain.toml:27:") != std::string::npos);
  CHECK(error_of(t).find("stage2.between[3].position") != std::string::npos);
  // A node only capacitors reach (between stage 1's output capacitor and stage 2's gate
  // capacitor, with nothing in between to ground): refused, named by its node.
  t = chain_text;
  t.replace(t.find(", { pot = \"100k\", position = 0.5, taper = \"log\" }"), 50, "");
  t.replace(t.find("[stage.gate]\nresistor = \"1M\"\n[stage.source]"), 12, "[stage.gate]\ncoupling_cap = \"1u\"");
  const std::string m = error_of(t);
  CAPTURE(m);
  // Located at the [[stage]] header of the stage the node belongs to.
  CHECK(m.find("chain.toml:10:1: the stage1.output node has no DC path") != std::string::npos);
}

}  // namespace test_chain_file
