#include "base/output_file.hpp"

#include <dirent.h>
#include <fcntl.h>
#include <signal.h>
#include <stdio.h>
#include <sys/stat.h>
#include <unistd.h>

#include <algorithm>
#include <cerrno>
#include <cstdio>
#include <cstring>
#include <ctime>
#include <random>
#include <utility>

#include "base/error.hpp"

namespace pinchoff::base {
namespace fs = std::filesystem;

namespace {

constexpr std::time_t foreign_stale_seconds = 24 * 60 * 60;

std::uint32_t fnv1a(std::string_view bytes) {
  std::uint32_t h = 2166136261u;  // FNV-1a, 32 bits (Fowler, Noll, Vo)
  for (unsigned char c : bytes) h = (h ^ c) * 16777619u;
  return h;
}

// This machine and process namespace: a process id means the same process only where both
// agree, so only there may a temporary be judged by its maker's pid.
unsigned instance_tag() {
  static const unsigned tag = [] {
    std::string who;
    char host[256] = {};
    if (::gethostname(host, sizeof host - 1) == 0) who = host;
    char ns[128] = {};
    const ssize_t n = ::readlink("/proc/self/ns/pid", ns, sizeof ns - 1);
    if (n > 0) who.append("|").append(ns, static_cast<std::size_t>(n));
    return static_cast<unsigned>(fnv1a(who) & 0xffffu);
  }();
  return tag;
}

std::string hex(std::uint32_t v, int digits) {
  char buf[16];
  std::snprintf(buf, sizeof buf, "%0*x", digits, v);
  return buf;
}

std::string message(const fs::path& target, const std::string& why) { return "cannot write " + quoted_path(target) + ": " + why; }

[[noreturn]] void fail(const fs::path& target, int err) { throw io_error(message(target, std::strerror(err))); }

// The folder of `target`, opened once: every name below is taken relative to it, so the
// folder cannot be swapped between the checks and the writes.
int open_folder(const fs::path& target) {
  const fs::path folder = target.has_parent_path() ? target.parent_path() : fs::path(".");
  const int dir = ::open(folder.c_str(), O_RDONLY | O_DIRECTORY | O_CLOEXEC);
  if (dir >= 0) return dir;
  const int e = errno;
  if (e == ENOENT) throw io_error(message(target, "the folder " + quoted_path(folder) + " does not exist"));
  if (e == ENOTDIR) throw io_error(message(target, quoted_path(folder) + " is not a folder"));
  fail(target, e);
}

std::string leaf_name(const fs::path& target) {
  if (target.empty()) throw io_error("no output file given");
  const std::string name = target.filename().string();
  if (name.empty() || name == "." || name == "..") throw io_error(message(target, "it is a folder"));
  return name;
}

// Makes a new file in `dir` named prefix + tag-pid-random + suffix; returns its descriptor.
int create_exclusive(int dir, const fs::path& target, const std::string& prefix, const char* suffix, mode_t mode,
                     std::string& made) {
  std::random_device rd;
  const std::string head = prefix + hex(instance_tag(), 4) + "-" + std::to_string(::getpid()) + "-";
  for (int attempt = 0; attempt < 32; ++attempt) {
    made = head + hex(static_cast<std::uint32_t>(rd()), 8) + suffix;
    const int fd = ::openat(dir, made.c_str(), O_RDWR | O_CREAT | O_EXCL | O_NOFOLLOW | O_CLOEXEC, mode);
    if (fd >= 0) return fd;
    if (errno != EEXIST) {
      const int e = errno;
      made.clear();
      fail(target, e);
    }
  }
  made.clear();
  throw io_error(message(target, "no free temporary name in its folder"));
}

// Reads ".po-HHHHHHHH-TTTT-PID-RRRRRRRR.SUFFIX" after the prefix: the tag and the pid.
bool parse_rest(std::string_view rest, unsigned& tag, long& pid) {
  // TTTT-PID-RRRRRRRR.suffix
  if (rest.size() < 4 + 1 + 1 + 1 + 8 + 1) return false;
  const auto is_hex = [](char c) { return (c >= '0' && c <= '9') || (c >= 'a' && c <= 'f'); };
  if (!std::all_of(rest.begin(), rest.begin() + 4, is_hex) || rest[4] != '-') return false;
  tag = static_cast<unsigned>(std::stoul(std::string(rest.substr(0, 4)), nullptr, 16));
  rest.remove_prefix(5);
  std::size_t i = 0;
  while (i < rest.size() && i < 10 && rest[i] >= '0' && rest[i] <= '9') ++i;
  if (i == 0 || i >= rest.size() || rest[i] != '-') return false;
  pid = std::stol(std::string(rest.substr(0, i)));
  rest.remove_prefix(i + 1);
  if (rest.size() < 9 || !std::all_of(rest.begin(), rest.begin() + 8, is_hex) || rest[8] != '.') return false;
  const std::string_view suffix = rest.substr(9);
  return suffix == "part" || suffix == "spool" || suffix == "keep";
}

std::size_t remove_stale_in(int dir, const std::string& prefix) {
  const int copy = ::dup(dir);
  if (copy < 0) return 0;
  DIR* d = ::fdopendir(copy);
  if (!d) {
    ::close(copy);
    return 0;
  }
  std::vector<std::string> stale;
  const std::time_t now = std::time(nullptr);
  while (const dirent* e = ::readdir(d)) {
    const std::string_view name(e->d_name);
    if (name.substr(0, prefix.size()) != prefix) continue;
    unsigned tag = 0;
    long pid = 0;
    if (!parse_rest(name.substr(prefix.size()), tag, pid)) continue;
    struct stat st {};
    if (::fstatat(dir, e->d_name, &st, AT_SYMLINK_NOFOLLOW) != 0 || !S_ISREG(st.st_mode) || st.st_uid != ::geteuid())
      continue;
    bool gone = false;
    if (tag == instance_tag())
      gone = pid > 0 && pid != ::getpid() && ::kill(static_cast<pid_t>(pid), 0) != 0 && errno == ESRCH;
    else
      gone = now - st.st_mtime > foreign_stale_seconds;
    if (gone) stale.emplace_back(name);
  }
  ::closedir(d);
  std::size_t removed = 0;
  for (const std::string& s : stale)
    if (::unlinkat(dir, s.c_str(), 0) == 0) ++removed;
  return removed;
}

bool entry_exists(int dir, const std::string& name) {
  struct stat st {};
  return ::fstatat(dir, name.c_str(), &st, AT_SYMLINK_NOFOLLOW) == 0;
}

}  // namespace

std::string temporary_prefix(const fs::path& target) {
  return ".po-" + hex(fnv1a(target.filename().string()), 8) + "-";
}

std::size_t remove_stale_temporaries(const fs::path& target) {
  const int dir = open_folder(target);
  const std::size_t n = remove_stale_in(dir, temporary_prefix(target));
  ::close(dir);
  return n;
}

int create_scratch_file(const fs::path& target) {
  leaf_name(target);
  const int dir = open_folder(target);
  const std::string prefix = temporary_prefix(target);
  remove_stale_in(dir, prefix);
  std::string made;
  int fd = -1;
  try {
    fd = create_exclusive(dir, target, prefix, ".spool", 0600, made);
  } catch (...) {
    ::close(dir);
    throw;
  }
  ::unlinkat(dir, made.c_str(), 0);
  ::close(dir);
  return fd;
}

output_file output_file::create(const fs::path& target, existing policy) {
  const std::string name = leaf_name(target);
  output_file f;
  f.target_ = target;
  f.name_ = name;
  f.policy_ = policy;
  f.dir_ = open_folder(target);
  struct stat st {};
  if (::fstatat(f.dir_, name.c_str(), &st, 0) == 0 && S_ISDIR(st.st_mode)) throw io_error(message(target, "it is a folder"));
  if (policy == existing::refuse && entry_exists(f.dir_, name)) throw file_exists_error(message(target, "the file exists"));
  const std::string prefix = temporary_prefix(target);
  remove_stale_in(f.dir_, prefix);
  f.fd_ = create_exclusive(f.dir_, target, prefix, ".part", 0666, f.temp_name_);
  f.temp_ = (target.has_parent_path() ? target.parent_path() : fs::path(".")) / f.temp_name_;
  if (::fstat(f.fd_, &st) == 0) {
    f.dev_ = static_cast<std::uint64_t>(st.st_dev);
    f.ino_ = static_cast<std::uint64_t>(st.st_ino);
  }
  return f;
}

output_file::output_file(output_file&& o) noexcept
    : dir_(std::exchange(o.dir_, -1)),
      fd_(std::exchange(o.fd_, -1)),
      target_(std::move(o.target_)),
      temp_(std::move(o.temp_)),
      name_(std::move(o.name_)),
      temp_name_(std::exchange(o.temp_name_, {})),
      backup_name_(std::exchange(o.backup_name_, {})),
      policy_(o.policy_),
      finished_(o.finished_),
      placed_(o.placed_),
      dev_(o.dev_),
      ino_(o.ino_) {}

output_file& output_file::operator=(output_file&& o) noexcept {
  if (this != &o) {
    discard();
    dir_ = std::exchange(o.dir_, -1);
    fd_ = std::exchange(o.fd_, -1);
    target_ = std::move(o.target_);
    temp_ = std::move(o.temp_);
    name_ = std::move(o.name_);
    temp_name_ = std::exchange(o.temp_name_, {});
    backup_name_ = std::exchange(o.backup_name_, {});
    policy_ = o.policy_;
    finished_ = o.finished_;
    placed_ = o.placed_;
    dev_ = o.dev_;
    ino_ = o.ino_;
  }
  return *this;
}

output_file::~output_file() { discard(); }

void output_file::discard() noexcept {
  if (fd_ >= 0) ::close(fd_);
  fd_ = -1;
  if (dir_ >= 0) {
    if (!temp_name_.empty()) ::unlinkat(dir_, temp_name_.c_str(), 0);
    if (!backup_name_.empty()) ::unlinkat(dir_, backup_name_.c_str(), 0);
    ::close(dir_);
  }
  temp_name_.clear();
  backup_name_.clear();
  dir_ = -1;
}

void output_file::write(std::string_view bytes) {
  if (fd_ < 0 || finished_) throw internal_error("write to a finished output " + quoted_path(target_));
  while (!bytes.empty()) {
    const ssize_t w = ::write(fd_, bytes.data(), bytes.size());
    if (w < 0 && errno == EINTR) continue;
    if (w <= 0) {
      const int e = w < 0 ? errno : EIO;
      discard();
      fail(target_, e);
    }
    bytes.remove_prefix(static_cast<std::size_t>(w));
  }
}

void output_file::finish() {
  if (finished_) return;
  if (fd_ < 0) throw internal_error("finish of a failed output " + quoted_path(target_));
  const int synced = ::fsync(fd_);
  const int e1 = errno;
  const int closed = ::close(fd_);
  const int e2 = errno;
  fd_ = -1;
  if (synced != 0 || closed != 0) {
    discard();
    fail(target_, synced != 0 ? e1 : e2);
  }
  finished_ = true;
}

// ---- The set

void output_set::add(output_file file) { files_.push_back(std::move(file)); }

void output_set::add_made_folder(fs::path folder) { folders_.push_back(std::move(folder)); }

output_set::~output_set() {
  files_.clear();
  remove_made_folders();
}

void output_set::remove_made_folders() noexcept {
  for (auto it = folders_.rbegin(); it != folders_.rend(); ++it) ::rmdir(it->c_str());  // only when empty
  folders_.clear();
}

std::vector<fs::path> output_set::targets() const {
  std::vector<fs::path> t;
  for (const output_file& f : files_) t.push_back(f.target_);
  return t;
}

namespace {

bool no_hard_links(int e) { return e == EPERM || e == EOPNOTSUPP || e == ENOSYS || e == EMLINK || e == EXDEV; }

// Create-or-fail: the name appears holding the whole file, or the call fails because the
// name exists. Returns 0 or the errno.
int place_new(int dir, const std::string& temp, const std::string& name, bool& temp_left) {
  temp_left = true;
  if (::linkat(dir, temp.c_str(), dir, name.c_str(), 0) == 0) return 0;
  int e = errno;
  if (!no_hard_links(e)) return e;
  if (::renameat2(dir, temp.c_str(), dir, name.c_str(), RENAME_NOREPLACE) == 0) {
    temp_left = false;
    return 0;
  }
  e = errno;
  if (e != EINVAL && e != ENOSYS && e != EOPNOTSUPP) return e;
  // Neither hard links nor an exclusive rename (some network and FAT filesystems): the
  // best left is a check just before the rename.
  if (entry_exists(dir, name)) return EEXIST;
  if (::renameat(dir, temp.c_str(), dir, name.c_str()) != 0) return errno;
  temp_left = false;
  return 0;
}

}  // namespace

namespace {
// While a set is being placed, the signals that stop a run wait (they stay pending and act
// once the set is whole, or once it is taken back), so an interrupt never leaves half a set.
class stop_signals_held {
 public:
  stop_signals_held() {
    sigset_t hold;
    sigemptyset(&hold);
    for (int s : {SIGINT, SIGTERM, SIGHUP, SIGQUIT}) sigaddset(&hold, s);
    held_ = ::pthread_sigmask(SIG_BLOCK, &hold, &previous_) == 0;
  }
  ~stop_signals_held() {
    if (held_) ::pthread_sigmask(SIG_SETMASK, &previous_, nullptr);
  }
  stop_signals_held(const stop_signals_held&) = delete;
  stop_signals_held& operator=(const stop_signals_held&) = delete;

