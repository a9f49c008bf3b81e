// The one writer for every output (base/output_file.hpp): temporaries that never follow a
// link and fit any name the filesystem takes, all-or-none commits, create-or-fail without
// --force, and stale temporaries of killed runs cleaned without touching a live run's.
#include <doctest/doctest.h>

#include <fcntl.h>
#include <pthread.h>
#include <signal.h>
#include <sys/stat.h>
#include <sys/types.h>
#include <sys/wait.h>
#include <unistd.h>

#include <algorithm>
#include <cstdio>
#include <atomic>
#include <chrono>
#include <filesystem>
#include <fstream>
#include <latch>
#include <sstream>
#include <string>
#include <thread>
#include <vector>

#include "base/error.hpp"
#include "base/output_file.hpp"
#include "support/files.hpp"
#include "support/scratch_dir.hpp"

namespace test_output_file {

namespace fs = std::filesystem;
using pinchoff::base::existing;
using pinchoff::base::output_file;
using pinchoff::base::output_set;
using pinchoff::testing::scratch_dir;

namespace {

using pinchoff::testing::names_in;
using pinchoff::testing::put;
using pinchoff::testing::slurp;

void commit_one(const fs::path& target, const std::string& bytes, existing policy) {
  output_set set;
  output_file f = output_file::create(target, policy);
  f.write(bytes);
  set.add(std::move(f));
  set.commit();
}

}  // namespace

TEST_CASE("output names up to the filesystem's limit work: the temporary's name stays short") {
  // POSIX NAME_MAX is 255 bytes on Linux filesystems (ext4, tmpfs, xfs); a temporary named
  // after the target (".NAME.partial", 9 bytes more) failed for names over 246 bytes.
  scratch_dir dir;
  for (const std::size_t length : {1u, 200u, 242u, 246u, 247u, 250u, 255u}) {
    CAPTURE(length);
    const fs::path target = dir.path / std::string(length, 'n');
    output_file f = output_file::create(target, existing::refuse);
    CHECK(f.temporary().filename().string().size() <= 48);
    CHECK(f.temporary().parent_path() == dir.path);  // in the output's own folder
    f.write("x");
    output_set set;
    set.add(std::move(f));
    set.commit();
    CHECK(slurp(target) == "x");
    fs::remove(target);
  }
  CHECK(names_in(dir.path).empty());
}

TEST_CASE("a link planted at the temporary's name is never written through") {
  scratch_dir dir;
  const fs::path victim = dir.path / "victim.txt", target = dir.path / "plot.svg";
  put(victim, "keep me");
  // The name a writer used before: a fixed ".NAME.partial" beside the target.
  fs::create_symlink(victim, dir.path / ".plot.svg.partial");
  commit_one(target, "<svg/>", existing::replace);
  CHECK(slurp(victim) == "keep me");
  CHECK(slurp(target) == "<svg/>");
  CHECK(fs::is_symlink(dir.path / ".plot.svg.partial"));

  // The temporary's own name, swapped for a link while the output is written: the commit
  // refuses it, and neither the link nor its target is touched.
  output_file f = output_file::create(target, existing::replace);
  const fs::path temp = f.temporary();
  f.write("new");
  fs::remove(temp);
  fs::create_symlink(victim, temp);
  output_set set;
  set.add(std::move(f));
  CHECK_THROWS_AS(set.commit(), pinchoff::io_error);
  CHECK(slurp(victim) == "keep me");
  CHECK(slurp(target) == "<svg/>");
  CHECK(fs::is_symlink(temp));
}

TEST_CASE("a set of outputs is committed all or none") {
  scratch_dir dir;
  const fs::path a = dir.path / "a.wav", b = dir.path / "b.wav", old = dir.path / "old.svg";
  put(old, "old plot");
  {
    // b appears while the set is written (another program, another run): nothing is placed,
    // and the plot that was to be replaced is put back.
    output_set set;
    for (const fs::path& p : {a, b}) {
      output_file f = output_file::create(p, existing::refuse);
      f.write("new " + p.filename().string());
      set.add(std::move(f));
    }
    output_file f = output_file::create(old, existing::replace);
    f.write("new plot");
    set.add(std::move(f));
    put(b, "theirs");
    try {
      set.commit();
      FAIL("the commit placed a set holding a name that had appeared");
    } catch (const pinchoff::file_exists_error& e) {
      CHECK(std::string(e.what()).find("b.wav") != std::string::npos);
    }
    CHECK_FALSE(fs::exists(a));
    CHECK(slurp(b) == "theirs");
    CHECK(slurp(old) == "old plot");
  }
  CHECK(names_in(dir.path) == std::vector<std::string>{"b.wav", "old.svg"});  // no temporary left
  {
    // A replace that fails after a create: the created file is taken back again.
    fs::remove(b);
    fs::create_directory(dir.path / "sub");
    output_set set;
    output_file first = output_file::create(a, existing::refuse);
    first.write("1");
    set.add(std::move(first));
    output_file second = output_file::create(dir.path / "sub" / "x", existing::replace);
    second.write("2");
    set.add(std::move(second));
    fs::remove_all(dir.path / "sub");  // its folder vanishes before the commit
    fs::create_directory(dir.path / "sub");
    CHECK_THROWS_AS(set.commit(), pinchoff::io_error);
    CHECK_FALSE(fs::exists(a));
  }
  {
    output_set set;  // destroyed uncommitted: the temporaries go with it
    output_file f = output_file::create(a, existing::refuse);
    f.write("never");
    set.add(std::move(f));
  }
  CHECK(names_in(dir.path) == std::vector<std::string>{"old.svg", "sub"});
  {
    // A replace placed, then a later one fails: the first replaced file is put back.
    put(dir.path / "sub" / "y.svg", "old y");
    output_set set;
    output_file first = output_file::create(old, existing::replace);
    first.write("new plot");
    set.add(std::move(first));
    output_file second = output_file::create(dir.path / "sub" / "y.svg", existing::replace);
    second.write("new y");
    const fs::path temp = second.temporary();
    set.add(std::move(second));
    fs::remove(temp);  // another file where its temporary was: the second cannot be placed
    put(temp, "not ours");
    CHECK_THROWS_AS(set.commit(), pinchoff::io_error);
    CHECK(slurp(old) == "old plot");
    CHECK(slurp(dir.path / "sub" / "y.svg") == "old y");
    fs::remove(temp);
    fs::remove(dir.path / "sub" / "y.svg");
  }
  CHECK(names_in(dir.path) == std::vector<std::string>{"old.svg", "sub"});
  {
    // A folder made for the outputs goes again with them when they are not committed.
    output_set set;
    fs::create_directory(dir.path / "made");
    set.add_made_folder(dir.path / "made");
    output_file f = output_file::create(dir.path / "made" / "x.wav", existing::refuse);
    f.write("x");
    set.add(std::move(f));
  }
  CHECK(names_in(dir.path) == std::vector<std::string>{"old.svg", "sub"});
}

TEST_CASE("two writers of the same name at once: exactly one succeeds without replace") {
  // Create-or-fail must be one step (link(2) or rename without replace); a check followed
  // by a rename let both writers report success, the second replacing the first.
  scratch_dir dir;
  int both = 0, none = 0;
  constexpr int rounds = 100;
  for (int round = 0; round < rounds; ++round) {
    const fs::path target = dir.path / ("take-" + std::to_string(round) + ".wav");
    std::latch ready(2);
    std::atomic<int> won{0};
    std::string winner_text[2];
    auto writer = [&](int who) {
      output_file f = output_file::create(target, existing::refuse);
      f.write("writer " + std::to_string(who));
      f.finish();
      output_set set;
      set.add(std::move(f));
      ready.arrive_and_wait();  // both have made their temporaries; now both commit
      try {
        set.commit();
        winner_text[who] = "writer " + std::to_string(who);
        ++won;
      } catch (const pinchoff::file_exists_error&) {
      }
    };
    std::thread t0(writer, 0), t1(writer, 1);
    t0.join();
    t1.join();
    if (won == 2) ++both;
    if (won == 0) ++none;
    if (won == 1) CHECK(slurp(target) == winner_text[0] + winner_text[1]);
  }
  CAPTURE(rounds);
  CHECK(both == 0);
  CHECK(none == 0);
}

namespace {

// Makes a temporary of `target` in a child process that then dies by SIGKILL, as a run
// killed outright does; returns the name left behind.
std::string temporary_of_killed_run(const fs::path& target) {
  int fds[2];
  REQUIRE(::pipe(fds) == 0);
  const pid_t pid = ::fork();
  REQUIRE(pid >= 0);
  if (pid == 0) {
    ::close(fds[0]);
    try {
      output_file f = output_file::create(target, existing::refuse);
      const std::string name = f.temporary().filename().string() + "\n";
      (void)!::write(fds[1], name.data(), name.size());
      ::kill(::getpid(), SIGKILL);
    } catch (...) {
    }
    ::_exit(1);
  }
  ::close(fds[1]);
  std::string name;
  char c = 0;
  while (::read(fds[0], &c, 1) == 1 && c != '\n') name.push_back(c);
  ::close(fds[0]);
  int status = 0;
  ::waitpid(pid, &status, 0);
  CHECK(WIFSIGNALED(status));
  return name;
}

}  // namespace

TEST_CASE("stale temporaries of a killed run are removed by the next run, a live run's never") {
  scratch_dir dir;
  const fs::path target = dir.path / "out.wav";
  const std::string left = temporary_of_killed_run(target);
  REQUIRE_FALSE(left.empty());
  REQUIRE(fs::exists(dir.path / left));  // SIGKILL leaves it

  // A live run's temporary of the same target (this process's own, kept open).
  output_file live = output_file::create(target, existing::refuse);
  CHECK_FALSE(fs::exists(dir.path / left));  // the dead run's is gone
  CHECK(fs::exists(live.temporary()));
  // Another target's stale temporary is not this run's business.
  const std::string other = temporary_of_killed_run(dir.path / "other.wav");
  output_file again = output_file::create(target, existing::refuse);
  CHECK(fs::exists(live.temporary()));  // still there: its process lives
  CHECK(fs::exists(dir.path / other));
  CHECK(pinchoff::base::remove_stale_temporaries(dir.path / "other.wav") == 1);

  // One made on another machine (another tag) is judged by its age alone: a day.
  const std::string prefix = pinchoff::base::temporary_prefix(target);
  // a tag that is not ours, in hex
  std::string tag = live.temporary().filename().string().substr(prefix.size(), 4);
  tag[0] = tag[0] == 'f' ? '0' : 'f';
  const fs::path far = dir.path / (prefix + tag + "-1-00000000.part");
  put(far, "x");
  CHECK(pinchoff::base::remove_stale_temporaries(target) == 0);  // new: may be a live run elsewhere
  fs::last_write_time(far, fs::file_time_type::clock::now() - std::chrono::hours(25));
  CHECK(pinchoff::base::remove_stale_temporaries(target) == 1);
  CHECK_FALSE(fs::exists(far));

  // Another user's stale temporary is left to its owner.
  const std::string theirs = temporary_of_killed_run(target);
  if (::geteuid() == 0) {
    REQUIRE(::chown((dir.path / theirs).c_str(), 65534, 65534) == 0);
    CHECK(pinchoff::base::remove_stale_temporaries(target) == 0);
    CHECK(fs::exists(dir.path / theirs));
  } else {
    MESSAGE("the other-owner half needs root to give a file away");
  }
}

TEST_CASE("a scratch file leaves no name behind") {
  scratch_dir dir;
  const int fd = pinchoff::base::create_scratch_file(dir.path / "out.wav");
  REQUIRE(fd >= 0);
  CHECK(::write(fd, "abc", 3) == 3);
  CHECK(names_in(dir.path).empty());  // unlinked at once: a SIGKILL leaves nothing
  ::close(fd);
}

TEST_CASE("the writer refuses what it cannot write, naming the target") {
  scratch_dir dir;
  struct row {
    const char* given;
    fs::path target;
    existing policy;
    const char* words;
  };
  fs::create_directory(dir.path / "folder");
  put(dir.path / "taken.wav", "x");
  const row rows[] = {
      {"a missing folder", dir.path / "nofolder" / "o.wav", existing::replace, "does not exist"},
      {"a folder", dir.path / "folder", existing::replace, "it is a folder"},
      {"'..'", dir.path / "folder" / "..", existing::replace, "it is a folder"},
      {"an existing file without replace", dir.path / "taken.wav", existing::refuse, "the file exists"},
  };
  for (const row& r : rows) {
    CAPTURE(std::string(r.given));
    try {
      output_file::create(r.target, r.policy);
      FAIL("accepted");
    } catch (const pinchoff::io_error& e) {
      CHECK(std::string(e.what()).find(r.words) != std::string::npos);
      CHECK(std::string(e.what()).find(r.target.string()) != std::string::npos);
    }
  }
}

namespace {
// What the SIGTERM handler below saw: signals, and signals that found half the set in place.
constexpr int held_files = 400;  // the handler looks for f000.txt and f399.txt
std::atomic<int> seen_partial{0}, seen_signals{0};
int held_dir = -1;
void count_placed(int) {
  // The set is placed in the order it was made: half a set has its first file and not its last.
  struct stat st {};
  const bool first = ::fstatat(held_dir, "f000.txt", &st, AT_SYMLINK_NOFOLLOW) == 0;
  const bool last = ::fstatat(held_dir, "f399.txt", &st, AT_SYMLINK_NOFOLLOW) == 0;
  if (first != last) seen_partial.fetch_add(1);
  seen_signals.fetch_add(1);
}
}  // namespace

TEST_CASE("a stop signal during a commit waits until the set is whole") {
  // Ctrl-C or SIGTERM between two placements would leave half a set; the commit holds them
  // (pending) until the set is placed, and gives back the signal mask it found.
  scratch_dir dir;
  held_dir = ::open(dir.path.c_str(), O_RDONLY | O_DIRECTORY);
  REQUIRE(held_dir >= 0);
  struct sigaction act {}, old {};
  act.sa_handler = count_placed;
  sigemptyset(&act.sa_mask);
  REQUIRE(::sigaction(SIGTERM, &act, &old) == 0);
  sigset_t before, after;
  ::pthread_sigmask(SIG_SETMASK, nullptr, &before);

  output_set set;
  for (int i = 0; i < held_files; ++i) {
    char name[32];
    std::snprintf(name, sizeof name, "f%03d.txt", i);
    output_file f = output_file::create(dir.path / name, existing::refuse);
    f.write("x");
    set.add(std::move(f));
  }
  const pthread_t main_thread = ::pthread_self();
  std::atomic<bool> stop{false};
  std::thread sender([&] {
    while (!stop.load()) {
      ::pthread_kill(main_thread, SIGTERM);
      std::this_thread::sleep_for(std::chrono::microseconds(20));
    }
  });
  set.commit();
  stop = true;
  sender.join();
  ::pthread_sigmask(SIG_SETMASK, nullptr, &after);
  ::sigaction(SIGTERM, &old, nullptr);
  ::close(held_dir);
  CHECK(seen_signals.load() > 0);
  CHECK(seen_partial.load() == 0);
  CHECK(sigismember(&after, SIGTERM) == sigismember(&before, SIGTERM));
  CHECK(sigismember(&after, SIGINT) == sigismember(&before, SIGINT));
  CHECK(names_in(dir.path).size() == static_cast<std::size_t>(held_files));
}

}  // namespace test_output_file
