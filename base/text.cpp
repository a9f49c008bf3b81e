#include "base/text.hpp"

#include <algorithm>
#include <vector>

namespace pinchoff::base {

std::string nearest_name(std::string_view word, std::span<const std::string_view> candidates) {
  std::string best;
  std::size_t best_d = 3;
  for (std::string_view c : candidates) {
    // Levenshtein distance, two rows.
    std::vector<std::size_t> prev(c.size() + 1), cur(c.size() + 1);
    for (std::size_t j = 0; j <= c.size(); ++j) prev[j] = j;
    for (std::size_t i = 1; i <= word.size(); ++i) {
      cur[0] = i;
      for (std::size_t j = 1; j <= c.size(); ++j)
        cur[j] = std::min({prev[j] + 1, cur[j - 1] + 1, prev[j - 1] + (word[i - 1] == c[j - 1] ? 0u : 1u)});
      std::swap(prev, cur);
    }
    if (prev[c.size()] < best_d) {
      best_d = prev[c.size()];
      best = c;
    }
  }
  return best;
}

}  // namespace pinchoff::base
