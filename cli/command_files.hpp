#pragma once
// What a command reads and what it writes, declared by the command from its parsed options
// (command::files, cli/app.hpp) and checked once, in one place (cli/app.cpp), before the
// command does any work: no output may be a file the command reads, whatever the path
// (links, "..", hard links: files that exist are compared by device and inode), and no two
// outputs may be the same file.
#include <filesystem>
#include <string>
#include <vector>

namespace pinchoff::cli {

/// A file and what names it, for messages: "--plot", "the stage file", "the device-class
/// file for 'cls.toml'".
struct named_file {
  std::string what;
  std::filesystem::path path;
  bool folder_made{false};  ///< an output whose folder the command makes when missing
  bool may_exist{true};     ///< false: an existing file is refused (no --force)
};

struct command_files {
  std::vector<named_file> inputs, outputs;
};

/// A stage file and the device-class files reading it may open: devices.toml beside it and
/// the program's own (`devices`, $PINCHOFF_DEVICES or the installed one; model::device_file_for).
void add_stage_inputs(command_files& files, const std::filesystem::path& stage, const std::filesystem::path& devices,
                      const std::string& what = "the stage file");

/// Throws io_error naming the option and the file when an output's folder is missing, when
/// it is a folder, is one of the inputs, or is the same file as another output;
/// file_exists_error when it exists and may not (the writer checks that again, atomically,
/// when it commits).
void check_command_files(const command_files& files);

}  // namespace pinchoff::cli
