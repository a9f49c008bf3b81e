// libFuzzer target: the value, level, frequency, range and fraction parsers.
// The entry function and what counts as a bug: fuzz_entries.hpp.
#include <cstddef>
#include <cstdint>

#include "tests/fuzz/fuzz_entries.hpp"

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
  (void)pinchoff::fuzz::units_entry(std::string_view(reinterpret_cast<const char*>(data), size));
  return 0;
}
