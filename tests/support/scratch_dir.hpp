#pragma once
// A fresh empty folder for one test under the system's temporary folder, removed with
// everything in it when the test ends.
#include <filesystem>
#include <iterator>
#include <random>
#include <string>

namespace pinchoff::testing {

struct scratch_dir {
  std::filesystem::path path;
  scratch_dir() {
    std::random_device rd;
    path = std::filesystem::temp_directory_path() / ("pinchoff-test-" + std::to_string(rd()) + std::to_string(rd()));
    std::filesystem::create_directories(path);
  }
  ~scratch_dir() {
    std::error_code ec;
    std::filesystem::remove_all(path, ec);
  }
  scratch_dir(const scratch_dir&) = delete;
  scratch_dir& operator=(const scratch_dir&) = delete;
  std::string file(const std::string& name) const { return (path / name).string(); }
  std::size_t entries() const {
    return static_cast<std::size_t>(std::distance(std::filesystem::directory_iterator(path), {}));
  }
};

}  // namespace pinchoff::testing
