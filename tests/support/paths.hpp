#pragma once
// Where the tests find the project's files and the built program. The compile command puts
// this header in front of every test file (-include), and only tests/support/paths.cpp is
// compiled with the folders themselves, so every other test file compiles with the same
// command in any clone and a compiler cache shares its object between clones and folders.
// Each name stands for a C string: std::string(PINCHOFF_PRESETS_DIR) + "/name.toml".

namespace pinchoff_test_paths {
extern const char* const presets_dir;  // the project's presets/
extern const char* const samples_dir;  // the project's samples/
extern const char* const fuzz_dir;     // tests/fuzz/ (seeds and saved regression inputs)
extern const char* const binary;       // the built program
}  // namespace pinchoff_test_paths

#define PINCHOFF_PRESETS_DIR (::pinchoff_test_paths::presets_dir)
#define PINCHOFF_SAMPLES_DIR (::pinchoff_test_paths::samples_dir)
#define PINCHOFF_FUZZ_DIR (::pinchoff_test_paths::fuzz_dir)
#define PINCHOFF_BINARY (::pinchoff_test_paths::binary)
