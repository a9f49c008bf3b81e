// Value, level and frequency parsing; level constants.
#include <cmath>

#include <doctest/doctest.h>

#include "base/error.hpp"
#include "base/units.hpp"

namespace test_units {

using namespace pinchoff;
using namespace pinchoff::base;

TEST_CASE("letter-and-digit codes read as IEC 60062 defines them") {
  struct row {
    const char* source;
    const char* text;
    unit u;
    double value;
  };
  const row rows[] = {
      {"IEC 60062: R47 = 0.47 ohm", "R47", unit::ohm, 0.47},
      {"IEC 60062: 4R7 = 4.7 ohm", "4R7", unit::ohm, 4.7},
      {"IEC 60062: 4K7 = 4.7 kohm", "4K7", unit::ohm, 4700},
      {"IEC 60062: 4k7 = 4.7 kohm", "4k7", unit::ohm, 4700},
      {"IEC 60062: 47K3 = 47.3 kohm", "47K3", unit::ohm, 47300},
      {"IEC 60062: 4M7 = 4.7 Mohm", "4M7", unit::ohm, 4.7e6},
      {"IEC 60062: 2n2 = 2.2 nF", "2n2", unit::farad, 2.2e-9},
      {"IEC 60062: 4p7 = 4.7 pF", "4p7", unit::farad, 4.7e-12},
      {"IEC 60062: 100n = 100 nF", "100n", unit::farad, 100e-9},
      {"IEC 60062 style: 2m2 = 2.2 milli", "2m2", unit::none, 2.2e-3},
      {"IEC 60062 style: 470R = 470 ohm", "470R", unit::ohm, 470},
  };
  for (const row& r : rows) {
    CAPTURE(r.source);
    CHECK(parse_value(r.text, r.u) == doctest::Approx(r.value).epsilon(1e-12).scale(0));
  }
}

TEST_CASE("SI prefixes and optional unit symbols are read") {
  struct row {
    const char* source;
    const char* text;
    unit u;
    double value;
  };
  const row rows[] = {
      {"SI prefix k = 1e3", "4.7k", unit::ohm, 4700},
      {"SI prefix M = 1e6 (mega)", "1M", unit::ohm, 1e6},
      {"SI prefix m = 1e-3 (milli)", "1m", unit::none, 1e-3},
      {"SI prefix u = micro", "22u", unit::farad, 22e-6},
      {"SI prefix µ (U+00B5) = micro", "22\xC2\xB5", unit::farad, 22e-6},
      {"SI prefix n = 1e-9 with unit", "100nF", unit::farad, 100e-9},
      {"ohm sign after prefix", "4.7k\xCE\xA9", unit::ohm, 4700},
      {"plain number", "1e-7", unit::farad, 1e-7},
      {"negative", "-1.8", unit::volt, -1.8},
      {"milliamps with unit", "2.5mA", unit::ampere, 2.5e-3},
      {"kilohertz", "1kHz", unit::hertz, 1000},
      {"millivolts a kelvin (SI: K)", "-2.8mV/K", unit::volt_per_kelvin, -2.8e-3},
      {"millivolts a degree Celsius (U+00B0 C), the same step as a kelvin", "-2.8mV/\xC2\xB0" "C", unit::volt_per_kelvin, -2.8e-3},
  };
  for (const row& r : rows) {
    CAPTURE(r.source);
    CHECK(parse_value(r.text, r.u) == doctest::Approx(r.value).epsilon(1e-12).scale(0));
  }
}

TEST_CASE("malformed values are refused with the text in the message") {
  for (const char* bad : {"", "k", "4.7kk", "4.7.1", "abc", "4k7k", "4.7k7", "1x", "inf", "nan", "--1", "1 F"}) {
    CAPTURE(bad);
    CHECK_THROWS_AS(parse_value(bad, unit::ohm, "drain.resistor"), input_error);
  }
  try {
    parse_value("4.7kk", unit::ohm, "drain.resistor");
  } catch (const input_error& e) {
    CHECK(std::string(e.what()).find("drain.resistor") != std::string::npos);
    CHECK(std::string(e.what()).find("4.7kk") != std::string::npos);
  }
}

TEST_CASE("dBu and dBV references") {
  // CHECKS.md: 0 dBu = sqrt(0.6) V rms = 0.7746 V; +4 dBu = 1.228 V rms; -10 dBV = -7.78 dBu.
  CHECK(dbu_reference_vrms == doctest::Approx(0.7746).epsilon(1e-4).scale(0));
  CHECK(vpk_from_dbu(4.0) / sqrt2 == doctest::Approx(1.228).epsilon(1e-3));
  CHECK(dbu_from_vpk(vpk_from_dbv(-10.0)) == doctest::Approx(-7.78).epsilon(1e-3));
  CHECK(std::fabs(dbv_from_vpk(sqrt2)) <= 1e-12);  // dB, absolute: 1 V rms is 0 dBV exactly
}

TEST_CASE("levels convert to volts peak") {
  struct row {
    const char* source;
    const char* text;
    double vpk;
  };
  const row rows[] = {
      {"peak as given", "100mVpk", 0.1},
      {"rms of a sine: pk = rms * sqrt 2 (definition)", "300mVrms", 0.3 * std::sqrt(2.0)},
      {"peak-to-peak / 2 (definition)", "2Vpp", 1.0},
      {"0 dBu = sqrt(0.6) Vrms (CHECKS.md)", "0dBu", std::sqrt(0.6) * std::sqrt(2.0)},
      {"-20 dBV = 0.1 Vrms (definition)", "-20dBV", 0.1 * std::sqrt(2.0)},
      {"bare number is volts peak (design)", "0.5", 0.5},
      {"plus sign", "+4dBu", std::sqrt(0.6) * std::pow(10.0, 0.2) * std::sqrt(2.0)},
  };
  for (const row& r : rows) {
    CAPTURE(r.source);
    CHECK(parse_level_vpk(r.text) == doctest::Approx(r.vpk).epsilon(1e-12));
  }
  CHECK_THROWS_AS(parse_level_vpk("0.5", true), input_error);
  CHECK_THROWS_AS(parse_level_vpk("-1Vpk"), input_error);
  CHECK_THROWS_AS(parse_level_vpk("loud"), input_error);
}

TEST_CASE("SI formatting picks the prefix and keeps significant digits") {
  CHECK(format_si(4700, "Ω") == "4.70 kΩ");
  CHECK(format_si(-0.00259, "A") == "-2.59 mA");
  CHECK(format_si(999.7, "V") == "1.00 kV");
  CHECK(format_si(22e-6, "F") == "22.0 µF");
  CHECK(format_si(0.0, "V") == "0 V");
}

TEST_CASE("numbers a double cannot hold are refused as such, never read as 0 or infinity") {
  // IEEE 754 binary64: the largest finite value is about 1.8e308, the smallest normal one
  // 2.2e-308; below that a value is denormal (fewer digits) or rounds to 0.
  struct row {
    const char* text;
    const char* why;
  };
  const row rows[] = {
      {"1e400", "above the largest double"},     {"-1e400", "below the most negative double"},
      {"1e308k", "overflows once scaled"},         {"1e-320", "denormal"},
      {"4.9e-324", "the smallest denormal"},       {"1e-400", "rounds to 0"},
      {"1e-310p", "denormal once scaled"},
  };
  for (const row& r : rows) {
    CAPTURE(r.text);
    CAPTURE(r.why);
    CHECK_FALSE(try_parse_value(r.text, unit::ohm).has_value());
    CHECK_THROWS_WITH_AS(parse_value(r.text, unit::ohm, "drain.resistor"), doctest::Contains("is beyond the numbers this tool reads"),
                         input_error);
  }
  CHECK(parse_value("0", unit::ohm) == 0.0);  // 0 itself stays a value (a part left out)
  CHECK(parse_value("2.3e-308") == doctest::Approx(2.3e-308).epsilon(1e-15).scale(0));  // the smallest normal doubles are read
}

TEST_CASE("SI formatting of values beyond the prefixes falls back to scientific notation") {
  // The smallest denormal once printed "nan fV": its mantissa scaled by 1e311 overflowed.
  CHECK(format_si(4.9e-324, "V") == "4.94e-324 V");
  CHECK(format_si(1e-20, "A") == "1.00e-20 A");
  CHECK(format_si(1e300, "Ω") == "1.00e+300 Ω");
  CHECK(format_si(-2.5e16, "Ω") == "-2.50e+16 Ω");
  CHECK(format_si(999e12, "Ω") == "999 TΩ");  // the largest prefix still used
  CHECK(format_si(1e-15, "F") == "1.00 fF");  // and the smallest
}

TEST_CASE("physical bounds: each end accepted, beyond refused with the range in the message") {
  const value_bounds b{1e-3, 1e9, true, "a reason"};
  CHECK(bounds_refusal("drain.resistor", 0.0, b, unit::ohm).empty());  // 0: none
  CHECK(bounds_refusal("drain.resistor", 1e-3, b, unit::ohm).empty());
  CHECK(bounds_refusal("drain.resistor", 100e-6 * 10, b, unit::ohm).empty());  // a rounding below the bound
  CHECK(bounds_refusal("drain.resistor", 1e9, b, unit::ohm).empty());
  CHECK(bounds_refusal("drain.resistor", 1e-320, b, unit::ohm) ==
        "drain.resistor = 1.00e-320 lies outside 1 mΩ to 1 GΩ (or 0 for none): a reason");
  CHECK(bounds_refusal("x", -2e9, b, unit::ohm).find("in magnitude") != std::string::npos);
  const value_bounds t{200, 450, false, {}};
  CHECK(bounds_refusal("temperature", 0.0, t, unit::kelvin) == "temperature = 0 lies outside 200 K to 450 K");
  CHECK(format_bound(1e-20, unit::ampere) == "1e-20 A");
  CHECK(format_bound(1e-9, unit::none) == "1e-9");
  CHECK(format_bound(4700, unit::ohm) == "4.7 kΩ");
  CHECK(format_bound(1.0, unit::per_volt) == "1 /V");
  // A capsule's sensitivity: V/Pa, with an SI prefix as any unit.
  CHECK(format_bound(1e-5, unit::volt_per_pascal) == "10 µV/Pa");
  CHECK(parse_value("12mV/Pa", unit::volt_per_pascal) == doctest::Approx(12e-3).epsilon(1e-15));
  CHECK(parse_value("12m", unit::volt_per_pascal) == doctest::Approx(12e-3).epsilon(1e-15));
  CHECK_THROWS_AS(parse_value("12mV", unit::volt_per_pascal), input_error);
}

}  // namespace test_units
