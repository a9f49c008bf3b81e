#pragma once
// Reads a stage file (TOML, see README "Stage file") into a validated stage.
// Errors are input_error with "FILE:LINE:COLUMN: message" naming the key; values given
// with --set are named as "--set KEY=VALUE".
#include <filesystem>
#include <span>
#include <string>
#include <string_view>

#include "model/circuit/stage.hpp"

namespace pinchoff::model {

/// Reads and validates the file, applying `overrides` ("drain.resistor=4.7k") first. A
/// `[jfet] class` is looked up in the devices.toml beside the file, else in `devices_file`
/// (the program's own class file, given by the caller; none when empty).
stage read_stage_file(const std::filesystem::path& path, std::span<const std::string> overrides = {},
                      const std::filesystem::path& devices_file = {});

/// The same from text; `source_name` is used in messages in place of the file name.
stage parse_stage(std::string_view text, std::string_view source_name, std::span<const std::string> overrides = {},
                  const std::filesystem::path& devices_file = {});


}  // namespace pinchoff::model