 private:
  sigset_t previous_{};
  bool held_{false};
};
}  // namespace

void output_set::commit() {
  const stop_signals_held hold;
  std::vector<output_file> files = std::move(files_);
  files_.clear();
  for (output_file& f : files) f.finish();
  std::vector<std::size_t> order(files.size());
  for (std::size_t i = 0; i < order.size(); ++i) order[i] = i;
  std::stable_partition(order.begin(), order.end(), [&](std::size_t i) { return files[i].policy_ == existing::refuse; });
  std::vector<std::size_t> placed;
  try {
    for (std::size_t i : order) {
      output_file& f = files[i];
      // The temporary must still be the file written: a link or another file put at its
      // name meanwhile is never placed.
      struct stat st {};
      if (::fstatat(f.dir_, f.temp_name_.c_str(), &st, AT_SYMLINK_NOFOLLOW) != 0 || !S_ISREG(st.st_mode) ||
          static_cast<std::uint64_t>(st.st_dev) != f.dev_ || static_cast<std::uint64_t>(st.st_ino) != f.ino_) {
        f.temp_name_.clear();  // not ours: left alone
        throw io_error(message(f.target_, "its temporary file " + quoted_path(f.temp_) + " was replaced while writing"));
      }
      if (f.policy_ == existing::refuse) {
        bool temp_left = true;
        const int e = place_new(f.dir_, f.temp_name_, f.name_, temp_left);
        if (e == EEXIST) throw file_exists_error(message(f.target_, "the file exists (it appeared while this run was writing)"));
        if (e != 0) fail(f.target_, e);
        if (!temp_left) f.temp_name_.clear();
      } else {
        if (entry_exists(f.dir_, f.name_)) {
          f.backup_name_ = f.temp_name_.substr(0, f.temp_name_.size() - 4) + "keep";
          if (::linkat(f.dir_, f.name_.c_str(), f.dir_, f.backup_name_.c_str(), 0) != 0)  // 0: a link itself is kept
            f.backup_name_.clear();  // no hard links: the old file cannot be kept to put back
        }
        if (::renameat(f.dir_, f.temp_name_.c_str(), f.dir_, f.name_.c_str()) != 0) fail(f.target_, errno);
        f.temp_name_.clear();
      }
      f.placed_ = true;
      placed.push_back(i);
    }
  } catch (...) {
    // Take back what was placed, newest first: a replaced file is put back, a new one
    // removed if the name still holds our file.
    for (auto it = placed.rbegin(); it != placed.rend(); ++it) {
      output_file& f = files[*it];
      if (!f.backup_name_.empty()) {
        if (::renameat(f.dir_, f.backup_name_.c_str(), f.dir_, f.name_.c_str()) == 0) f.backup_name_.clear();
      } else {
        struct stat st {};
        if (::fstatat(f.dir_, f.name_.c_str(), &st, AT_SYMLINK_NOFOLLOW) == 0 &&
            static_cast<std::uint64_t>(st.st_dev) == f.dev_ && static_cast<std::uint64_t>(st.st_ino) == f.ino_)
          ::unlinkat(f.dir_, f.name_.c_str(), 0);
      }
      f.placed_ = false;
    }
    files.clear();
    remove_made_folders();
    throw;
  }
  folders_.clear();
  for (output_file& f : files) {
    if (!f.temp_name_.empty()) ::unlinkat(f.dir_, f.temp_name_.c_str(), 0);
    f.temp_name_.clear();
    if (!f.backup_name_.empty()) ::unlinkat(f.dir_, f.backup_name_.c_str(), 0);
    f.backup_name_.clear();
    ::fsync(f.dir_);  // the new names themselves reach the disk
  }
}

}  // namespace pinchoff::base
