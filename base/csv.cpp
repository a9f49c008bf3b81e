#include "base/csv.hpp"

#include <algorithm>
#include <cctype>
#include <cerrno>
#include <cstring>
#include <fstream>
#include <limits>
#include <optional>
#include <sstream>

#include "base/error.hpp"
#include "base/text_file.hpp"
#include "base/units.hpp"

namespace pinchoff::base {
namespace {

std::string trim(std::string_view s) {
  while (!s.empty() && std::isspace(static_cast<unsigned char>(s.front()))) s.remove_prefix(1);
  while (!s.empty() && std::isspace(static_cast<unsigned char>(s.back()))) s.remove_suffix(1);
  return std::string(s);
}

// Splits one line into fields; returns false on an unterminated quote.
bool split_fields(std::string_view line, std::vector<std::string>& out) {
  out.clear();
  std::string cur;
  bool quoted = false;
  for (std::size_t i = 0; i < line.size(); ++i) {
    const char c = line[i];
    if (quoted) {
      if (c == '"' && i + 1 < line.size() && line[i + 1] == '"') {
        cur += '"';
        ++i;
      } else if (c == '"') {
        quoted = false;
      } else {
        cur += c;
      }
    } else if (c == '"') {
      quoted = true;
    } else if (c == ',') {
      out.push_back(trim(cur));
      cur.clear();
    } else {
      cur += c;
    }
  }
  out.push_back(trim(cur));
  return !quoted;
}

// A cell's value in unit u: as parse_value reads it, or with the one run of blanks between
// the number and its prefix or unit closed up ("3.965 mA", "4.7 k"). Only there: "1 2" is
// not twelve.
std::optional<double> cell_value(const std::string& cell, unit u) {
  if (auto v = try_parse_value(cell, u)) return v;
  const std::size_t gap = cell.find_first_of(" \t");
  if (gap == std::string::npos || gap == 0) return std::nullopt;
  const std::size_t next = cell.find_first_not_of(" \t", gap);
  if (next == std::string::npos) return std::nullopt;
  const char before = cell[gap - 1], after = cell[next];
  const bool number_ends = std::isdigit(static_cast<unsigned char>(before)) || before == '.';
  const bool word_starts = !(std::isdigit(static_cast<unsigned char>(after)) || after == '.' || after == '+' || after == '-');
  if (!number_ends || !word_starts) return std::nullopt;
  const std::string joined = cell.substr(0, gap) + cell.substr(next);
  if (joined.find_first_of(" \t") != std::string::npos) return std::nullopt;
  return try_parse_value(joined, u);
}

}  // namespace

int csv_table::column(std::string_view name) const noexcept {
  for (std::size_t k = 0; k < columns.size(); ++k)
    if (columns[k] == name) return static_cast<int>(k);
  return -1;
}

csv_table parse_csv(std::string_view text, std::string_view source, const csv_layout& layout) {
  csv_table t;
  t.source = std::string(source);
  if (text.find('\0') != std::string_view::npos) throw input_error(t.source + ": not a text file (it contains NUL bytes)");
  // A spreadsheet's "CSV UTF-8" export starts with a byte-order mark; it is not part of the
  // first column's name.
  if (text.starts_with("\xEF\xBB\xBF")) text.remove_prefix(3);
  std::vector<std::string> fields;
  std::vector<bool> is_text;
  std::vector<unit> units;
  int line_no = 0;
  bool have_header = false;
  std::size_t pos = 0;
  while (pos <= text.size()) {
    const std::size_t end = std::min(text.find('\n', pos), text.size());
    std::string_view line = text.substr(pos, end - pos);
    pos = end + 1;
    ++line_no;
    if (!line.empty() && line.back() == '\r') line.remove_suffix(1);
    const std::string trimmed = trim(line);
    if (trimmed.empty() || trimmed.front() == '#') {
      if (end == text.size()) break;
      continue;
    }
    if (!split_fields(line, fields))
      throw input_error(t.source + ":" + std::to_string(line_no) + ": unterminated quote");
    if (!have_header) {
      for (const std::string& f : fields) {
        if (f.empty()) throw input_error(t.source + ":" + std::to_string(line_no) + ": empty column name in the header");
        if (std::find(t.columns.begin(), t.columns.end(), f) != t.columns.end())
          throw input_error(t.source + ":" + std::to_string(line_no) + ": column '" + f + "' appears twice in the header");
        t.columns.push_back(f);
        is_text.push_back(std::find(layout.text_columns.begin(), layout.text_columns.end(), f) != layout.text_columns.end());
        unit u = unit::none;
        for (const auto& [name, cu] : layout.units)
          if (name == f) u = cu;
        units.push_back(u);
      }
      have_header = true;
    } else {
      if (fields.size() != t.columns.size())
        throw input_error(t.source + ":" + std::to_string(line_no) + ": row has " + std::to_string(fields.size()) +
                          (fields.size() == 1 ? " cell" : " cells") + ", the header has " + std::to_string(t.columns.size()));
      std::vector<double> row;
      std::vector<std::string> texts(fields.size());
      for (std::size_t c = 0; c < fields.size(); ++c) {
        if (is_text[c]) {
          texts[c] = fields[c];
          row.push_back(std::numeric_limits<double>::quiet_NaN());
          continue;
        }
        const auto v = cell_value(fields[c], units[c]);
        if (!v)
          throw input_error(t.source + ":" + std::to_string(line_no) + ": column '" + t.columns[c] + "' (column " +
                            std::to_string(c + 1) + "): '" + fields[c] + "' is not a number");
        row.push_back(*v);
      }
      t.rows.push_back(std::move(row));
      t.text_rows.push_back(std::move(texts));
      t.line_of_row.push_back(line_no);
    }
    if (end == text.size()) break;
  }
  if (!have_header) throw input_error(t.source + ": empty table (expected a header row and data rows)");
  return t;
}

csv_table read_csv_file(const std::filesystem::path& path, const text_file_kind& kind, const csv_layout& layout) {
  return parse_csv(read_text_file(path, kind), path.string(), layout);
}

}  // namespace pinchoff::base
