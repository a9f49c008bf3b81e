#pragma once
// Whether this test runner is built with AddressSanitizer (`make test`'s second gate; gcc
// defines __SANITIZE_ADDRESS__, clang answers __has_feature).
//
// The sanitizers look for memory errors and undefined behaviour along the code a test runs,
// at several times the cost of a plain run; the figures a test asserts are checked at full
// length by the Release suite. So a few long tests take a shorter signal, or fewer random
// draws, in this build only: the same code and every assertion, with no tolerance changed.
// Use it only where the shorter run still takes every path the full one takes.

// A preprocessor form too, for code that must not be compiled under a sanitizer at all
// (a test that replaces malloc, which the sanitizers' own allocator must own).
#if defined(__SANITIZE_ADDRESS__) || defined(__SANITIZE_THREAD__)
#define PINCHOFF_SANITIZED_BUILD 1
#elif defined(__has_feature)
#if __has_feature(address_sanitizer) || __has_feature(thread_sanitizer)
#define PINCHOFF_SANITIZED_BUILD 1
#endif
#endif
#ifndef PINCHOFF_SANITIZED_BUILD
#define PINCHOFF_SANITIZED_BUILD 0
#endif

namespace pinchoff::testing {

inline constexpr bool sanitized_build = PINCHOFF_SANITIZED_BUILD != 0;

/// `full` in a plain build, `shorter` under the sanitizers.
template <typename T>
constexpr T full_or_sanitized(T full, T shorter) {
  return sanitized_build ? shorter : full;
}

}  // namespace pinchoff::testing
