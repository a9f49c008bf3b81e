// The reader's sources and feeds: [signal] kind and a capsule's parts, [supply] phantom.
#include <string>

#include <doctest/doctest.h>

#include "base/error.hpp"
#include "model/analysis/warnings.hpp"
#include "model/circuit/network.hpp"
#include "model/circuit/operating_point.hpp"
#include "support/stages.hpp"

namespace test_source_file {

using namespace pinchoff;
using namespace pinchoff::model;

namespace {
const std::string follower = "[jfet]\nidss = \"6m\"\nvp = -1.5\n[gate]\nresistor = \"1G\"\n"
                             "[source]\nresistor = \"1.5k\"\n";
}  // namespace

TEST_CASE("a named phantom feed sets the voltage and both legs' feed resistance of IEC 61938") {
  struct row {
    const char* source;
    const char* name;
    double volts, both_legs_ohm, max_a;
  };
  // IEC 61938 (from memory): one leg's resistance, halved for the two legs in parallel.
  const row rows[]{
      {"IEC 61938 P48: 48 V, 6.8 kΩ a leg, 10 mA", "P48", 48.0, 3400.0, 10e-3},
      {"IEC 61938 P24: 24 V, 1.2 kΩ a leg, 10 mA", "P24", 24.0, 600.0, 10e-3},
      {"IEC 61938 P12: 12 V, 680 Ω a leg, 15 mA", "P12", 12.0, 340.0, 15e-3},
  };
  for (const row& r : rows) {
    CAPTURE(r.source);
    const stage st = test::stage_from("topology = \"source-follower\"\n[supply]\nphantom = \"" + std::string(r.name) + "\"\n" + follower);
    REQUIRE(st.supply.phantom != nullptr);
    CHECK(st.supply.volts_v == doctest::Approx(r.volts).epsilon(1e-15));
    CHECK(st.supply.resistance_ohm == doctest::Approx(r.both_legs_ohm).epsilon(1e-15));
    CHECK(st.supply.phantom->max_current_a == doctest::Approx(r.max_a).epsilon(1e-15));
  }
}

TEST_CASE("a phantom feed's current limit is checked against the feed named") {
  // A follower drawing about 2 mA: within every feed's limit, so only the caution. With
  // the source resistor at 10 Ω it draws near IDSS (6 mA at most): still within. A
  // common-source stage with a 47 Ω drain resistor and source grounded draws IDSS of a
  // 20 mA part: over P48's 10 mA and P12's 15 mA alike (IEC 61938, from memory).
  const std::string hungry = "[jfet]\nidss = \"20m\"\nvp = -2\n[gate]\nresistor = \"1M\"\n[drain]\nresistor = \"47\"\n";
  for (const char* feed : {"P48", "P12"}) {
    CAPTURE(feed);
    const stage calm = test::stage_from("topology = \"source-follower\"\n[supply]\nphantom = \"" + std::string(feed) + "\"\n" + follower);
    network net = build_network(calm);
    std::vector<std::string> w = operating_warnings(calm, net, solve_operating_point(net));
    REQUIRE(w.size() == 1);
    CHECK(w[0].find("caution: a " + std::string(feed) + " phantom feed") != std::string::npos);

    const stage over = test::stage_from("[supply]\nphantom = \"" + std::string(feed) + "\"\n" + hungry);
    net = build_network(over);
    w = operating_warnings(over, net, solve_operating_point(net));
    bool limit = false;
    for (const std::string& m : w) limit = limit || m.find("IEC 61938 allows at most") != std::string::npos;
    CHECK(limit);
  }
}

TEST_CASE("a phantom feed is refused beside the voltage it sets, and an unknown one by name") {
  CHECK_THROWS_WITH_AS(test::stage_from("topology = \"source-follower\"\n[supply]\nphantom = \"P48\"\nvolts = 48\n" + follower),
                       doctest::Contains("supply.volts: supply.phantom = \"P48\" sets the voltage"), input_error);
  CHECK_THROWS_WITH_AS(test::stage_from("topology = \"source-follower\"\n[supply]\nphantom = \"P36\"\n" + follower),
                       doctest::Contains("supply.phantom must be \"P48\", \"P24\" or \"P12\""), input_error);
}

}  // namespace test_source_file
