#pragma once
// Reading a whole text file a user names (a stage file, a device-class file, a CSV of bench
// readings) with a bound on its size, so a wrong name (a device, an endless stream, a
// multi-gigabyte file) is refused with a message instead of filling the memory.
#include <cstddef>
#include <filesystem>
#include <string>
#include <string_view>

namespace pinchoff::base {

/// What is read and how much of it may be: `noun` names the kind of file in messages
/// ("stage file"), `max_bytes` is the most it may hold, `typical` says what a real one
/// holds ("a stage file is a few kilobytes"), so the message tells why the bound is there.
struct text_file_kind {
  std::string_view noun;
  std::size_t max_bytes;
  std::string_view typical;
};

/// Reads the file at `path`. A regular file or a pipe (a shell's `<(...)`) is read, at most
/// kind.max_bytes (a FIFO that no program writes to reads as empty, without waiting); a directory, a device (/dev/zero, /dev/urandom) or a socket is refused
/// before anything is read. Throws io_error naming the file for one that cannot be opened or
/// read, or is not a file, and input_error naming the file and the bound for one that holds
/// more than kind.max_bytes.
std::string read_text_file(const std::filesystem::path& path, const text_file_kind& kind);

/// "1 MiB", "16 MiB", "512 KiB", "100 bytes": a size in binary units for messages.
std::string format_bytes(std::size_t bytes);

}  // namespace pinchoff::base
