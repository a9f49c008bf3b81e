#pragma once
// Makes a float WAV hold a value libsndfile will not write (a NaN or an infinity): the file
// is written with a marker sample, then the marker's bytes in the data chunk (its last
// occurrence: libsndfile's PEAK chunk, before the data, holds the marker too) are replaced
// by the given IEEE 754 binary32 bit pattern (0x7FC00000 quiet NaN, 0x7F800000 +infinity).
#include <bit>
#include <cstdint>
#include <cstring>
#include <filesystem>
#include <fstream>
#include <iterator>
#include <vector>

#include <doctest/doctest.h>

namespace pinchoff::testing {

/// The float sample the patch looks for: write it where the bad value should go.
inline constexpr float float_marker = 1234.5f;

inline void patch_float_marker(const std::filesystem::path& p, std::uint32_t bits) {
  std::vector<char> bytes((std::istreambuf_iterator<char>(std::ifstream(p, std::ios::binary).rdbuf())), {});
  const std::uint32_t marker = std::bit_cast<std::uint32_t>(float_marker);
  std::size_t last = bytes.size();
  for (std::size_t i = 0; i + 4 <= bytes.size(); ++i) {
    std::uint32_t v;
    std::memcpy(&v, bytes.data() + i, 4);
    if (v == marker) last = i;
  }
  REQUIRE(last < bytes.size());
  std::memcpy(bytes.data() + last, &bits, 4);
  std::ofstream(p, std::ios::binary | std::ios::trunc).write(bytes.data(), static_cast<std::streamsize>(bytes.size()));
}

}  // namespace pinchoff::testing
