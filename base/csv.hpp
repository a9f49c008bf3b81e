#pragma once
// A small reader for numeric CSV tables with a header row (bench notebooks, exported
// measurements). Comma separated; blank lines and lines starting with '#' are skipped;
// fields may be quoted with "..." (quotes doubled inside); a UTF-8 byte-order mark at the
// start (a spreadsheet's default export) is skipped. Cells are read with
// parse_value, so "2.5m" and "1k" work as in stage files.
#include <filesystem>

#include "base/text_file.hpp"
#include <string>
#include <string_view>
#include <vector>

namespace pinchoff::base {

struct csv_table {
  std::string source;                    ///< file name for messages
  std::vector<std::string> columns;      ///< header names, trimmed
  std::vector<std::vector<double>> rows;  ///< one entry per data row, columns.size() values
  std::vector<int> line_of_row;          ///< 1-based file line of each data row

  /// Index of a column, or -1.
  int column(std::string_view name) const noexcept;
};

/// Parses CSV text. Throws input_error naming "SOURCE:LINE" (row) and the column name
/// (column) for a non-numeric cell, a row with the wrong number of cells, an empty table
/// or a header with a repeated or empty name.
csv_table parse_csv(std::string_view text, std::string_view source);
/// Reads a CSV file of at most kind.max_bytes (base/text_file.hpp).
csv_table read_csv_file(const std::filesystem::path& path, const text_file_kind& kind);

}  // namespace pinchoff::base
