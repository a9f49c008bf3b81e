#pragma once
// The command-line application. `run` is what main() calls and what the tests call
// in-process with an argv vector (without the program name).
#include <functional>
#include <iosfwd>
#include <map>
#include <string>
#include <vector>

#include "cli/data_files.hpp"

namespace CLI {
class App;
}

namespace pinchoff::cli {

/// One subcommand: set up by its register function, run after a successful parse.
/// `run` writes the report to `out`; the caller prints it only when run succeeded, so a
/// failed command writes nothing to stdout. Warnings and progress go to `err`.
/// `options_of_fields` maps the fields the model names in a setting_error (base/error.hpp)
/// to this command's options: {"oversampling", "--oversample"} turns "oversampling must be
/// 1 to 64" into "--oversample: oversampling must be 1 to 64". A field it does not list is
/// printed as the model named it.
struct command {
  CLI::App* sub{nullptr};
  std::function<void(std::ostream& out, std::ostream& err)> run;
  std::map<std::string, std::string, std::less<>> options_of_fields{};
};

/// Parses `args` (no program name) and runs the chosen command, which reads its data from
/// `data` (main() finds it beside the program: cli/data_files.hpp). Returns the exit status:
/// 0 success, 1 internal failure, 2 bad input or usage, 130 interrupted (Ctrl-C).
int run(const std::vector<std::string>& args, std::ostream& out, std::ostream& err, const data_files& data);

// One register function per command file (cli/cmd_*.cpp); `data` is what run() was given.
void register_bias(CLI::App& app, std::vector<command>& commands, const data_files& data);
void register_tune(CLI::App& app, std::vector<command>& commands, const data_files& data);
void register_response(CLI::App& app, std::vector<command>& commands, const data_files& data);
void register_fit(CLI::App& app, std::vector<command>& commands, const data_files& data);
void register_spread(CLI::App& app, std::vector<command>& commands, const data_files& data);
void register_sweep(CLI::App& app, std::vector<command>& commands, const data_files& data);
void register_imd(CLI::App& app, std::vector<command>& commands, const data_files& data);
void register_tone(CLI::App& app, std::vector<command>& commands, const data_files& data);
void register_measure(CLI::App& app, std::vector<command>& commands, const data_files& data);
void register_compare(CLI::App& app, std::vector<command>& commands, const data_files& data);
void register_render(CLI::App& app, std::vector<command>& commands, const data_files& data);

}  // namespace pinchoff::cli
