// Every file a command writes, seen from the command line: names up to the filesystem's
// limit, reports that survive file names that are not UTF-8, nothing committed or left by
// a failed run (a full disk included), create-or-fail between concurrent runs, links planted
// where a temporary goes, the stale temporaries of a killed run, and 128 + the signal.
#include <doctest/doctest.h>

#include <sched.h>
#include <signal.h>
#include <sys/mount.h>
#include <sys/resource.h>
#include <sys/wait.h>
#include <unistd.h>

#include <chrono>
#include <cstring>
#include <filesystem>
#include <fstream>
#include <sstream>
#include <string>
#include <thread>
#include <vector>

#include <nlohmann/json.hpp>

#include "base/output_file.hpp"
#include "cli/app.hpp"
#include "support/cli_runner.hpp"
#include "support/files.hpp"
#include "support/sanitized.hpp"
#include "support/scratch_dir.hpp"

namespace test_outputs {

namespace fs = std::filesystem;
using pinchoff::testing::run_cli;
using pinchoff::testing::scratch_dir;
using pinchoff::testing::spawn_cli;

namespace {

std::string preset(const char* name) { return std::string(PINCHOFF_PRESETS_DIR) + "/" + name; }

using pinchoff::testing::names_in;
using pinchoff::testing::put;
using pinchoff::testing::slurp;

bool has_hidden_file(const fs::path& dir) {
  for (const auto& e : fs::directory_iterator(dir))
    if (e.path().filename().string().front() == '.') return true;
  return false;
}

void wait_for_hidden_file(const fs::path& dir) {
  const auto deadline = std::chrono::steady_clock::now() + std::chrono::seconds(20);
  while (std::chrono::steady_clock::now() < deadline && !has_hidden_file(dir))
    std::this_thread::sleep_for(std::chrono::milliseconds(2));
  REQUIRE(has_hidden_file(dir));
}

int wait_status(pid_t pid) {
  int status = 0;
  REQUIRE(::waitpid(pid, &status, 0) == pid);
  REQUIRE(WIFEXITED(status));
  return WEXITSTATUS(status);
}

}  // namespace

TEST_CASE("any output name the filesystem takes can be written, up to 255 bytes") {
  // NAME_MAX is 255 bytes (POSIX; Linux filesystems). A temporary named after the output
  // plus a suffix failed for valid names of 242 bytes and more.
  scratch_dir dir;
  for (const std::size_t length : {242u, 250u, 255u}) {
    CAPTURE(length);
    const std::string wav = std::string(length - 4, 't') + ".wav", svg = std::string(length - 4, 'p') + ".svg";
    const auto t = run_cli({"tone", "--seconds", "0.1", dir.file(wav)});
    CAPTURE(t.err);
    CHECK(t.status == 0);
    CHECK(fs::file_size(dir.path / wav) > 44);
    const auto r = run_cli({"response", preset("bass-booster-9v.toml"), "--plot", dir.file(svg)});
    CAPTURE(r.err);
    CHECK(r.status == 0);
    CHECK(slurp(dir.path / svg).rfind("<?xml", 0) == 0);
  }
  CHECK(names_in(dir.path).size() == 6);  // the outputs, no temporary
}

TEST_CASE("--json reports name files whose names are not UTF-8, and fail after nothing is written") {
  // A file name is bytes; JSON text is UTF-8 (RFC 8259). The report replaces each invalid
  // byte by U+FFFD instead of failing after the files were committed (exit 1 with the files
  // already in place).
  scratch_dir dir;
  const std::string bad = "take\xff\xfe";
  const auto t = run_cli({"tone", "--seconds", "0.1", "--json", dir.file(bad + ".wav")});
  CAPTURE(t.err);
  REQUIRE(t.status == 0);
  const nlohmann::json j = nlohmann::json::parse(t.out);
  CHECK(j.dump().find("take\xef\xbf\xbd") != std::string::npos);
  CHECK(fs::exists(dir.path / (bad + ".wav")));

  const auto c = run_cli({"compare", preset("bass-booster-9v.toml"), preset("clean-preamp-18v.toml"), "--json", "--plot",
                          dir.file(bad + ".svg")});
  CAPTURE(c.err);
  CHECK(c.status == 0);
  CHECK(nlohmann::json::accept(c.out));
  CHECK(fs::exists(dir.path / (bad + ".svg")));

  const auto r = run_cli({"render", preset("bass-booster-9v.toml"), "--input", dir.file(bad + ".wav"), "--output",
                          dir.file(bad + "-out.wav"), "--oversample", "2", "--json"});
  CAPTURE(r.err);
  CHECK(r.status == 0);
  CHECK(nlohmann::json::accept(r.out));
  CHECK(fs::exists(dir.path / (bad + "-out.wav")));
}

TEST_CASE("a refused measurement leaves no plot") {
  scratch_dir dir;
  REQUIRE(run_cli({"tone", "--rate", "96000", "--freq", "30k", "--seconds", "1", dir.file("hi96.wav")}).status == 0);
  const auto m = run_cli({"measure", dir.file("hi96.wav"), "--against", preset("bass-booster-9v.toml"), "--drive", "100mV",
                          "--plot", dir.file("m.svg")});
  CAPTURE(m.err);
  CHECK(m.status == 2);
  CHECK(names_in(dir.path) == std::vector<std::string>{"hi96.wav"});
}

TEST_CASE("a plot is never written over the program's own device-class file") {
  // The class file a stage reads when none lies beside it ($PINCHOFF_DEVICES, or the
  // installed one) is an input like the stage file.
  scratch_dir dir;
  fs::create_directory(dir.path / "data");
  const std::string classes =
      "[general]\nidss = \"2m..8m\"\nvp = \"-1..-3\"\ntypical_idss = \"5m\"\ntypical_vp = -1.8\n";
  put(dir.path / "data" / "classes.toml", classes);
  put(dir.path / "stage.toml",
      "[supply]\nvolts = 9\n[jfet]\nclass = \"general\"\n[gate]\ncoupling_cap = \"100n\"\nresistor = \"1M\"\n"
      "[drain]\nresistor = \"3.3k\"\n[source]\nresistor = \"680\"\n");
  std::ostringstream out, err;
  const int status = pinchoff::cli::run({"response", dir.file("stage.toml"), "--plot", dir.file("data/classes.toml")}, out,
                                        err, pinchoff::cli::data_files{dir.path / "data" / "classes.toml", {}});
  CAPTURE(err.str());
  CHECK(status == 2);
  CHECK(err.str().find("it is the input file") != std::string::npos);
  CHECK(slurp(dir.path / "data" / "classes.toml") == classes);
}

TEST_CASE("a link planted where the plot's temporary went is not written through") {
  // The plot writer used a fixed temporary name, ".NAME.partial", opened without O_EXCL
  // or O_NOFOLLOW: a link planted there made --plot overwrite the link's target.
  scratch_dir dir;
  put(dir.path / "precious.txt", "keep me");
  fs::create_symlink(dir.path / "precious.txt", dir.path / ".victim.svg.partial");
  const auto r = run_cli({"response", preset("bass-booster-9v.toml"), "--plot", dir.file("victim.svg")});
  CAPTURE(r.err);
  CHECK(r.status == 0);
  CHECK(slurp(dir.path / "precious.txt") == "keep me");
  CHECK(fs::is_symlink(dir.path / ".victim.svg.partial"));
  CHECK(slurp(dir.path / "victim.svg").rfind("<?xml", 0) == 0);
}

TEST_CASE("two runs writing the same file at once: exactly one succeeds without --force") {
  // A check that the name is free followed by a rename let both report success (14 of 300
  // pairs of `tone`); create-or-fail is now one step. Under the sanitizers 10 pairs: each
  // start of the sanitized program costs some 0.17 CPU-s, and the Release suite runs 40.
  scratch_dir dir;
  int both = 0, neither = 0;
  constexpr int pairs = pinchoff::testing::full_or_sanitized(40, 10);
  for (int i = 0; i < pairs; ++i) {
    const std::string out = dir.file("race-" + std::to_string(i) + ".wav");
    const pid_t a = spawn_cli({"tone", "--seconds", "0.3", out});
    const pid_t b = spawn_cli({"tone", "--seconds", "0.3", out});
    REQUIRE(a > 0);
    REQUIRE(b > 0);
    const int sa = wait_status(a), sb = wait_status(b);
    CHECK(((sa == 0 && sb == 2) || (sa == 2 && sb == 0) || (sa == 0 && sb == 0) || (sa == 2 && sb == 2)));
    both += sa == 0 && sb == 0;
    neither += sa != 0 && sb != 0;
  }
  CAPTURE(pairs);
  CHECK(both == 0);
  CHECK(neither == 0);
  CHECK(names_in(dir.path).size() == static_cast<std::size_t>(pairs));  // no temporary left
}

TEST_CASE("render commits its outputs all or none: a file appearing meanwhile leaves none of them") {
  // Outputs were committed one by one: a name taken during the run gave exit 2 but left
  // the outputs committed before it.
  scratch_dir dir;
  REQUIRE(run_cli({"tone", "--seconds", "10", "--freq", "110", dir.file("in.wav")}).status == 0);
  const pid_t pid = spawn_cli({"render", preset("bass-booster-9v.toml"), preset("clean-preamp-18v.toml"), "--dry", "--input",
                               dir.file("in.wav"), "--output", dir.file("cmp"), "--oversample", "2"});
  REQUIRE(pid > 0);
  const auto deadline = std::chrono::steady_clock::now() + std::chrono::seconds(20);
  while (std::chrono::steady_clock::now() < deadline && !(fs::exists(dir.path / "cmp") && has_hidden_file(dir.path / "cmp")))
    std::this_thread::sleep_for(std::chrono::milliseconds(2));
  put(dir.path / "cmp" / "dry.wav", "theirs");  // the last of the three names
  CHECK(wait_status(pid) == 2);
  CHECK(names_in(dir.path / "cmp") == std::vector<std::string>{"dry.wav"});
  CHECK(slurp(dir.path / "cmp" / "dry.wav") == "theirs");
}

TEST_CASE("render and tone stopped by SIGTERM exit 143 and leave nothing") {
  // common practice: a process ended by signal N reports 128 + N (README, exit status).
  scratch_dir dir;
  REQUIRE(run_cli({"tone", "--seconds", "60", "--freq", "110", dir.file("long.wav")}).status == 0);
  for (const char* mode : {"one stage", "two stages"}) {
    CAPTURE(std::string(mode));
    const bool one = std::string(mode) == "one stage";
    std::vector<std::string> args{"render", preset("bass-booster-9v.toml")};
    if (!one) args.push_back(preset("clean-preamp-18v.toml"));
    args.insert(args.end(), {"--input", dir.file("long.wav"), "--output", dir.file(one ? "out.wav" : "cmp"), "--oversample", "8"});
    const pid_t pid = spawn_cli(args);
    REQUIRE(pid > 0);
    const auto deadline = std::chrono::steady_clock::now() + std::chrono::seconds(20);
    const fs::path where = one ? dir.path : dir.path / "cmp";
    while (std::chrono::steady_clock::now() < deadline && !(fs::exists(where) && has_hidden_file(where)))
      std::this_thread::sleep_for(std::chrono::milliseconds(2));
    std::this_thread::sleep_for(std::chrono::milliseconds(50));
    REQUIRE(::kill(pid, SIGTERM) == 0);
    CHECK(wait_status(pid) == 143);
    CHECK(names_in(dir.path) == std::vector<std::string>{"long.wav"});
  }
}

TEST_CASE("after a SIGKILL the next run writing that file removes the stale temporary, never a live run's") {
  scratch_dir dir;
  const std::string out = dir.file("tone.wav");
  {
    const pid_t pid = spawn_cli({"tone", "--seconds", "3000", "--channels", "2", out});
    REQUIRE(pid > 0);
    wait_for_hidden_file(dir.path);
    REQUIRE(::kill(pid, SIGKILL) == 0);
    int status = 0;
    REQUIRE(::waitpid(pid, &status, 0) == pid);
    REQUIRE(names_in(dir.path).size() == 1);  // SIGKILL cannot be caught: the temporary stays
  }
  const auto again = run_cli({"tone", "--seconds", "0.1", out});
  CAPTURE(again.err);
  CHECK(again.status == 0);
  CHECK(names_in(dir.path) == std::vector<std::string>{"tone.wav"});

  // A live run writing the same name: its temporary is left alone.
  const pid_t live = spawn_cli({"tone", "--seconds", "3000", "--channels", "2", "--force", out});
  REQUIRE(live > 0);
  wait_for_hidden_file(dir.path);
  const auto meanwhile = run_cli({"tone", "--seconds", "0.1", "--force", out});
  CHECK(meanwhile.status == 0);
  CHECK(names_in(dir.path).size() == 2);  // tone.wav and the live run's temporary
  REQUIRE(::kill(live, SIGTERM) == 0);
  CHECK(wait_status(live) == 143);
  CHECK(names_in(dir.path) == std::vector<std::string>{"tone.wav"});
}

namespace {

enum class write_fault {
  small_disk,   // a 64 KiB tmpfs, nearly full: ENOSPC
  file_limit,   // RLIMIT_FSIZE of 4 KiB, no privilege needed: EFBIG
};

// Runs `scenario` in a child process where writes fail: on a 64 KiB tmpfs mounted at `dir`
// (in a mount namespace of its own, so nothing outlives the child), or under a limit on
// the size of any file written. The scenario's text comes back through a pipe; "cannot
// mount: ..." when the machine allows no such mount.
std::string with_write_fault(const fs::path& dir, write_fault fault, std::string (*scenario)(const fs::path&, write_fault)) {
  int fds[2];
  REQUIRE(::pipe(fds) == 0);
  const pid_t pid = ::fork();
  REQUIRE(pid >= 0);
  if (pid == 0) {
    ::close(fds[0]);
    std::string text;
    const bool root = ::geteuid() == 0;
    if (fault == write_fault::file_limit) {
      ::signal(SIGXFSZ, SIG_IGN);  // a write past the limit then fails with EFBIG
      const rlimit limit{4096, 4096};
      text = ::setrlimit(RLIMIT_FSIZE, &limit) == 0 ? "" : std::string("cannot limit: ") + std::strerror(errno);
    } else if (::unshare(root ? CLONE_NEWNS : (CLONE_NEWUSER | CLONE_NEWNS)) != 0) {
      text = std::string("cannot mount: unshare: ") + std::strerror(errno);
    } else if (::mount(nullptr, "/", nullptr, MS_REC | MS_PRIVATE, nullptr) != 0 && root) {
      text = std::string("cannot mount: private /: ") + std::strerror(errno);
    } else if (::mount("tmpfs", dir.c_str(), "tmpfs", 0, "size=64k") != 0) {
      text = std::string("cannot mount: tmpfs: ") + std::strerror(errno);
    }
    if (text.empty()) {
      try {
        text = scenario(dir, fault);
      } catch (const std::exception& e) {
        text = std::string("exception: ") + e.what();
      }
    }
    (void)!::write(fds[1], text.data(), text.size());
    ::_exit(0);
  }
  ::close(fds[1]);
  std::string text;
  char buf[512];
  for (ssize_t n; (n = ::read(fds[0], buf, sizeof buf)) > 0;) text.append(buf, static_cast<std::size_t>(n));
  ::close(fds[0]);
  int status = 0;
  ::waitpid(pid, &status, 0);
  return text;
}

// On the small disk, fills it but for `room` bytes (tmpfs counts 4 KiB pages).
void fill_leaving(const fs::path& dir, std::size_t room, write_fault fault) {
  if (fault != write_fault::small_disk) return;
  std::ofstream f(dir / "filler", std::ios::binary);
  const std::string block(4096, 'f');
  for (std::size_t used = 0; used + room + 4096 <= 64 * 1024; used += 4096) f << block;
}

std::string listing_text(const fs::path& dir) {
  std::string s;
  for (const std::string& n : names_in(dir)) s += n + " ";
  return s;
}

std::string says_why(const std::string& err) {
  const bool why = err.find("No space left") != std::string::npos || err.find("File too large") != std::string::npos;
  return why ? "; says why" : "; message: " + err;
}

std::string spread_with_fault(const fs::path& dir, write_fault fault) {
  // On the small disk: room for the first histogram (vd) but not for both (each is about
  // 8 KiB, three pages).
  fill_leaving(dir, 12 * 1024, fault);
  const auto r = run_cli({"spread", preset("bass-booster-9v.toml"), "--runs", "200", "--idss", "2m..8m", "--plot", (dir / "h.svg").string()});
  return "status " + std::to_string(r.status) + "; left: " + listing_text(dir) + says_why(r.err);
}

std::string tone_with_fault(const fs::path& dir, write_fault fault) {
  fill_leaving(dir, 8 * 1024, fault);
  put(dir / "old.wav", "old");
  const auto r = run_cli({"tone", "--seconds", "1", "--force", (dir / "old.wav").string()});
  return "status " + std::to_string(r.status) + "; left: " + listing_text(dir) + "; old " + slurp(dir / "old.wav") + says_why(r.err);
}

}  // namespace

TEST_CASE("a full disk or a failed write: exit 2 saying why, no output or temporary left, a replaced file kept") {
  scratch_dir dir;
  fs::create_directory(dir.path / "small");
  const std::string spread = with_write_fault(dir.path / "small", write_fault::small_disk, spread_with_fault);
  if (spread.rfind("cannot mount", 0) == 0) {
    MESSAGE("the full-disk half is skipped: this machine allows no small tmpfs here (" << spread << ")");
  } else {
    CHECK(spread == "status 2; left: filler ; says why");
    CHECK(with_write_fault(dir.path / "small", write_fault::small_disk, tone_with_fault) ==
          "status 2; left: filler old.wav ; old old; says why");
  }
  // A write error injected by a limit on file size, which needs no privilege.
  CHECK(with_write_fault(dir.path / "small", write_fault::file_limit, spread_with_fault) == "status 2; left: ; says why");
  fs::remove_all(dir.path / "small");
  fs::create_directory(dir.path / "small");
  CHECK(with_write_fault(dir.path / "small", write_fault::file_limit, tone_with_fault) ==
        "status 2; left: old.wav ; old old; says why");
}

}  // namespace test_outputs
