#pragma once
// Pieces several commands share: the stage-file argument with --set overrides, and the
// JSON and text forms of an operating point.
#include <functional>
#include <map>
#include <ostream>
#include <span>
#include <string>
#include <vector>

#include <filesystem>

#include <CLI/CLI.hpp>
#include <nlohmann/json.hpp>

#include "cli/data_files.hpp"
#include "model/circuit/network.hpp"
#include "model/circuit/operating_point.hpp"
#include "model/circuit/stage.hpp"

namespace pinchoff::cli {

struct stage_input {
  std::string path;
  std::vector<std::string> overrides;  ///< "--set key=value"
  std::filesystem::path devices;       ///< the program's class file (data_files::devices)
};

/// Adds the positional FILE and the repeatable --set option; takes the class file from `data`.
void add_stage_input(CLI::App& sub, stage_input& in, const data_files& data);
model::stage load_stage(const stage_input& in);
/// Reads the stage file at `path` with each of `set_args` ("KEY=VALUE", read by
/// cli/option_text.hpp's parse_set) applied; an error in an override is named
/// "--set KEY: ...".
model::stage load_stage(const std::string& path, std::span<const std::string> set_args, const std::filesystem::path& devices);

/// {"vg_v","vs_v","vd_v","vgs_v","vds_v","id_a","ig_a","region"}: the contract keys.
nlohmann::json operating_point_json(const model::terminal_point& t);

/// The cautions about the stage's rest point (model/analysis/warnings.hpp: ratings exceeded, a bias
/// that does not amplify, unsafe supplies), each written to `err` as
/// "pinchoff COMMAND: warning: ..." (prefixed with `label` when given, for commands that
/// take several stages); returns them for a JSON "warnings" list. Solves the rest point.
std::vector<std::string> rest_point_warnings(const model::stage& st, const std::string& command, std::ostream& err,
                                             const std::string& label = {});
/// The same for a rest point already solved.
std::vector<std::string> rest_point_warnings(const model::stage& st, const model::network& net,
                                             const model::operating_point& op, const std::string& command,
                                             std::ostream& err, const std::string& label = {});

/// The JSON text of a report, indented by two. A string that is not valid UTF-8 (a file
/// name is bytes, not text) has each invalid byte replaced by U+FFFD instead of failing:
/// the report of a run never fails after its files are written.
std::string json_text(const nlohmann::json& j);

/// A JSON number, or null where the value is not finite (JSON has no infinity).
nlohmann::json number_or_null(double v);

/// Simulated levels re the fundamental below the engine's numerical floor
/// (model::numerical_floor_dbc) are marks, not numbers, in every command: the text shows
/// floor_mark ("< -180"), JSON gives null with a flag (below_floor_json beside the values),
/// a plot draws the mark instead of a bar or a point.
bool below_numerical_floor(double dbc) noexcept;
inline constexpr const char* floor_mark = "< -180";
/// The level, or null where it is not finite or below the floor.
nlohmann::json dbc_or_null(double dbc);
/// One flag a level: true where it is below the floor (its value in dbc_or_null is null).
nlohmann::json below_floor_json(std::span<const double> dbc);

const char* topology_name(model::topology t) noexcept;

/// base::parse_frequency_hz / base::parse_level_vpk with the option named in any error
/// ("--freq: cannot read '1kV' as a frequency ...").
double option_frequency_hz(const std::string& text, const std::string& option);
/// A level may be a sound pressure ("94dBSPL") when `source` is a stage driven by a capsule:
/// the capsule's open-circuit voltage, sensitivity x pressure (rms), as volts peak. Without
/// a capsule (or without `source`) a sound pressure is refused by name.
double option_level_vpk(const std::string& text, const std::string& option, const model::stage* source = nullptr);
/// True when a level, or any of a comma-separated list of levels, is written as a sound
/// pressure level ("94dBSPL").
bool is_spl_level(const std::string& text);

/// Reads the frequency given to `option` ("--at", "--to") and checks that it lies in the
/// band the small-signal analyses cover (model::lowest_analysis_hz .. highest_analysis_hz).
double parse_analysis_frequency_hz(const std::string& text, const std::string& option);

}  // namespace pinchoff::cli

// Options shared by `spread` and `tune --over-spread`.
#include "model/analysis/spread.hpp"

namespace pinchoff::cli {

struct spread_input {
  std::string idss, vp, supply, tolerance, distribution{"uniform"}, device_class;
  std::string parts;        ///< --parts: a parts table or a bag's readings
  double correlation{0.7};
  int runs{2000};
  bool runs_given{false};   ///< --runs was given (with --parts: draw from the bag)
  std::uint64_t seed{1};
  int threads{0};
};

void add_spread_options(CLI::App& sub, spread_input& in);
/// The spread_settings fields the model names in its errors, mapped to the options above
/// (added to a command's options_of_fields).
void map_spread_fields(std::map<std::string, std::string, std::less<>>& options_of_fields);
/// The settings; IDSS and VP ranges come from --idss/--vp, else from --class, else from
/// the stage's own class (if it names one). `stage_path` locates the class file.
model::spread_settings spread_settings_from(const spread_input& in, const model::stage& st, const stage_input& stage);
/// One line describing what was varied, for reports.
std::string describe_spread(const model::spread_settings& s, const model::stage& st);

}  // namespace pinchoff::cli
