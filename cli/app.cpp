#include "cli/app.hpp"

#include <algorithm>
#include <cerrno>
#include <cstring>
#include <iostream>
#include <sstream>

#include <CLI/CLI.hpp>

#include "base/error.hpp"
#include "base/output_file.hpp"
#include "cli/command_files.hpp"

namespace pinchoff::cli {
namespace {

// Writes what a command produced and makes sure it arrived: standard output on a full
// disk, /dev/full or a closed pipe fails, and a report cut short is a failure (exit 1),
// never a success.
int deliver(std::ostream& out, std::ostream& err, const std::string& who, const std::string& text) {
  errno = 0;
  out << text;
  out.flush();
  if (out) return 0;
  const int e = errno;
  err << who << ": cannot write to standard output" << (e != 0 ? std::string(": ") + std::strerror(e) : std::string())
      << " (the report is incomplete)\n";
  return 1;
}

}  // namespace

int run(const std::vector<std::string>& args, std::ostream& out, std::ostream& err, const data_files& data) {
  CLI::App app{
      "pinchoff: a workbench for JFET audio gain stages (pedal, preamp and microphone\n"
      "impedance-converter builders). Describe a stage in a TOML file, then ask where it\n"
      "biases, what gain and headroom it has, and which resistor hits the bias you want.",
      "pinchoff"};
  app.set_version_flag("--version", std::string("pinchoff ") + PINCHOFF_VERSION);
  app.require_subcommand(1);
  app.footer(
      "Examples:\n"
      "  pinchoff bias presets/bass-booster-9v.toml\n"
      "  pinchoff tune presets/bass-booster-9v.toml --target vd=4.5\n"
      "Run 'pinchoff COMMAND --help' for each command's options.");

  std::vector<command> commands;
  register_bias(app, commands, data);
  register_tune(app, commands, data);
  register_response(app, commands, data);
  register_noise(app, commands, data);
  register_fit(app, commands, data);
  register_match(app, commands, data);
  register_spread(app, commands, data);
  register_sweep(app, commands, data);
  register_imd(app, commands, data);
  register_tone(app, commands, data);
  register_measure(app, commands, data);
  register_compare(app, commands, data);
  register_render(app, commands, data);
  register_workbench(app, commands, data);

  if (!args.empty() && !args.front().empty() && args.front().front() != '-') {
    bool known = false;
    std::string names;
    for (const command& c : commands) {
      known = known || c.sub->get_name() == args.front();
      names += (names.empty() ? "" : ", ") + c.sub->get_name();
    }
    if (!known) {
      err << "pinchoff: unknown command '" << args.front() << "' (commands: " << names << ")\n"
          << "Run 'pinchoff --help' for usage.\n";
      return 2;
    }
  }
  std::vector<std::string> reversed(args.rbegin(), args.rend());
  try {
    app.parse(reversed);
  } catch (const CLI::CallForHelp&) {
    const CLI::App* target = &app;
    for (const command& c : commands)
      if (c.sub->parsed()) target = c.sub;
    return deliver(out, err, "pinchoff", target->help());
  } catch (const CLI::CallForAllHelp&) {
    return deliver(out, err, "pinchoff", app.help("", CLI::AppFormatMode::All));
  } catch (const CLI::CallForVersion&) {
    return deliver(out, err, "pinchoff", std::string("pinchoff ") + PINCHOFF_VERSION + "\n");
  } catch (const CLI::ParseError& e) {
    err << "pinchoff: " << e.what() << '\n';
    std::string which = "pinchoff";
    for (const command& c : commands)
      if (c.sub->parsed()) which = "pinchoff " + c.sub->get_name();
    err << "Run '" << which << " --help' for usage.\n";
    return 2;
  }

  for (const command& c : commands) {
    if (!c.sub->parsed()) continue;
    std::ostringstream report;
    try {
      // An option given an empty value (`--drive ""`, often an unset shell variable) is an
      // error, never read as the option left out.
      for (const CLI::Option* o : c.sub->get_options()) {
        if (o->count() == 0 || o->get_type_size() == 0) continue;
        for (const std::string& r : o->results())
          if (r.empty())
            throw input_error(o->get_positional() ? "the " + o->get_name() + " argument is empty"
                                                  : o->get_name() + ": the value is empty");
      }
      if (c.files) check_command_files(c.files());
      base::output_set outputs;
      c.run(report, err, outputs);
      outputs.commit();  // the report is complete: nothing that can fail is left
    } catch (const setting_error& e) {
      const auto o = c.options_of_fields.find(e.field());
      err << "pinchoff " << c.sub->get_name() << ": " << (o != c.options_of_fields.end() ? o->second : e.field()) << ": "
          << e.what() << '\n';
      return 2;
    } catch (const file_exists_error& e) {
      err << "pinchoff " << c.sub->get_name() << ": " << e.what()
          << (c.sub->get_option_no_throw("--force") ? " (use --force to replace it)" : "") << '\n';
      return 2;
    } catch (const input_error& e) {
      err << "pinchoff " << c.sub->get_name() << ": " << e.what() << '\n';
      return 2;
    } catch (const interrupted& e) {
      err << "pinchoff " << c.sub->get_name() << ": " << e.what() << '\n';
      return 128 + e.signal_number();
    } catch (const internal_error& e) {
      err << "pinchoff " << c.sub->get_name() << ": internal failure: " << e.what() << '\n';
      return 1;
    } catch (const std::exception& e) {
      err << "pinchoff " << c.sub->get_name() << ": internal failure: " << e.what() << '\n';
      return 1;
    }
    return deliver(out, err, "pinchoff " + c.sub->get_name(), report.str());
  }
  return 2;
}

}  // namespace pinchoff::cli
