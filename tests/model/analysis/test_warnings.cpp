// Cautions about ratings and supplies.
#include <string>
#include <vector>

#include <doctest/doctest.h>

#include "model/circuit/network.hpp"
#include "model/circuit/operating_point.hpp"
#include "model/analysis/warnings.hpp"
#include "support/stages.hpp"

namespace test_warnings {

using namespace pinchoff;
using namespace pinchoff::model;

namespace {
std::vector<std::string> warnings_of(const std::string& text) {
  const stage s = test::stage_from(text);
  const network net = build_network(s);
  return operating_warnings(s, net, solve_operating_point(net));
}
bool any_contains(const std::vector<std::string>& ws, const std::string& part) {
  for (const auto& w : ws)
    if (w.find(part) != std::string::npos) return true;
  return false;
}
}  // namespace

TEST_CASE("ratings exceeded at the operating point are reported") {
  // Self bias IDSS 8 mA, VP -6 V, RS 1 k, RD 3.3 k at 20 V: VDS 8.873 V, ID 2.5876 mA,
  // PD 22.96 mW (Boylestad & Nashelsky Ex. 7.2 point, exact quadratic; CHECKS.md).
  const std::string base = test::self_bias_text(20.0, 8e-3, -6.0, 1e3, 3.3e3);
  auto with = [&](const std::string& ratings) {
    std::string t = base;
    t.replace(t.find("is = 0"), 6, "is = 0\n" + ratings);
    return t;
  };
  CHECK(warnings_of(with("vds_max = 25\npd_max = 0.1")).empty());
  CHECK(any_contains(warnings_of(with("vds_max = 8")), "vds_max"));
  CHECK(any_contains(warnings_of(with("pd_max = 0.02")), "pd_max"));
  CHECK_FALSE(any_contains(warnings_of(with("pd_max = 0.025")), "pd_max"));
}

TEST_CASE("supplies at or above 60 V carry the extra-low-voltage caution") {
  // IEC 62368-1 ES1 limit for DC (60 V; from memory, CHECKS.md).
  CHECK(any_contains(warnings_of(test::self_bias_text(60.0, 8e-3, -6.0, 1e3, 3.3e3)), "60 V"));
  CHECK_FALSE(any_contains(warnings_of(test::self_bias_text(59.0, 8e-3, -6.0, 1e3, 3.3e3)), "60 V"));
}

TEST_CASE("a phantom-fed stage drawing more than 10 mA is flagged") {
  // IEC 61938 P48: 48 V through 6.8 kΩ per leg, at most 10 mA (CHECKS.md). A 3.4 kΩ feed
  // can deliver up to 14 mA into a short, so a greedy stage can exceed the allowance.
  const std::string heavy =
      "topology = \"source-follower\"\n[supply]\nvolts = 48\nresistance = \"3.4k\"\n[jfet]\nidss = \"30m\"\nvp = -4\n"
      "[gate]\nresistor = \"1G\"\n[source]\nresistor = \"10\"\n";
  const auto ws = warnings_of(heavy);
  CHECK(any_contains(ws, "10 mA"));
  CHECK(any_contains(ws, "phantom"));
}

TEST_CASE("a bias outside saturation is reported") {
  const std::string triode =
      "[supply]\nvolts = 9\n[jfet]\nidss = \"10m\"\nvp = -2\nis = 0\n[gate]\nresistor = \"1M\"\n[drain]\nresistor = \"10k\"\n";
  CHECK(any_contains(warnings_of(triode), "triode"));
}

}  // namespace test_warnings
