#include "cli/data_files.hpp"

#include <string>
#include <system_error>

namespace pinchoff::cli {

namespace fs = std::filesystem;

fs::path program_path(std::string_view argv0) {
  std::error_code ec;
  fs::path self = fs::read_symlink("/proc/self/exe", ec);
  if (!ec && !self.empty()) return self;
  if (argv0.find('/') == std::string_view::npos) return {};
  self = fs::absolute(fs::path(std::string(argv0)), ec);
  return ec ? fs::path() : self;
}

fs::path data_dir_of(const fs::path& program) {
  if (program.empty()) return {};
  const fs::path folder = program.parent_path();
  std::error_code ec;
  for (const fs::path& dir : {folder / ".." / "share" / "pinchoff", folder / "share" / "pinchoff"})
    if (fs::is_regular_file(dir / "devices.toml", ec)) return dir.lexically_normal();
  return {};
}

data_files find_data_files(const fs::path& program, const char* devices_env) {
  data_files d;
  if (devices_env != nullptr && *devices_env != '\0') {
    d.devices = devices_env;
  } else if (const fs::path dir = data_dir_of(program); !dir.empty()) {
    d.devices = dir / "devices.toml";
  }
  std::error_code ec;
  if (const fs::path dir = data_dir_of(program); !dir.empty() && fs::is_regular_file(dir / "samples" / "pluck-phrase-48k.wav", ec))
    d.demo_clip = dir / "samples" / "pluck-phrase-48k.wav";
  return d;
}

}  // namespace pinchoff::cli
