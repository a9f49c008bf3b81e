#include "base/toml_depth.hpp"

#include <string>

#include "base/error.hpp"

namespace pinchoff::base {

void check_toml_depth(std::string_view text, std::string_view source_name) {
  int open = 0;  // brackets and braces open now (they may span lines)
  int dots = 0;  // dots of the key, header or value on this line, outside strings
  int line = 1;
  std::size_t line_start = 0;
  const std::size_t n = text.size();
  for (std::size_t i = 0; i < n; ++i) {
    const char c = text[i];
    if (c == '\n') {
      ++line;
      line_start = i + 1;
      dots = 0;
      continue;
    }
    if (c == '#') {  // a comment runs to the end of the line
      while (i + 1 < n && text[i + 1] != '\n') ++i;
      continue;
    }
    if (c == '"' || c == '\'') {
      const bool multi = i + 2 < n && text[i + 1] == c && text[i + 2] == c;
      const std::string_view close = multi ? std::string_view(c == '"' ? "\"\"\"" : "'''") : std::string_view(&text[i], 1);
      std::size_t j = i + (multi ? 3 : 1);
      for (; j < n; ++j) {
        if (c == '"' && text[j] == '\\') {
          ++j;  // an escaped character, whatever it is
          continue;
        }
        if (text[j] == '\n') {
          if (!multi) break;  // an unclosed one-line string: the parser reports it
          ++line;
          line_start = j + 1;
        }
        if (text.compare(j, close.size(), close) == 0) break;
      }
      if (j < n && text[j] == '\n' && !multi) i = j - 1;  // the newline is counted above
      else i = j < n ? j + close.size() - 1 : n;
      continue;
    }
    if (c == '[' || c == '{') ++open;
    else if ((c == ']' || c == '}') && open > 0) --open;
    else if (c == '.') ++dots;
    else continue;
    if (open + dots > max_toml_levels)
      throw input_error(std::string(source_name) + ":" + std::to_string(line) + ":" + std::to_string(i - line_start + 1) +
                        ": nested more than " + std::to_string(max_toml_levels) +
                        " levels deep (tables, arrays or dotted keys); a stage or class file needs a few");
  }
}

}  // namespace pinchoff::base
