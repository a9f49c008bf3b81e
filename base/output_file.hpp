#pragma once
// The one writer for every file the program writes (audio, plots, the render's spools).
//
// An output is written to a temporary file in the target's own folder and becomes visible
// only when the set it belongs to is committed (output_set::commit), all of the set or none
// of it. The temporary:
// - has a short hidden name, ".po-HHHHHHHH-TTTT-PID-RRRRRRRR.part", whatever the target's
//   name (H: a hash of the target's name, T: this machine and process namespace, PID: the
//   process writing it, R: random), so that any name the filesystem takes as a target works
//   (NAME_MAX 255 bytes), and a run killed outright leaves a file the next run can tell as
//   stale;
// - is created with O_CREAT | O_EXCL | O_NOFOLLOW | O_CLOEXEC, relative to the folder opened
//   once: it is new, ours alone, and never reached through a link planted at its name;
// - is removed when the output_file is destroyed without being committed (an exception, an
//   interrupt), and, after a run that was killed (SIGKILL, a power cut), by the next run
//   writing the same target: a temporary of that target owned by the same user is removed
//   when the process that made it is gone (same machine and process namespace), or when it
//   is older than a day (made elsewhere). A live run's temporary is never touched.
//
// Committing a target that must not exist (existing::refuse) is create-or-fail in one step:
// link(2) of the temporary to the target name, which fails when the name exists, so of two
// runs writing the same name at once exactly one succeeds. Filesystems without hard links
// get renameat2(RENAME_NOREPLACE) instead, and only where that is missing too, a check and a
// rename. existing::replace renames over the target, keeping a link to the old file until
// the whole set is in place, so that a failure later in the set puts it back.
//
// Errors throw io_error naming the target (file_exists_error when it exists and may not be
// replaced).
#include <cstdint>
#include <filesystem>
#include <memory>
#include <string>
#include <string_view>
#include <vector>

namespace pinchoff::base {

enum class existing {
  refuse,   ///< the target must not exist when it is committed (create-or-fail)
  replace,  ///< an existing target is replaced
};

class output_file {
 public:
  /// Creates the temporary for `target` in its folder (which must exist), after removing
  /// stale temporaries of the same target (see above). Throws io_error when the folder is
  /// missing, `target` is a folder or names none (".", ".."), or the temporary cannot be
  /// made; file_exists_error when policy is refuse and the target exists already (checked
  /// again, atomically, at commit).
  static output_file create(const std::filesystem::path& target, existing policy);

  output_file(output_file&&) noexcept;
  output_file& operator=(output_file&&) noexcept;
  ~output_file();  ///< removes the temporary unless committed

  /// The temporary's descriptor (read-write), for libraries that write by descriptor.
  int fd() const noexcept { return fd_; }
  /// Appends bytes; throws io_error naming the target when the write fails (a full disk).
  void write(std::string_view bytes);
  /// Flushes the temporary to the disk and closes it; commit() does it when not done.
  void finish();

  const std::filesystem::path& target() const noexcept { return target_; }
  const std::filesystem::path& temporary() const noexcept { return temp_; }
  existing policy() const noexcept { return policy_; }
  bool committed() const noexcept { return placed_; }

 private:
  friend class output_set;
  output_file() = default;
  void discard() noexcept;
  int dir_{-1}, fd_{-1};
  std::filesystem::path target_, temp_;
  std::string name_, temp_name_, backup_name_;  // in dir_
  existing policy_{existing::refuse};
  bool finished_{false}, placed_{false};
  std::uint64_t dev_{0}, ino_{0};  // the temporary's identity, to take back only our own file
};

/// Outputs committed together: all of them or none.
class output_set {
 public:
  output_set() = default;
  output_set(output_set&&) noexcept = default;
  output_set& operator=(output_set&&) noexcept = default;
  /// Uncommitted files are removed, then the folders made for them if left empty.
  ~output_set();

  void add(output_file file);
  /// A folder made for outputs of this set: removed again, when empty, if the set is not
  /// committed.
  void add_made_folder(std::filesystem::path folder);
  bool empty() const noexcept { return files_.empty(); }
  std::size_t size() const noexcept { return files_.size(); }
  /// The targets, in the order added.
  std::vector<std::filesystem::path> targets() const;

  /// Finishes every file, then places each (those that must not exist first). When one
  /// fails, the ones already placed are taken back (a replaced file is put back) and the
  /// error is thrown; the set is then empty. On success the set is empty too.
  void commit();

 private:
  void remove_made_folders() noexcept;
  std::vector<output_file> files_;
  std::vector<std::filesystem::path> folders_;
};

/// A scratch file beside `target` (a spool for a two-pass job): made as output_file makes
/// its temporary (with the suffix ".spool", mode 0600) and unlinked at once, so that
/// nothing of it outlives the process however it ends. Returns its read-write descriptor,
/// which the caller closes. Throws io_error naming the target.
int create_scratch_file(const std::filesystem::path& target);

/// The start of every hidden name made for `target` (".po-HHHHHHHH-"): tests and the
/// stale-file cleanup find them by it.
std::string temporary_prefix(const std::filesystem::path& target);

/// Removes the stale temporaries and scratch files of `target` (see the file comment);
/// returns how many were removed. output_file::create and create_scratch_file call it.
std::size_t remove_stale_temporaries(const std::filesystem::path& target);

}  // namespace pinchoff::base
