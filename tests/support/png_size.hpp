#pragma once
// The pixel size of a PNG file, to check what a real SVG renderer made of a plot.
#include <algorithm>
#include <cstdint>
#include <filesystem>
#include <fstream>
#include <string>

namespace pinchoff::testing {

struct png_size {
  std::uint32_t width{}, height{};
  bool is_png{false};
};

// PNG specification (ISO/IEC 15948, 11.2.2): the IHDR chunk right after the 8-byte
// signature holds width and height as big-endian 32-bit integers at bytes 16-23.
inline png_size read_png_size(const std::filesystem::path& p) {
  std::ifstream in(p, std::ios::binary);
  unsigned char b[24] = {};
  in.read(reinterpret_cast<char*>(b), sizeof b);
  png_size s;
  if (in.gcount() != 24) return s;
  const unsigned char signature[8] = {0x89, 'P', 'N', 'G', '\r', '\n', 0x1a, '\n'};
  s.is_png = std::equal(signature, signature + 8, b) && std::string(reinterpret_cast<char*>(b + 12), 4) == "IHDR";
  auto be32 = [&](int i) {
    return (std::uint32_t{b[i]} << 24) | (std::uint32_t{b[i + 1]} << 16) | (std::uint32_t{b[i + 2]} << 8) | b[i + 3];
  };
  s.width = be32(16);
  s.height = be32(20);
  return s;
}

}  // namespace pinchoff::testing
