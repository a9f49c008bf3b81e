#pragma once
// Small text helpers every layer's messages use.
#include <span>
#include <string>
#include <string_view>

namespace pinchoff::base {

/// Levenshtein-nearest candidate within distance 2, or empty (for did-you-mean hints).
std::string nearest_name(std::string_view word, std::span<const std::string_view> candidates);

}  // namespace pinchoff::base
