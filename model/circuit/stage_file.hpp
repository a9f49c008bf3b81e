#pragma once
// Reads a stage file (TOML, see README "Stage file") into a validated stage, with values
// replaced or added by overrides. Errors in the file are input_error with
// "FILE:LINE:COLUMN: message" naming the key; an error in an override's value is a
// setting_error whose field is the override's key ("drain.resistor") and whose message says
// what is wrong ("drain.resistor must not be negative").
#include <filesystem>
#include <span>
#include <string>
#include <string_view>

#include "base/text_file.hpp"
#include "model/circuit/stage.hpp"

namespace pinchoff::model {

/// One value to set before the file is read: `key` in `section` ("drain", "resistor"), or a
/// top-level key when `section` is empty ("name"); in a chain, of stage `stage` (counted
/// from 1; 0 = the file's top level). The value is text, read and checked as the same value
/// in the file would be ("4.7k", "4k7", "100n").
struct stage_override {
  std::string section;
  std::string key;
  std::string value;
  int stage{0};
};

/// The key an override names, as the user wrote it: "stage2.drain.resistor", "drain.resistor".
std::string override_key(const stage_override& o);

/// The most a stage file may hold. The presets are about a kilobyte with their comments; a
/// megabyte leaves room for any amount of commentary and refuses a wrong file (a recording,
/// a device) before it fills the memory.
inline constexpr base::text_file_kind stage_file_kind{"stage file", std::size_t{1} << 20,
                                                      "a stage file is a few kilobytes"};

/// Reads and validates the file, applying `overrides` first, in order.
/// A `[jfet] class` is looked up in the devices.toml beside the file, else in `devices_file`
/// (the program's own class file, given by the caller; none when empty).
stage read_stage_file(const std::filesystem::path& path, std::span<const stage_override> overrides = {},
                      const std::filesystem::path& devices_file = {});

/// The same from text; `source_name` is used in messages in place of the file name.
stage parse_stage(std::string_view text, std::string_view source_name, std::span<const stage_override> overrides = {},
                  const std::filesystem::path& devices_file = {});


}  // namespace pinchoff::model
