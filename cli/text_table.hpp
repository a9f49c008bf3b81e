#pragma once
// A plain-text table: columns padded to their widest cell, left- or right-aligned.
// Widths count UTF-8 code points, so "µA" and "Ω" line up.
#include <ostream>
#include <string>
#include <vector>

namespace pinchoff::cli {

class text_table {
 public:
  enum class align { left, right };
  explicit text_table(std::vector<align> columns, std::string indent = "  ") : align_(std::move(columns)), indent_(std::move(indent)) {}
  void add(std::vector<std::string> cells) { rows_.push_back(std::move(cells)); }
  void write(std::ostream& out) const;

 private:
  std::vector<align> align_;
  std::string indent_;
  std::vector<std::vector<std::string>> rows_;
};

/// Number of UTF-8 code points in s.
std::size_t display_width(const std::string& s) noexcept;

}  // namespace pinchoff::cli
