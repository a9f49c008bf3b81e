#include "cli/text_table.hpp"

#include <algorithm>

namespace pinchoff::cli {

std::size_t display_width(const std::string& s) noexcept {
  std::size_t n = 0;
  for (unsigned char c : s)
    if ((c & 0xC0) != 0x80) ++n;
  return n;
}

void text_table::write(std::ostream& out) const {
  std::vector<std::size_t> width(align_.size(), 0);
  for (const auto& r : rows_)
    for (std::size_t c = 0; c < r.size() && c < width.size(); ++c) width[c] = std::max(width[c], display_width(r[c]));
  for (const auto& r : rows_) {
    std::string line = indent_;
    for (std::size_t c = 0; c < r.size() && c < width.size(); ++c) {
      const std::string pad(width[c] - display_width(r[c]), ' ');
      const bool last = c + 1 == r.size();
      if (align_[c] == align::right) line += pad + r[c];
      else line += r[c] + (last ? "" : pad);
      if (!last) line += "  ";
    }
    while (!line.empty() && line.back() == ' ') line.pop_back();
    out << line << '\n';
  }
}

}  // namespace pinchoff::cli
