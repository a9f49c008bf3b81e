#pragma once
// Pieces several commands share: the stage-file argument with --set overrides, and the
// JSON and text forms of an operating point.
#include <ostream>
#include <string>
#include <vector>

#include <CLI/CLI.hpp>
#include <nlohmann/json.hpp>

#include "model/operating_point.hpp"
#include "model/stage.hpp"

namespace pinchoff::cli {

struct stage_input {
  std::string path;
  std::vector<std::string> overrides;  ///< "--set key=value"
};

/// Adds the positional FILE and the repeatable --set option.
void add_stage_input(CLI::App& sub, stage_input& in);
model::stage load_stage(const stage_input& in);

/// {"vg_v","vs_v","vd_v","vgs_v","vds_v","id_a","ig_a","region"}: the contract keys.
nlohmann::json operating_point_json(const model::terminal_point& t);

/// A JSON number, or null where the value is not finite (JSON has no infinity).
nlohmann::json number_or_null(double v);

const char* topology_name(model::topology t) noexcept;

}  // namespace pinchoff::cli
