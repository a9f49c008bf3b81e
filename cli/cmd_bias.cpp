#include <CLI/CLI.hpp>

#include "cli/app.hpp"
#include "dsp/error.hpp"

namespace pinchoff::cli {

void register_bias(CLI::App& app, std::vector<command>& commands) {
  CLI::App* sub = app.add_subcommand("bias", "(being written)");
  commands.push_back({sub, [](std::ostream&, std::ostream&) { throw internal_error("not written yet"); }});
}

}  // namespace pinchoff::cli
