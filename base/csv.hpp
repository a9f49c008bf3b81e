#pragma once
// A small reader for numeric CSV tables with a header row (bench notebooks, exported
// measurements). Comma separated; blank lines and lines starting with '#' are skipped;
// fields may be quoted with "..." (quotes doubled inside); a UTF-8 byte-order mark at the
// start (a spreadsheet's default export) is skipped. Cells are read with
// parse_value, so "2.5m" and "1k" work as in stage files; a column given a unit also takes
// that unit's symbol ("2.5mA" in a current column), and one space may stand between the
// number and what follows it ("3.965 mA", as a meter's display is copied). Columns named as
// text columns keep their cells as text (a part's name).
#include <filesystem>

#include "base/text_file.hpp"
#include "base/units.hpp"
#include <string>
#include <string_view>
#include <utility>
#include <vector>

namespace pinchoff::base {

struct csv_table {
  std::string source;                    ///< file name for messages
  std::vector<std::string> columns;      ///< header names, trimmed
  std::vector<std::vector<double>> rows;  ///< one entry per data row, columns.size() values (NaN in a text column)
  std::vector<std::vector<std::string>> text_rows;  ///< per data row, the cells of the text columns (empty elsewhere)
  std::vector<int> line_of_row;          ///< 1-based file line of each data row

  /// Index of a column, or -1.
  int column(std::string_view name) const noexcept;
};

/// What the reader is told of the columns it may meet: those whose cells are text, and the
/// unit of the numeric ones (a column not named is read with unit::none).
struct csv_layout {
  std::vector<std::string> text_columns;
  std::vector<std::pair<std::string, unit>> units;
};

/// Parses CSV text. Throws input_error naming "SOURCE:LINE" (row) and the column name
/// (column) for a non-numeric cell, a row with the wrong number of cells, an empty table
/// or a header with a repeated or empty name.
csv_table parse_csv(std::string_view text, std::string_view source, const csv_layout& layout = {});
/// Reads a CSV file of at most kind.max_bytes (base/text_file.hpp).
csv_table read_csv_file(const std::filesystem::path& path, const text_file_kind& kind, const csv_layout& layout = {});

}  // namespace pinchoff::base
