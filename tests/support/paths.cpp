// The folders of tests/support/paths.hpp, given by the build (tests/CMakeLists.txt) to this
// file alone.
namespace pinchoff_test_paths {
extern const char* const presets_dir = PINCHOFF_PRESETS_DIR_VALUE;
extern const char* const samples_dir = PINCHOFF_SAMPLES_DIR_VALUE;
extern const char* const fuzz_dir = PINCHOFF_FUZZ_DIR_VALUE;
extern const char* const binary = PINCHOFF_BINARY_VALUE;
}  // namespace pinchoff_test_paths
