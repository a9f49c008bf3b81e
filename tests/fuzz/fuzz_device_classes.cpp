// libFuzzer target: the device-class file reader (TOML text).
// The entry function and what counts as a bug: fuzz_entries.hpp.
#include <cstddef>
#include <cstdint>

#include "tests/fuzz/fuzz_entries.hpp"

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
  (void)pinchoff::fuzz::device_classes_entry(std::string_view(reinterpret_cast<const char*>(data), size));
  return 0;
}
