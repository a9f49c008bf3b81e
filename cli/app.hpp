#pragma once
// The command-line application. `run` is what main() calls and what the tests call
// in-process with an argv vector (without the program name).
#include <functional>
#include <iosfwd>
#include <map>
#include <string>
#include <vector>

#include "cli/command_files.hpp"
#include "cli/data_files.hpp"

namespace CLI {
class App;
}

namespace pinchoff::base {
class output_set;
}

namespace pinchoff::cli {

/// One subcommand: set up by its register function, run after a successful parse.
/// `run` writes the report to `out`; the caller prints it only when run succeeded, so a
/// failed command writes nothing to stdout. Warnings and progress go to `err`.
/// Every file a command writes goes into `outputs` (base/output_file.hpp) uncommitted; the
/// caller commits them all, or none, once run has returned, report and all.
/// `files` declares what the command reads and writes, from its parsed options; the
/// caller checks it (cli/command_files.hpp) before run, so an output that would replace an
/// input, or another output, is refused before any work.
/// `options_of_fields` maps the fields the model names in a setting_error (base/error.hpp)
/// to this command's options: {"oversampling", "--oversample"} turns "oversampling must be
/// 1 to 64" into "--oversample: oversampling must be 1 to 64". A field it does not list is
/// printed as the model named it.
struct command {
  CLI::App* sub{nullptr};
  std::function<void(std::ostream& out, std::ostream& err, base::output_set& outputs)> run;
  std::map<std::string, std::string, std::less<>> options_of_fields{};
  std::function<command_files()> files{};
};

/// Parses `args` (no program name) and runs the chosen command, which reads its data from
/// `data` (main() finds it beside the program: cli/data_files.hpp). Returns the exit status:
/// 0 success, 1 internal failure, 2 bad input or usage, 128 + the signal when interrupted
/// (130 Ctrl-C, 143 SIGTERM).
int run(const std::vector<std::string>& args, std::ostream& out, std::ostream& err, const data_files& data);

// One register function per command file (cli/cmd_*.cpp); `data` is what run() was given.
void register_bias(CLI::App& app, std::vector<command>& commands, const data_files& data);
void register_tune(CLI::App& app, std::vector<command>& commands, const data_files& data);
void register_response(CLI::App& app, std::vector<command>& commands, const data_files& data);
void register_noise(CLI::App& app, std::vector<command>& commands, const data_files& data);
void register_fit(CLI::App& app, std::vector<command>& commands, const data_files& data);
void register_match(CLI::App& app, std::vector<command>& commands, const data_files& data);
void register_spread(CLI::App& app, std::vector<command>& commands, const data_files& data);
void register_sweep(CLI::App& app, std::vector<command>& commands, const data_files& data);
void register_imd(CLI::App& app, std::vector<command>& commands, const data_files& data);
void register_tone(CLI::App& app, std::vector<command>& commands, const data_files& data);
void register_measure(CLI::App& app, std::vector<command>& commands, const data_files& data);
void register_compare(CLI::App& app, std::vector<command>& commands, const data_files& data);
void register_render(CLI::App& app, std::vector<command>& commands, const data_files& data);
void register_workbench(CLI::App& app, std::vector<command>& commands, const data_files& data);

}  // namespace pinchoff::cli
