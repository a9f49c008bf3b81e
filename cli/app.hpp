#pragma once
// The command-line application. `run` is what main() calls and what the tests call
// in-process with an argv vector (without the program name).
#include <functional>
#include <iosfwd>
#include <map>
#include <string>
#include <vector>

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

/// Parses `args` (no program name) and runs the chosen command. Returns the exit status:
/// 0 success, 1 internal failure, 2 bad input or usage, 130 interrupted (Ctrl-C).
int run(const std::vector<std::string>& args, std::ostream& out, std::ostream& err);

// One register function per command file (cli/cmd_*.cpp).
void register_bias(CLI::App& app, std::vector<command>& commands);
void register_tune(CLI::App& app, std::vector<command>& commands);
void register_response(CLI::App& app, std::vector<command>& commands);
void register_fit(CLI::App& app, std::vector<command>& commands);
void register_spread(CLI::App& app, std::vector<command>& commands);
void register_sweep(CLI::App& app, std::vector<command>& commands);
void register_imd(CLI::App& app, std::vector<command>& commands);
void register_tone(CLI::App& app, std::vector<command>& commands);
void register_measure(CLI::App& app, std::vector<command>& commands);
void register_compare(CLI::App& app, std::vector<command>& commands);
void register_render(CLI::App& app, std::vector<command>& commands);

}  // namespace pinchoff::cli
