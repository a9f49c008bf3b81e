#pragma once
// Running the command line from tests: in-process with an argv vector (CLI11's own testing
// approach), or as a child process of the built binary for what only a real process shows
// (signals and their exit status, peak memory).
#include <fcntl.h>
#include <spawn.h>
#include <sys/types.h>
#include <unistd.h>

#include <chrono>
#include <fstream>
#include <sstream>
#include <thread>
#include <string>
#include <vector>

#include "cli/app.hpp"
#include "cli/data_files.hpp"

extern char** environ;

namespace pinchoff::testing {

struct cli_result {
  int status;
  std::string out, err;
};

/// The data files the way the program finds them: beside this test runner, in the build
/// folder's share/pinchoff (copied there by the build); $PINCHOFF_DEVICES is not read.
inline pinchoff::cli::data_files built_data_files() { return pinchoff::cli::find_data_files(pinchoff::cli::program_path(""), nullptr); }

/// `pinchoff ARGS...` in this process; standard output and error captured.
inline cli_result run_cli(const std::vector<std::string>& args) {
  std::ostringstream out, err;
  const int status = pinchoff::cli::run(args, out, err, built_data_files());
  return {status, out.str(), err.str()};
}

#ifdef PINCHOFF_BINARY
/// What a child started by spawn_cli gets besides its arguments: environment entries
/// (NAME=VALUE, replacing the test runner's of the same name) and a file for its standard
/// error (empty: /dev/null).
struct spawn_extras {
  std::vector<std::string> env;
  std::string err_path;
};

/// `pinchoff ARGS...` as a child process (the built binary), its output sent to /dev/null.
/// Returns the child's pid, or -1 when it could not be started.
inline pid_t spawn_cli(const std::vector<std::string>& args, const spawn_extras& extras = {}) {
  std::vector<std::string> all{PINCHOFF_BINARY};
  all.insert(all.end(), args.begin(), args.end());
  std::vector<char*> argv;
  for (std::string& a : all) argv.push_back(a.data());
  argv.push_back(nullptr);
  std::vector<std::string> env_all = extras.env;
  for (char** e = environ; *e; ++e) {
    const std::string entry(*e);
    const std::string name = entry.substr(0, entry.find('=') + 1);
    bool replaced = false;
    for (const std::string& x : extras.env) replaced = replaced || x.rfind(name, 0) == 0;
    if (!replaced) env_all.push_back(entry);
  }
  std::vector<char*> envp;
  for (std::string& e : env_all) envp.push_back(e.data());
  envp.push_back(nullptr);
  posix_spawn_file_actions_t fa;
  posix_spawn_file_actions_init(&fa);
  posix_spawn_file_actions_addopen(&fa, 1, "/dev/null", O_WRONLY, 0);
  if (extras.err_path.empty())
    posix_spawn_file_actions_addopen(&fa, 2, "/dev/null", O_WRONLY, 0);
  else
    posix_spawn_file_actions_addopen(&fa, 2, extras.err_path.c_str(), O_WRONLY | O_CREAT | O_TRUNC, 0600);
  pid_t pid = -1;
  const int e = posix_spawn(&pid, argv[0], &fa, nullptr, argv.data(), envp.data());
  posix_spawn_file_actions_destroy(&fa);
  return e == 0 ? pid : -1;
}
#endif

/// Waits (up to `seconds`) until process `pid` catches signal `sig`, as /proc/PID/status's
/// SigCgt mask shows: a signal sent before the program installs its handler kills it
/// instead, and a program built with the sanitizers starts slowly. False when it did not.
inline bool wait_for_handler(pid_t pid, int sig, double seconds) {
  const auto until = std::chrono::steady_clock::now() + std::chrono::duration<double>(seconds);
  while (std::chrono::steady_clock::now() < until) {
    std::ifstream status("/proc/" + std::to_string(pid) + "/status");
    std::string line;
    while (std::getline(status, line))
      if (line.rfind("SigCgt:", 0) == 0) {
        const unsigned long long mask = std::stoull(line.substr(7), nullptr, 16);
        if (mask & (1ULL << (sig - 1))) return true;
      }
    std::this_thread::sleep_for(std::chrono::milliseconds(5));
  }
  return false;
}

}  // namespace pinchoff::testing
