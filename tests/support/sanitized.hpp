#pragma once
// Whether this test runner is built with AddressSanitizer (`make test`'s second gate; gcc
// defines __SANITIZE_ADDRESS__, clang answers __has_feature).
//
// The sanitizers look for memory errors and undefined behaviour along the code a test runs,
// at several times the cost of a plain run; the figures a test asserts are checked at full
// length by the Release suite. So a few long tests take a shorter signal, or fewer random
// draws, in this build only: the same code and every assertion, with no tolerance changed.
// Use it only where the shorter run still takes every path the full one takes.

namespace pinchoff::testing {

#if defined(__SANITIZE_ADDRESS__)
inline constexpr bool sanitized_build = true;
#elif defined(__has_feature)
#if __has_feature(address_sanitizer)
inline constexpr bool sanitized_build = true;
#else
inline constexpr bool sanitized_build = false;
#endif
#else
inline constexpr bool sanitized_build = false;
#endif

/// `full` in a plain build, `shorter` under the sanitizers.
template <typename T>
constexpr T full_or_sanitized(T full, T shorter) {
  return sanitized_build ? shorter : full;
}

}  // namespace pinchoff::testing
