#pragma once
// A bound on how deeply a TOML text nests, checked before the TOML parser sees it. The
// parser recurses once per level of a dotted key (a.b.c), a table header ([a.b.c]), an
// inline table or an array, so a small file nested tens of thousands of levels deep
// overflows the stack; no stage or class file needs more than a few levels.
#include <string_view>

namespace pinchoff::base {

/// The most levels a file read by this tool may nest: brackets and braces open at once plus
/// the dots of one key or header. A stage file uses three.
inline constexpr int max_toml_levels = 64;

/// Throws input_error "SOURCE:LINE:COL: ..." at the first place where `text` nests deeper
/// than max_toml_levels. Strings (basic, literal and multi-line) and comments are skipped, so
/// dots and brackets inside them do not count; a number's decimal point counts as a dot,
/// which only makes the bound stricter by one.
void check_toml_depth(std::string_view text, std::string_view source_name);

}  // namespace pinchoff::base
