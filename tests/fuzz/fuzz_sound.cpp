// libFuzzer target: the audio reader over libsndfile's virtual I/O.
// The entry function and what counts as a bug: fuzz_entries.hpp.
#include <cstddef>
#include <cstdint>

#include "tests/fuzz/fuzz_entries.hpp"

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
  (void)pinchoff::fuzz::sound_entry(std::as_bytes(std::span<const std::uint8_t>(data, size)));
  return 0;
}
