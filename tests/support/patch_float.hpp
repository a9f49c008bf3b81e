#pragma once
// Makes a float WAV hold a value libsndfile will not write (a NaN or an infinity), given as
// an IEEE 754 binary32 bit pattern (0x7FC00000 quiet NaN, 0x7F800000 +infinity): either at
// a marker sample the file was written with (its last occurrence: libsndfile's PEAK chunk,
// before the data, holds the marker too), or at a sample index in the data chunk.
#include <bit>
#include <cstdint>
#include <cstring>
#include <filesystem>
#include <fstream>
#include <iterator>
#include <string_view>
#include <vector>

#include <doctest/doctest.h>

namespace pinchoff::testing {

/// The float sample the patch looks for: write it where the bad value should go.
inline constexpr float float_marker = 1234.5f;

inline std::vector<char> read_bytes(const std::filesystem::path& p) {
  return std::vector<char>((std::istreambuf_iterator<char>(std::ifstream(p, std::ios::binary).rdbuf())), {});
}

inline void write_bytes(const std::filesystem::path& p, const std::vector<char>& bytes) {
  std::ofstream(p, std::ios::binary | std::ios::trunc).write(bytes.data(), static_cast<std::streamsize>(bytes.size()));
}

inline void patch_float_marker(const std::filesystem::path& p, std::uint32_t bits) {
  std::vector<char> bytes = read_bytes(p);
  const std::uint32_t marker = std::bit_cast<std::uint32_t>(float_marker);
  std::size_t last = bytes.size();
  for (std::size_t i = 0; i + 4 <= bytes.size(); ++i) {
    std::uint32_t v;
    std::memcpy(&v, bytes.data() + i, 4);
    if (v == marker) last = i;
  }
  REQUIRE(last < bytes.size());
  std::memcpy(bytes.data() + last, &bits, 4);
  write_bytes(p, bytes);
}

/// A copy of float WAV `from` at `to` with sample `index` (counting every channel's
/// samples, 4 bytes each, from the start of the data chunk) replaced by `bits`.
inline void copy_with_float_sample(const std::filesystem::path& from, const std::filesystem::path& to,
                                   std::size_t index, std::uint32_t bits) {
  std::vector<char> bytes = read_bytes(from);
  const std::string_view view(bytes.data(), bytes.size());
  const std::size_t data = view.find("data");
  REQUIRE(data != std::string_view::npos);
  REQUIRE(data + 8 + 4 * index + 4 <= bytes.size());
  std::memcpy(bytes.data() + data + 8 + 4 * index, &bits, 4);
  write_bytes(to, bytes);
}

}  // namespace pinchoff::testing
