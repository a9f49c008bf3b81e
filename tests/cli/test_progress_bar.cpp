// The progress bar of long jobs: its line, its throttling and its clearing, and on a real
// terminal (a pseudo-terminal) during a render, where it must show and then give way to the
// report, and not with --quiet.
#include <doctest/doctest.h>

#include <poll.h>
#include <pty.h>
#include <sys/wait.h>
#include <unistd.h>

#include <chrono>
#include <sstream>
#include <string>
#include <vector>

#include "cli/progress_bar.hpp"
#include "support/cli_runner.hpp"
#include "support/scratch_dir.hpp"

namespace test_progress_bar {

using pinchoff::cli::progress_bar;
using pinchoff::testing::scratch_dir;

TEST_CASE("the bar line shows percent, a 24-character bar, speed and time left, and clears to a blank line") {
  std::ostringstream err;
  {
    progress_bar bar(err, true);
    bar.update(0.42, 38.14, 12.4);  // floor(0.42 * 24) = 10 filled cells
    CHECK(err.str() == "\r   42 % [##########..............]  38.1x real time, 0:12 left ");
    bar.update(0.5, 38.0, 11.0);  // within 0.1 s of the last drawing: skipped
    CHECK(err.str().find("50 %") == std::string::npos);
    bar.update(1.0, 40.0, 0.0);  // the end is always drawn
    CHECK(err.str().find("\r  100 % [########################]  40.0x real time, 0:00 left ") != std::string::npos);
    err.str("");
    bar.clear();
    CHECK(err.str() == "\r" + std::string(72, ' ') + "\r");
    err.str("");
  }  // nothing more on destruction: already clear
  CHECK(err.str().empty());

  std::ostringstream quiet;
  {
    progress_bar off(quiet, false);
    off.update(0.3, 10.0, 5.0);
    off.clear();
  }
  CHECK(quiet.str().empty());
}

namespace {

// Runs `pinchoff ARGS` with standard output and error on a new pseudo-terminal and returns
// everything it wrote there (the terminal turns "\n" into "\r\n").
std::string run_on_terminal(const std::vector<std::string>& args, int& status) {
  int master = -1;
  const pid_t pid = ::forkpty(&master, nullptr, nullptr, nullptr);
  REQUIRE(pid >= 0);
  if (pid == 0) {
    std::vector<std::string> all{PINCHOFF_BINARY};
    all.insert(all.end(), args.begin(), args.end());
    std::vector<char*> argv;
    for (std::string& a : all) argv.push_back(a.data());
    argv.push_back(nullptr);
    ::execv(argv[0], argv.data());
    ::_exit(127);
  }
  std::string got;
  char buf[4096];
  const auto deadline = std::chrono::steady_clock::now() + std::chrono::seconds(60);
  while (std::chrono::steady_clock::now() < deadline) {
    pollfd p{master, POLLIN, 0};
    if (::poll(&p, 1, 100) <= 0) {
      if (::waitpid(pid, &status, WNOHANG) == pid) break;
      continue;
    }
    const ssize_t n = ::read(master, buf, sizeof buf);
    if (n <= 0) break;  // EIO once the child has closed the terminal
    got.append(buf, static_cast<std::size_t>(n));
  }
  if (::waitpid(pid, &status, 0) != pid) status = -1;
  ::close(master);
  return got;
}

}  // namespace

TEST_CASE("a render on a terminal shows the bar, then clears it for the report; with --quiet it shows none") {
  scratch_dir dir;
  // 4 s of a low tone: several redraws at any speed this machine runs.
  REQUIRE(pinchoff::testing::run_cli({"tone", "--rate", "48000", "--seconds", "4", "--freq", "82", dir.file("in.wav")}).status == 0);
  const std::string stage = std::string(PINCHOFF_PRESETS_DIR) + "/bass-booster-9v.toml";

  int status = -1;
  const std::string screen = run_on_terminal({"render", stage, "--input", dir.file("in.wav"), "--output", dir.file("out.wav")}, status);
  CAPTURE(screen);
  REQUIRE(WIFEXITED(status));
  CHECK(WEXITSTATUS(status) == 0);
  const std::size_t bar = screen.find("% [");
  CHECK(bar != std::string::npos);
  CHECK(screen.find("x real time, ") != std::string::npos);
  // The bar is blanked before the report, and the report follows it.
  const std::size_t blank = screen.rfind("\r" + std::string(72, ' ') + "\r");
  const std::size_t report = screen.find("Rendered");
  REQUIRE(blank != std::string::npos);
  REQUIRE(report != std::string::npos);
  CHECK(bar < blank);
  CHECK(blank < report);

  // --quiet on a terminal: no bar.
  const std::string hushed =
      run_on_terminal({"render", stage, "--input", dir.file("in.wav"), "--output", dir.file("out2.wav"), "--quiet"}, status);
  CAPTURE(hushed);
  CHECK(hushed.find("% [") == std::string::npos);
  CHECK(hushed.find("Rendered") != std::string::npos);
}

}  // namespace test_progress_bar
