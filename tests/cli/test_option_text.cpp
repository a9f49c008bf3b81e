// The option mini-languages (cli/option_text.hpp): --set KEY=VALUE, --target and --require,
// read into the structured values the model takes.
#include <cmath>
#include <string>

#include <doctest/doctest.h>

#include "base/error.hpp"
#include "cli/option_text.hpp"

namespace test_option_text {

using namespace pinchoff;

TEST_CASE("--set splits a key into its section and name and keeps the value as text") {
  const model::stage_override a = cli::parse_set("drain.resistor=4.7k");
  CHECK(a.section == "drain");
  CHECK(a.key == "resistor");
  CHECK(a.value == "4.7k");
  const model::stage_override b = cli::parse_set("name=Boost = loud");  // the first = splits
  CHECK(b.section.empty());
  CHECK(b.key == "name");
  CHECK(b.value == "Boost = loud");
  CHECK(cli::parse_set("source.bypass_cap=").value.empty());  // an empty value is the reader's to refuse
}

TEST_CASE("--set refuses text that is not KEY=VALUE, naming the option and the text") {
  CHECK_THROWS_WITH_AS(cli::parse_set("drain.resistor"), doctest::Contains("--set 'drain.resistor': expected KEY=VALUE"),
                       input_error);
  CHECK_THROWS_WITH_AS(cli::parse_set("=4.7k"), doctest::Contains("expected KEY=VALUE"), input_error);
  CHECK_THROWS_WITH_AS(cli::parse_set("drain.=1k"), doctest::Contains("--set 'drain.=1k': expected SECTION.KEY=VALUE"),
                       input_error);
  CHECK_THROWS_WITH_AS(cli::parse_set("a.b.c=1"), doctest::Contains("expected SECTION.KEY=VALUE"), input_error);
  CHECK_THROWS_WITH_AS(cli::parse_set(".resistor=1k"), doctest::Contains("expected SECTION.KEY=VALUE"), input_error);
}

TEST_CASE("targets are parsed with units") {
  CHECK(cli::parse_target("vd=4.5").value == doctest::Approx(4.5).epsilon(1e-15));
  CHECK(cli::parse_target("vd=4.5").kind == model::target_kind::vd);
  CHECK(cli::parse_target("id=1.2m").value == doctest::Approx(1.2e-3).epsilon(1e-15));
  CHECK(cli::parse_target("id=1.2m").kind == model::target_kind::id);
  CHECK(cli::parse_target("center").kind == model::target_kind::center);
  CHECK_THROWS_WITH_AS(cli::parse_target("vg=3"), doctest::Contains("--target 'vg=3'"), input_error);
  CHECK_THROWS_WITH_AS(cli::parse_target("vd"), doctest::Contains("give a value"), input_error);
  CHECK_THROWS_WITH_AS(cli::parse_target("vd=four"), doctest::Contains("--target vd"), input_error);
}

TEST_CASE("requirements are ranges with either end open") {
  const model::requirement a = cli::parse_requirement("vd=3.5..6");
  CHECK(a.quantity == "vd");
  CHECK(a.lo == doctest::Approx(3.5).epsilon(1e-15));
  CHECK(a.hi == doctest::Approx(6.0).epsilon(1e-15));
  const model::requirement b = cli::parse_requirement("id=1m..");
  CHECK(b.lo == doctest::Approx(1e-3).epsilon(1e-15));
  CHECK(std::isinf(b.hi));
  const model::requirement c = cli::parse_requirement("thd=..1");
  CHECK(std::isinf(c.lo));
  CHECK(c.hi == doctest::Approx(1.0).epsilon(1e-15));
  CHECK_THROWS_WITH_AS(cli::parse_requirement("vd=6..3.5"), doctest::Contains("minimum above its maximum"), input_error);
  CHECK_THROWS_WITH_AS(cli::parse_requirement("volume=1..2"), doctest::Contains("--require 'volume=1..2'"), input_error);
  CHECK_THROWS_WITH_AS(cli::parse_requirement("vd=3.5"), doctest::Contains("LO..HI"), input_error);
  CHECK_THROWS_WITH_AS(cli::parse_requirement("gain=.."), doctest::Contains("at least one end"), input_error);
}

}  // namespace test_option_text
