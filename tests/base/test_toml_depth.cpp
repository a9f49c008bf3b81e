// The nesting bound checked before the TOML parser (base/toml_depth.hpp).
#include <string>

#include <doctest/doctest.h>

#include "base/error.hpp"
#include "base/toml_depth.hpp"

namespace test_toml_depth {

using pinchoff::input_error;
using pinchoff::base::check_toml_depth;
using pinchoff::base::max_toml_levels;

namespace {
std::string header_of_depth(int levels) {  // [a.a.a...]: one bracket and levels - 1 dots
  std::string h = "[a";
  for (int i = 1; i < levels; ++i) h += ".a";
  return h + "]\n";
}
}  // namespace

TEST_CASE("a table header at the bound passes and one level more is refused where it crosses") {
  // Closed form: "[" opens one level and each dot one more, so a header of k names has k levels.
  CHECK_NOTHROW(check_toml_depth(header_of_depth(max_toml_levels), "f.toml"));
  const std::string deep = "name = 1\n" + header_of_depth(max_toml_levels + 1);
  // The 65th level is the 64th dot, at column 1 + 2 * 64 of line 2.
  CHECK_THROWS_WITH_AS(check_toml_depth(deep, "f.toml"), doctest::Contains("f.toml:2:129:"), input_error);
}

TEST_CASE("dots and brackets inside strings and comments do not count") {
  const std::string many_dots(500, '.');
  const std::string many_brackets(500, '[');
  const std::string text = "a = \"" + many_dots + many_brackets + "\"\n" + "b = '" + many_dots + "'\n" +
                           "c = \"\"\"\n" + many_brackets + "\n\"\"\"\n" + "# " + many_dots + "\n" + "d = \"\\\"" +
                           many_dots + "\"\n";
  CHECK_NOTHROW(check_toml_depth(text, "f.toml"));
}

TEST_CASE("lines after a multi-line string are numbered as the file's") {
  const std::string text = "c = '''\none\ntwo\n'''\n" + header_of_depth(max_toml_levels + 1);
  CHECK_THROWS_WITH_AS(check_toml_depth(text, "f.toml"), doctest::Contains("f.toml:5:"), input_error);
}

TEST_CASE("arrays nested across lines count as they open") {
  std::string text = "x = ";
  for (int i = 0; i < max_toml_levels + 1; ++i) text += "[\n";
  CHECK_THROWS_WITH_AS(check_toml_depth(text, "f.toml"), doctest::Contains("nested more than 64 levels"), input_error);
  std::string shallow = "x = ";
  for (int i = 0; i < 200; ++i) shallow += "[1],\n";  // many arrays, never more than one open
  CHECK_NOTHROW(check_toml_depth("x = [" + shallow + "]", "f.toml"));
}

}  // namespace test_toml_depth
