// libFuzzer target: the bench CSV reader and the square-law fit on what it reads.
// The entry function and what counts as a bug: fuzz_entries.hpp.
#include <cstddef>
#include <cstdint>

#include "tests/fuzz/fuzz_entries.hpp"

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
  (void)pinchoff::fuzz::csv_fit_entry(std::string_view(reinterpret_cast<const char*>(data), size));
  return 0;
}
