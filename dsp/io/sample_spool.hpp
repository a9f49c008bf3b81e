#pragma once
// A temporary file of samples for a job that needs two passes over a long signal (a
// render that is normalised needs the peak before it writes the file): written once from
// the start, then read back from the start. Memory stays flat whatever the length.
//
// The file is made in the target's folder by the program's one writer
// (base::create_scratch_file: a short hidden name, O_EXCL and O_NOFOLLOW, so it is ours
// alone) and unlinked at once: only its descriptor holds it, so nothing of it is left
// however the job ends, even when the process is killed. Values are stored as 32-bit IEEE float in the machine's byte
// order (24 significant bits: a relative error of at most 2^-24, -144 dB, on each value).
// Move-only; throws io_error naming the target when the file cannot be made, written or
// read (a full disk).
#include <cstdint>
#include <filesystem>
#include <span>
#include <vector>

namespace pinchoff::dsp {

class sample_spool {
 public:
  /// Creates the spool beside `target` (in its folder, which must exist).
  static sample_spool create(const std::filesystem::path& target);

  sample_spool(sample_spool&&) noexcept;
  sample_spool& operator=(sample_spool&&) noexcept;
  ~sample_spool();

  /// Appends values (finite; they are rounded to float).
  void write(std::span<const double> values);
  /// Ends writing; reading starts from the first value.
  void rewind();
  /// Reads up to values.size() values; returns how many (0 at the end).
  std::size_t read(std::span<double> values);

  std::int64_t size() const noexcept { return written_; }

 private:
  sample_spool() = default;
  void remove() noexcept;
  int fd_{-1};
  std::filesystem::path target_;
  std::vector<float> buffer_;
  std::int64_t written_{0}, read_{0};
};

}  // namespace pinchoff::dsp
