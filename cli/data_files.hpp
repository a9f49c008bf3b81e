#pragma once
// The data the program reads at run time (the device classes), found relative to the
// program itself, the same way in the build folder and in an installed copy. main()
// resolves it once and hands it to each command; the model is given the file it needs.
#include <filesystem>
#include <string_view>

namespace pinchoff::cli {

struct data_files {
  /// The class file for a stage's `[jfet] class` when no devices.toml lies beside the stage
  /// file; empty when the program found none.
  std::filesystem::path devices;
  /// The bundled demo recording (samples/pluck-phrase-48k.wav in the data folder), the
  /// workbench's clip when none is given; empty when the program found none.
  std::filesystem::path demo_clip;
};

/// The running program's own path: /proc/self/exe where the system has it, else `argv0`
/// made absolute when it names a path (holds a '/'), else empty.
std::filesystem::path program_path(std::string_view argv0);

/// The data folder of a program at `program`: <its folder>/../share/pinchoff (an installed
/// copy: PREFIX/bin/pinchoff and PREFIX/share/pinchoff), else <its folder>/share/pinchoff
/// (the build folder, where the build copies the data); the first that holds devices.toml.
/// Empty when neither does.
std::filesystem::path data_dir_of(const std::filesystem::path& program);

/// The files for a program at `program`: `devices_env` ($PINCHOFF_DEVICES) when set and
/// not empty, else devices.toml in data_dir_of(program).
data_files find_data_files(const std::filesystem::path& program, const char* devices_env);

}  // namespace pinchoff::cli
