// Reading stage files: both device forms, polarity, overrides and every bad input.
#include <cmath>
#include <filesystem>
#include <fstream>
#include <string>
#include <vector>

#include <doctest/doctest.h>

#include "base/error.hpp"
#include "model/circuit/stage_file.hpp"
#include "base/text.hpp"

namespace test_stage_file {

using namespace pinchoff;
using namespace pinchoff::model;

namespace {
const std::string good =
    "name = \"test\"\n"                 // line 1
    "topology = \"common-source\"\n"    // 2
    "[supply]\n"                        // 3
    "volts = 9.0\n"                     // 4
    "[jfet]\n"                          // 5
    "idss = \"5m\"\n"                   // 6
    "vp = -1.8\n"                       // 7
    "[gate]\n"                          // 8
    "coupling_cap = \"100n\"\n"         // 9
    "resistor = \"1M\"\n"               // 10
    "[drain]\n"                         // 11
    "resistor = \"3k9\"\n"              // 12
    "[source]\n"                        // 13
    "resistor = \"820\"\n"              // 14
    "bypass_cap = \"22u\"\n"            // 15
    "[output]\n"                        // 16
    "coupling_cap = \"1u\"\n"           // 17
    "load = \"100k\"\n";                // 18

std::string replace_line(const std::string& text, int line, const std::string& with) {
  std::string out;
  int n = 1;
  std::size_t pos = 0;
  while (pos < text.size()) {
    const std::size_t end = text.find('\n', pos);
    const std::string l = text.substr(pos, end - pos);
    out += (n == line ? with : l) + "\n";
    pos = end + 1;
    ++n;
  }
  return out;
}

// An error in an override names its key as the field: shown here as "KEY: message".
std::string error_of(const std::string& text, std::vector<stage_override> overrides = {}) {
  try {
    parse_stage(text, "bass.toml", overrides);
  } catch (const setting_error& e) {
    return e.field() + ": " + e.what();
  } catch (const input_error& e) {
    return e.what();
  }
  return "";
}
}  // namespace

TEST_CASE("a complete stage file is read into SI values") {
  const stage s = parse_stage(good, "bass.toml");
  CHECK(s.name == "test");
  CHECK(s.supply.volts_v == doctest::Approx(9.0).epsilon(1e-15));
  CHECK(s.jfet.idss_a == doctest::Approx(5e-3).epsilon(1e-15));
  CHECK(s.drain_resistor_ohm == doctest::Approx(3900).epsilon(1e-15));
  CHECK(s.source.bypass_cap_f == doctest::Approx(22e-6).epsilon(1e-15));
  CHECK(s.jfet.is_a == doctest::Approx(1e-14).epsilon(1e-15).scale(0));  // DESIGN.md default
  CHECK(s.jfet.n == 1.0);
  CHECK(s.temperature_k == doctest::Approx(300.15).epsilon(1e-15));
}

TEST_CASE("beta and vto give the same part as idss and vp") {
  // SPICE level-1: BETA = IDSS/VP^2, VTO = VP (Massobrio & Antognetti; from memory).
  std::string text = replace_line(good, 6, "beta = 1.5432098765432099e-3");
  text = replace_line(text, 7, "vto = -1.8");
  const stage s = parse_stage(text, "bass.toml");
  CHECK(s.jfet.idss_a == doctest::Approx(5e-3).epsilon(1e-12));
  CHECK(s.jfet.vp_v == -1.8);
}

TEST_CASE("a p-channel part takes bench signs") {
  std::string text = replace_line(good, 4, "volts = -9");
  text = replace_line(text, 7, "vp = 1.8\npolarity = \"p\"");
  const stage s = parse_stage(text, "bass.toml");
  CHECK(s.pol == polarity::p);
  CHECK(s.jfet.vp_v == 1.8);
}

TEST_CASE("overrides replace values with the same checks") {
  const std::vector<stage_override> set{{"drain", "resistor", "4.7k"}, {"supply", "volts", "12"}, {"signal", "impedance", "10k"}};
  const stage s = parse_stage(good, "bass.toml", set);
  CHECK(s.drain_resistor_ohm == doctest::Approx(4700).epsilon(1e-15));
  CHECK(s.supply.volts_v == doctest::Approx(12).epsilon(1e-15));
  CHECK(s.signal_impedance_ohm == doctest::Approx(10e3).epsilon(1e-15));
}

TEST_CASE("every bad input names where it is and what was expected") {
  struct row {
    const char* what;
    std::string text;
    std::vector<stage_override> overrides;
    std::vector<std::string> must_contain;
  };
  const std::vector<row> rows{
      {"syntax error", replace_line(good, 4, "volts = = 9"), {}, {"bass.toml:4:"}},
      {"unknown key with a near miss", replace_line(good, 12, "resitor = \"3k9\""), {},
       {"bass.toml:12:1", "unknown key 'resitor' in [drain]", "did you mean 'resistor'"}},
      {"unknown section", good + "[drian]\nresistor = 1\n", {}, {"bass.toml:19:", "'drian'", "did you mean 'drain'"}},
      {"wrong type", replace_line(good, 4, "volts = true"), {}, {"bass.toml:4:9", "supply.volts", "boolean"}},
      {"section given as a value", replace_line(replace_line(good, 3, "supply = 9"), 4, ""), {},
       {"bass.toml:3:", "[supply]"}},
      {"bad value text", replace_line(good, 12, "resistor = \"3.9kk\""), {}, {"bass.toml:12:12", "drain.resistor", "3.9kk"}},
      {"negative resistance", replace_line(good, 14, "resistor = -820"), {}, {"bass.toml:14:", "source.resistor", "above 0"}},
      {"zero gate resistor", replace_line(good, 10, "resistor = 0"), {}, {"bass.toml:10:", "gate.resistor", "above 0"}},
      {"negative capacitance", replace_line(good, 15, "bypass_cap = \"-22u\""), {}, {"bass.toml:15:", "source.bypass_cap", "negative"}},
      {"idss zero", replace_line(good, 6, "idss = 0"), {}, {"bass.toml:6:", "jfet.idss", "above 0"}},
      {"vp of the wrong sign", replace_line(good, 7, "vp = 1.8"), {}, {"bass.toml:7:", "jfet.vp", "negative", "polarity"}},
      {"supply of the wrong sign", replace_line(good, 4, "volts = -9"), {}, {"bass.toml:4:", "supply.volts", "positive"}},
      {"supply zero", replace_line(good, 4, "volts = 0"), {}, {"bass.toml:4:", "supply.volts"}},
      {"missing supply", replace_line(replace_line(good, 3, ""), 4, ""), {}, {"bass.toml", "[supply]", "volts"}},
      {"missing vp", replace_line(good, 7, ""), {}, {"bass.toml:5:1", "[jfet]", "vp"}},
      {"both device forms", replace_line(good, 7, "vp = -1.8\nvto = -1.8"), {}, {"bass.toml:5:1", "either idss and vp"}},
      {"missing volts", replace_line(good, 4, "resistance = 10"), {}, {"bass.toml:3:1", "[supply] needs volts"}},
      {"missing drain resistor", replace_line(good, 12, ""), {}, {"bass.toml", "drain.resistor"}},
      {"gate without DC path", replace_line(good, 10, ""), {}, {"bass.toml", "no DC path", "gate.resistor"}},
      {"bad polarity", replace_line(good, 7, "vp = -1.8\npolarity = \"x\""), {}, {"bass.toml:8:", "jfet.polarity"}},
      {"bad topology", replace_line(good, 2, "topology = \"common-gate\""), {}, {"bass.toml:2:", "topology"}},
      {"override with unknown key", good, {{"drain", "resistr", "4.7k"}}, {"drain.resistr: ", "did you mean 'resistor'"}},
      {"override with bad value", good, {{"drain", "resistor", "lots"}}, {"drain.resistor: ", "lots"}},
      {"override of a non-positive value", good, {{"gate", "resistor", "0"}}, {"gate.resistor: ", "above 0"}},
      {"override into a value, not a section", good, {{"name", "x", "1"}}, {"name.x: ", "'name' is not a section"}},
      {"override of an unknown top-level key", good, {{"", "colour", "red"}}, {"colour: ", "unknown key 'colour'"}},
  };
  for (const row& r : rows) {
    CAPTURE(r.what);
    const std::string msg = error_of(r.text, r.overrides);
    CAPTURE(msg);
    REQUIRE_FALSE(msg.empty());
    for (const std::string& part : r.must_contain) {
      CAPTURE(part);
      CHECK(msg.find(part) != std::string::npos);
    }
  }
}

TEST_CASE("files that cannot be read are io errors") {
  const auto dir = std::filesystem::temp_directory_path() / "pinchoff_stage_file_test";
  std::filesystem::create_directories(dir);
  CHECK_THROWS_AS(read_stage_file(dir / "missing.toml"), io_error);
  CHECK_THROWS_AS(read_stage_file(dir), io_error);
  {
    std::ofstream(dir / "empty.toml") << "  \n";
  }
  try {
    read_stage_file(dir / "empty.toml");
    FAIL("expected an error");
  } catch (const input_error& e) {
    CHECK(std::string(e.what()).find("empty") != std::string::npos);
  }
  std::filesystem::remove_all(dir);
}

TEST_CASE("nearest names for did-you-mean hints") {
  const std::vector<std::string_view> names{"resistor", "bypass_cap", "unbypassed"};
  CHECK(base::nearest_name("resitor", names) == "resistor");
  CHECK(base::nearest_name("bypascap", names) == "bypass_cap");
  CHECK(base::nearest_name("capacitance", names).empty());
}

}  // namespace test_stage_file
