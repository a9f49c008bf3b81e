// pinchoff workbench: serves a page on the loopback interface for editing stage files in a
// browser, on the same analyses as the commands (cli/workbench_server.hpp).
#include <fcntl.h>
#include <signal.h>
#include <spawn.h>
#include <sys/wait.h>
#include <unistd.h>

#include <chrono>
#include <filesystem>
#include <memory>
#include <optional>
#include <string>
#include <thread>
#include <vector>

#include <CLI/CLI.hpp>

#include "cli/app.hpp"
#include "cli/interrupt.hpp"
#include "cli/workbench_server.hpp"
#include "base/error.hpp"

extern char** environ;

namespace pinchoff::cli {
namespace {

struct workbench_options {
  std::vector<std::string> files;
  int port{0};
  bool open{false};
  std::string audio;
  data_files data;
};

// The browser the page was opened in: xdg-open started on the address and not waited for
// (it may stay until the browser closes, and the server must keep answering and stop on
// Ctrl-C meanwhile); poll() says once whether it failed.
class browser_opener {
 public:
  // Starts xdg-open where the system has it; says so where it has not. The child gets none
  // of the server's descriptors (a browser it starts would otherwise keep the listening
  // sockets open after the server stops) and its output goes to /dev/null.
  browser_opener(const std::string& address, std::ostream& err) : err_(err) {
    const char* const argv[] = {"xdg-open", address.c_str(), nullptr};
    posix_spawn_file_actions_t fa;
    posix_spawn_file_actions_init(&fa);
    posix_spawn_file_actions_addopen(&fa, 1, "/dev/null", O_WRONLY, 0);
    posix_spawn_file_actions_addopen(&fa, 2, "/dev/null", O_WRONLY, 0);
    posix_spawn_file_actions_addclosefrom_np(&fa, 3);
    if (::posix_spawnp(&pid_, "xdg-open", &fa, nullptr, const_cast<char* const*>(argv), environ) != 0) {
      pid_ = 0;
      err_ << "pinchoff workbench: --open: no xdg-open on this system; open the address above in a browser\n";
      err_.flush();
    }
    posix_spawn_file_actions_destroy(&fa);
  }
  // Reaps xdg-open once it has ended and says when it could not open a browser.
  void poll() {
    if (pid_ <= 0) return;
    int status = 0;
    if (::waitpid(pid_, &status, WNOHANG) != pid_) return;
    pid_ = 0;
    if (!WIFEXITED(status) || WEXITSTATUS(status) != 0)
      err_ << "pinchoff workbench: --open: xdg-open could not open a browser ("
           << (WIFEXITED(status) ? "exit status " + std::to_string(WEXITSTATUS(status)) : std::string("killed"))
           << "); open the address above in a browser\n";
    err_.flush();
  }

 private:
  std::ostream& err_;
  pid_t pid_{0};
};

CLI::App* setup(CLI::App& app, workbench_options& opt) {
  CLI::App* sub = app.add_subcommand("workbench", "Edit stage files in a browser, on this machine only, and hear them");
  sub->add_option("FILE", opt.files, "Stage or chain files (TOML) to load")->required();
  sub->add_option("--port", opt.port, "Port on 127.0.0.1 and ::1 (default 0: a free port)")->capture_default_str();
  sub->add_flag("--open", opt.open, "Open the page in the system's browser (xdg-open)");
  sub->add_option("--audio", opt.audio, "Recording to listen through the design (default: the bundled demo clip)")
      ->type_name("CLIP.wav");
  sub->footer(
      "Examples:\n"
      "  pinchoff workbench presets/bass-booster-9v.toml --open\n"
      "  pinchoff workbench presets/three-stage-overdrive-9v.toml --audio my-di-track.wav\n"
      "The page is served on the loopback interface only and answers only requests that carry\n"
      "the token in the printed address. Stop it with Ctrl-C. Mind the playback level: start\n"
      "with the volume low, especially on headphones.");
  return sub;
}

void run(const workbench_options& opt, std::ostream& err) {
  if (opt.port < 0 || opt.port > 65535)
    throw input_error("--port must be 0 (a free port) to 65535, got " + std::to_string(opt.port));
  workbench_settings s;
  for (const std::string& f : opt.files) s.files.emplace_back(f);
  s.devices = opt.data.devices;
  s.clip = opt.audio.empty() ? opt.data.demo_clip : std::filesystem::path(opt.audio);
  s.port = opt.port;
  const interrupt_guard guard;
  ::signal(SIGPIPE, SIG_IGN);  // a browser that goes away mid-answer is no reason to stop
  workbench_server server(std::move(s));
  server.start();
  err << "pinchoff workbench: serving on " << server.address() << '\n'
      << "  (this machine only" << (server.hosts().size() > 1 ? ", also at [::1]" : "")
      << "; the token in the address is this run's own; Ctrl-C stops)\n"
      << "  mind the playback level: start with the volume low, especially on headphones\n";
  err.flush();
  std::optional<browser_opener> browser;
  if (opt.open) browser.emplace(server.address(), err);
  while (!guard.flag()->load(std::memory_order_relaxed)) {
    std::this_thread::sleep_for(std::chrono::milliseconds(100));
    if (browser) browser->poll();
  }
  server.stop();
  err << "pinchoff workbench: stopped\n";
}

}  // namespace

void register_workbench(CLI::App& app, std::vector<command>& commands, const data_files& data) {
  auto opt = std::make_shared<workbench_options>();
  opt->data = data;
  CLI::App* sub = setup(app, *opt);
  commands.push_back({sub, [opt](std::ostream&, std::ostream& err, base::output_set&) { run(*opt, err); }});
}

}  // namespace pinchoff::cli
