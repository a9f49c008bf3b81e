// The physical range of every stage-file value: each end is accepted and solvable, a step
// beyond either end is refused where it is read, naming the key, the range and the place.
// The ranges themselves are common practice (README "Stage file" gives the reason for each);
// what is checked here is that the reader holds them and that the solvers solve every
// stage at their corners.
#include <string>
#include <vector>

#include <doctest/doctest.h>

#include "base/error.hpp"
#include "model/circuit/network.hpp"
#include "model/circuit/operating_point.hpp"
#include "model/circuit/stage_file.hpp"
#include "model/engine/dk_matrices.hpp"

namespace test_stage_ranges {

using namespace pinchoff;
using namespace pinchoff::model;

namespace {

// A 9 V common-source stage of our own (common practice values); every part present.
const std::string base_stage =
    "name = \"range test\"\n"
    "[supply]\nvolts = 9\nresistance = \"47\"\ncapacitance = \"100u\"\n"
    "[jfet]\nidss = \"5m\"\nvp = -1.8\nlambda = 0.005\ncgs = \"4p\"\ncgd = \"2p\"\n"
    "[signal]\nimpedance = \"10k\"\n"
    "[gate]\ncoupling_cap = \"47n\"\nresistor = \"1M\"\n"
    "[drain]\nresistor = \"3.3k\"\n"
    "[source]\nunbypassed = \"100\"\nresistor = \"680\"\nbypass_cap = \"47u\"\n"
    "[output]\ncoupling_cap = \"1u\"\nload = \"100k\"\n";

struct range_row {
  const char* key;     // SECTION.KEY, or a top-level key
  const char* lo;      // the lowest value accepted
  const char* hi;      // the highest
  const char* below;   // a step below lo (the sign kept)
  const char* above;   // a step above hi
  const char* range;   // as the message writes it
  std::vector<std::string> with{};  // other overrides the key needs
};

// The ranges of README "Stage file" (common practice: decades beyond real parts).
const std::vector<range_row> rows = {
    {"supply.volts", "100m", "1k", "99m", "1001", "100 mV to 1 kV"},
    {"supply.resistance", "1m", "1G", "0.9m", "1.1G", "1 mΩ to 1 GΩ"},
    {"supply.capacitance", "1p", "1", "0.9p", "1.1", "1 pF to 1 F"},
    {"jfet.idss", "1u", "2", "0.9u", "2.1", "1 µA to 2 A"},
    {"jfet.vp", "-10m", "-50", "-9m", "-51", "10 mV to 50 V"},
    {"jfet.lambda", "0", "1", "", "1.1", "0 /V to 1 /V"},
    {"jfet.is", "1e-20", "1u", "0.9e-20", "1.1u", "1e-20 A to 1 µA"},
    {"jfet.n", "0.5", "5", "0.49", "5.1", "0.5 to 5"},
    {"jfet.cgs", "10f", "10n", "9f", "11n", "10 fF to 10 nF"},
    {"jfet.cgd", "10f", "10n", "9f", "11n", "10 fF to 10 nF"},
    {"jfet.vds_max", "100m", "10k", "90m", "11k", "100 mV to 10 kV"},
    {"jfet.pd_max", "100u", "10k", "90u", "11k", "100 µW to 10 kW"},
    {"jfet.igf_max", "1n", "100", "0.9n", "101", "1 nA to 100 A"},
    {"jfet.flicker_coefficient", "1e-25", "1e-10", "0.9e-25", "1.1e-10", "1e-25 to 1e-10"},
    {"jfet.flicker_exponent", "0.5", "2.5", "0.49", "2.6", "0.5 to 2.5"},
    {"jfet.gate_leakage", "1e-16", "1u", "0.9e-16", "1.1u", "1e-16 A to 1 µA"},
    {"signal.impedance", "1m", "1G", "0.9m", "1.1G", "1 mΩ to 1 GΩ"},
    {"gate.coupling_cap", "1p", "1", "0.9p", "1.1", "1 pF to 1 F"},
    {"gate.resistor", "1m", "100G", "0.9m", "101G", "1 mΩ to 100 GΩ"},
    {"gate.bias_top", "1m", "100G", "0.9m", "101G", "1 mΩ to 100 GΩ", {"gate.bias_bottom=1M"}},
    {"gate.bias_bottom", "1m", "100G", "0.9m", "101G", "1 mΩ to 100 GΩ", {"gate.bias_top=2.2M"}},
    {"drain.resistor", "1m", "1G", "0.9m", "1.1G", "1 mΩ to 1 GΩ"},
    {"source.unbypassed", "1m", "1G", "0.9m", "1.1G", "1 mΩ to 1 GΩ"},
    {"source.resistor", "1m", "1G", "0.9m", "1.1G", "1 mΩ to 1 GΩ"},
    {"source.bypass_cap", "1p", "1", "0.9p", "1.1", "1 pF to 1 F"},
    {"output.coupling_cap", "1p", "1", "0.9p", "1.1", "1 pF to 1 F"},
    {"output.load", "1m", "1G", "0.9m", "1.1G", "1 mΩ to 1 GΩ"},
    {"temperature", "200", "450", "199", "451", "200 K to 450 K"},
};

// A capsule at the gate of a 24 V follower (common practice values); the capsule's keys
// have ranges of their own, and the gate resistor is a capsule's gigohm.
const std::string capsule_stage =
    "name = \"capsule range test\"\ntopology = \"source-follower\"\n"
    "[supply]\nvolts = 24\nresistance = \"2.2k\"\ncapacitance = \"22u\"\n"
    "[jfet]\nidss = \"5m\"\nvp = -1.8\nlambda = 0.005\ncgs = \"4p\"\ncgd = \"2p\"\n"
    "[signal]\nkind = \"capsule\"\ncapacitance = \"50p\"\nstray = \"5p\"\nsensitivity = \"12m\"\n"
    "[gate]\nresistor = \"1G\"\n"
    "[source]\nresistor = \"2.2k\"\n"
    "[output]\ncoupling_cap = \"1u\"\nload = \"100k\"\n";

// The capsule's ranges (README "Sources"; common practice: a small capsule's picofarad to a
// nanofarad, measurement capsules' 1 to 50 mV/Pa with decades either side).
const std::vector<range_row> capsule_rows = {
    {"signal.capacitance", "1p", "1n", "0.9p", "1.1n", "1 pF to 1 nF"},
    {"signal.stray", "1p", "1", "0.9p", "1.1", "1 pF to 1 F"},
    {"signal.sensitivity", "10u", "1", "9u", "1.1", "10 µV/Pa to 1 V/Pa"},
    {"signal.sensitivity", "10uV/Pa", "1V/Pa", "9uV/Pa", "1.1V/Pa", "10 µV/Pa to 1 V/Pa"},
    {"gate.resistor", "1m", "100G", "0.9m", "101G", "1 mΩ to 100 GΩ"},
};

// A pickup and cable into a 9 V buffer (common practice values: 2.5 H, 6 kΩ, 3 m of cable).
const std::string pickup_stage =
    "name = \"pickup range test\"\ntopology = \"source-follower\"\n"
    "[supply]\nvolts = 9\nresistance = \"100\"\ncapacitance = \"100u\"\n"
    "[jfet]\nidss = \"5m\"\nvp = -1.8\nlambda = 0.005\ncgs = \"4p\"\ncgd = \"2p\"\n"
    "[signal]\nkind = \"pickup\"\nresistance = \"6k\"\ninductance = 2.5\ncapacitance = \"120p\"\ncable = 3\n"
    "[gate]\ncoupling_cap = \"22n\"\nresistor = \"1M\"\n"
    "[source]\nresistor = \"2.2k\"\n"
    "[output]\ncoupling_cap = \"1u\"\nload = \"100k\"\n";

// The pickup's ranges (README "Sources"; common practice, decades beyond real coils and cables).
const std::vector<range_row> pickup_rows = {
    {"signal.resistance", "1", "1M", "0.9", "1.1M", "1 Ω to 1 MΩ"},
    {"signal.inductance", "100u", "100", "90u", "110", "100 µH to 100 H"},
    {"signal.capacitance", "1p", "1u", "0.9p", "1.1u", "1 pF to 1 µF"},
    {"signal.cable", "0.1", "300", "0.09", "301", "0.1 to 300"},
    {"signal.cable_capacitance", "10p", "1n", "9p", "1.1n", "10 pF to 1 nF"},
};

// Each base stage with the rows its ranges are checked on.
struct range_table {
  const std::string* text;
  const std::vector<range_row>* rows;
};
const range_table range_tables[] = {{&base_stage, &rows}, {&capsule_stage, &capsule_rows}, {&pickup_stage, &pickup_rows}};

std::vector<stage_override> overrides_of(const range_row& r, const std::string& value) {
  std::vector<stage_override> o;
  auto add = [&o](const std::string& kv) {
    const auto eq = kv.find('='), dot = kv.find('.');
    stage_override s;
    if (dot != std::string::npos && dot < eq) {
      s.section = kv.substr(0, dot);
      s.key = kv.substr(dot + 1, eq - dot - 1);
    } else {
      s.key = kv.substr(0, eq);
    }
    s.value = kv.substr(eq + 1);
    o.push_back(s);
  };
  for (const std::string& w : r.with) add(w);
  add(std::string(r.key) + "=" + value);
  return o;
}

}  // namespace

TEST_CASE("each end of every value's range is accepted, and a step beyond it is refused with the range") {
  for (const range_table& tb : range_tables)
  for (const range_row& r : *tb.rows) {
    const std::string& stage_text = *tb.text;
    CAPTURE(r.key);
    for (const char* ok : {r.lo, r.hi}) {
      CAPTURE(ok);
      CHECK_NOTHROW(parse_stage(stage_text, "range.toml", overrides_of(r, ok)));
    }
    for (const char* bad : {r.below, r.above}) {
      if (std::string(bad).empty()) continue;
      CAPTURE(bad);
      try {
        parse_stage(stage_text, "range.toml", overrides_of(r, bad));
        FAIL("accepted");
      } catch (const setting_error& e) {
        const std::string m = e.what();
        CAPTURE(m);
        CHECK(e.field() == r.key);
        CHECK(m.find(std::string(r.key) + " = ") != std::string::npos);
        CHECK(m.find(std::string("lies outside ") + r.range) != std::string::npos);
      }
    }
  }
}

TEST_CASE("a value out of its range in the file is refused at its line and column") {
  // The same reader as --set; here the place in the file is named.
  const std::string text = base_stage + "# end\n";
  const std::string file = "name = \"x\"\n[supply]\nvolts = 9\n[jfet]\nidss = \"5m\"\nvp = -1.8\n[gate]\nresistor = \"1M\"\n"
                           "[drain]\nresistor = 1e-320\n[source]\nresistor = 9007199254740993\n";
  CHECK_THROWS_WITH_AS(parse_stage(file, "f.toml"), doctest::Contains("f.toml:10:12: drain.resistor = 1.00e-320 lies outside"),
                       input_error);
  const std::string big = "name = \"x\"\n[supply]\nvolts = 9\n[jfet]\nidss = \"5m\"\nvp = -1.8\n[gate]\nresistor = \"1M\"\n"
                          "[drain]\nresistor = 3300\n[source]\nresistor = 9007199254740993\n";
  // Above 2^53: toml++ has no exact double for it and the value was read as 0 (no resistor).
  CHECK_THROWS_WITH_AS(parse_stage(big, "f.toml"), doctest::Contains("f.toml:12:12: source.resistor = 9.01e+15"), input_error);
  const std::string beta = "name = \"x\"\n[supply]\nvolts = 9\n[jfet]\nbeta = 1e300\nvto = -1.8\n[gate]\nresistor = \"1M\"\n"
                           "[drain]\nresistor = 3300\n[source]\nresistor = 680\n";
  CHECK_THROWS_WITH_AS(parse_stage(beta, "f.toml"), doctest::Contains("f.toml:5:8: jfet.beta = 1.00e+300 lies outside 1e-9 to 1000"),
                       input_error);
  // beta and vto each in range, but the IDSS they give (1000 x 50^2 = 2.5 MA) is not.
  const std::string derived = "name = \"x\"\n[supply]\nvolts = 9\n[jfet]\nbeta = 1000\nvto = -50\n[gate]\nresistor = \"1M\"\n"
                              "[drain]\nresistor = 3300\n[source]\nresistor = 680\n";
  CHECK_THROWS_WITH_AS(parse_stage(derived, "f.toml"), doctest::Contains("f.toml:5:8: jfet.beta: the IDSS it gives"), input_error);
}

TEST_CASE("the solvers solve the stage at every corner of the ranges") {
  // The DC point converges and the network discretises (a matrix the engine can invert) at
  // 48 kHz and at the highest rate any command simulates (768 kHz, 64 times oversampled).
  for (const range_table& tb : range_tables)
  for (const range_row& r : *tb.rows) {
    for (const char* v : {r.lo, r.hi}) {
      CAPTURE(r.key);
      CAPTURE(v);
      const stage st = parse_stage(*tb.text, "range.toml", overrides_of(r, v));
      const network net = build_network(st);
      operating_point op;
      REQUIRE_NOTHROW(op = solve_operating_point(net));
      CHECK(op.newton.converged);
      for (double rate : {48000.0, 768000.0 * 64}) {
        CAPTURE(rate);
        CHECK_NOTHROW(discretise(net, rate));
      }
    }
  }
}

TEST_CASE("a network the engine cannot solve is named by its file and its widest-apart parts") {
  // Beyond the reader's ranges (set in code, as no file can): a 1e16 ohm supply feed and a
  // 1e6 F coupling capacitor at 49 MHz put 20 decades between two conductances.
  stage st = parse_stage(base_stage, "wide.toml");
  st.supply.resistance_ohm = 1e16;
  st.gate.coupling_cap_f = 1e6;
  const network net = build_network(st);
  CHECK(widest_parts(net, 768000.0 * 64) == "supply.resistance (1.00e+16 Ω) against gate.coupling_cap (1.00 MF)");
  CHECK(widest_parts(net, 0.0).find("supply.resistance") == 0);  // at DC the capacitors are open
  CHECK_THROWS_WITH_AS(discretise(net, 768000.0 * 64),
                       doctest::Contains("wide.toml: the stage's network matrix at 49.2 MHz is singular or too ill-conditioned"),
                       internal_error);
  CHECK_THROWS_WITH_AS(discretise(net, 768000.0 * 64), doctest::Contains("supply.resistance (1.00e+16 Ω) against gate.coupling_cap"),
                       internal_error);
}

}  // namespace test_stage_ranges
