#pragma once
// The JSON reports of the commands that describe a stage, built by one function each that
// both the command (with --json) and the workbench server call: the figures a page shows
// are byte for byte the ones the command line prints for the same file.
#include <ostream>

#include <nlohmann/json.hpp>

#include "model/circuit/stage.hpp"

namespace pinchoff::cli {

/// What `pinchoff bias FILE --json` prints for the stage `st` (no --at).
nlohmann::json bias_json(const model::stage& st);
/// What `pinchoff response FILE --json` prints with its default range and points; the rest
/// point's cautions go to `err` as the command writes them.
nlohmann::json response_json(const model::stage& st, std::ostream& err);
/// What `pinchoff sweep FILE --json` prints with its defaults (25 drives, -40 to +20 dBu, 1 kHz).
nlohmann::json sweep_json(const model::stage& st, std::ostream& err);
/// What `pinchoff noise FILE --json` prints with its defaults.
nlohmann::json noise_json(const model::stage& st, std::ostream& err);

}  // namespace pinchoff::cli
