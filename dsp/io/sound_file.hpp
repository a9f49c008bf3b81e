#pragma once
// Audio files through libsndfile, as move-only owners that throw on open (as every C
// resource here; libsndfile's own SndfileHandle reads as true even after a failed open).
//
// Reading: any container and encoding libsndfile reads (WAV 16/24/32-bit integer and
// float, FLAC, AIFF, ...). Samples come back as double, interleaved (frame by frame, the
// channels of one frame side by side). Integer encodings are scaled so that full scale is
// [-1, 1): a 16-bit code c reads c / 32768, a 24-bit code c / 2^23 (libsndfile's
// normalisation). Float encodings come back as stored, without any scaling or clipping;
// a NaN or infinite sample in them is refused (input_error naming the frame, the time in
// seconds and the channel, counted from 1).
// A file whose header promises more audio than it holds is refused as truncated.
//
// Writing: WAV 16-bit, WAV 24-bit, WAV 32-bit float and FLAC 24-bit, through the program's
// one output writer (base/output_file.hpp): the samples go to a temporary file in the
// target's folder, created with the user's umask, that becomes the target only when
// committed (alone by commit(), or with other outputs, all or none, by finish() and a
// base::output_set); a writer destroyed before that removes the temporary, so a failure or
// an interrupted run leaves no half-written file. Integer encodings are
// quantised here, not by libsndfile: code = round(x * 2^(bits-1)), clipped to
// [-2^(bits-1), 2^(bits-1) - 1], so that reading back returns x within half a step
// (1/65536 for 16-bit, 1/2^24 for 24-bit) when |x| < 1. Clipped samples are counted.
// With `tpdf_dither` set, triangular dither of +-1 step (the sum of two independent uniform
// values of +-1/2 step) is added before rounding: the error is then signal-independent
// noise of power step^2/4 instead of distortion (Lipshitz, Wannamaker & Vanderkooy,
// "Quantization and dither: a theoretical survey", JAES 40(5), 1992), at most 1.5 steps.
// The dither sequence is deterministic (seeded), so the same call writes the same file.
// An exact zero is written as code 0 without dither: digital silence (a channel the caller
// writes as zeros) stays silent.
// Float files store the values exactly as float (rounding to 24 significant bits) and
// are never clipped. A non-finite sample given to write() is a caller bug (internal_error).
//
// Errors: files that cannot be opened, read or written throw io_error naming the path;
// arguments out of range throw input_error.
#include <cstddef>
#include <cstdint>
#include <filesystem>
#include <memory>
#include <optional>
#include <span>
#include <string>
#include <string_view>
#include <vector>

#include "base/output_file.hpp"

typedef struct sf_private_tag SNDFILE;  // libsndfile's opaque handle (sndfile.h)

namespace pinchoff::dsp {

/// What a file holds, as read from its header.
struct sound_info {
  double rate_hz{};
  int channels{};
  std::int64_t frames{};
  int sf_format{};              ///< libsndfile's SF_FORMAT_* bits (container | encoding)
  std::string format_text;      ///< e.g. "WAV, 24-bit integer", "FLAC, 16-bit integer"
  bool is_float{false};         ///< float or double encoding: values are not bounded by full scale
  double seconds() const noexcept { return rate_hz > 0 ? static_cast<double>(frames) / rate_hz : 0.0; }
};

/// The encodings we write.
enum class sample_format {
  wav16,      ///< WAV, 16-bit integer PCM
  wav24,      ///< WAV, 24-bit integer PCM
  wav_float,  ///< WAV, 32-bit IEEE float
  flac24,     ///< FLAC, 24-bit
};

/// "wav16", "wav24", "float", "flac": the spellings the command line takes.
std::string_view sample_format_name(sample_format f) noexcept;
/// Inverse of sample_format_name; throws input_error listing the choices.
sample_format parse_sample_format(std::string_view text);
/// The write format nearest to what a file holds: 16-bit and narrower integers -> wav16
/// (flac24 when the file is FLAC), 24-bit -> wav24 (flac24), anything wider or float -> float.
sample_format nearest_sample_format(const sound_info& info) noexcept;
/// Bits per sample of an integer format (16 or 24), 0 for float.
int quantisation_bits(sample_format f) noexcept;

class sound_reader {
 public:
  /// Opens a file for reading. Throws io_error("cannot open 'PATH': REASON") when it is
  /// missing, not audio, unsupported or truncated.
  static sound_reader open(const std::filesystem::path& path);
  /// Opens an in-memory file through libsndfile's virtual I/O. `bytes` must outlive the
  /// reader; `name` stands for the path in messages.
  static sound_reader open_memory(std::span<const std::byte> bytes, std::string name);

  sound_reader(sound_reader&&) noexcept;
  sound_reader& operator=(sound_reader&&) noexcept;
  ~sound_reader();

  const sound_info& info() const noexcept { return info_; }
  const std::string& name() const noexcept { return name_; }

  /// Reads up to `interleaved.size() / channels` frames into `interleaved`; returns the
  /// number of frames read (0 at the end). Throws io_error when the file ends early or a
  /// decode fails, input_error on a non-finite sample in a float file.
  std::size_t read(std::span<double> interleaved);
  /// Moves to `frame` (0 .. frames). Throws io_error when the file cannot seek.
  void seek(std::int64_t frame);
  /// Frames read or skipped so far.
  std::int64_t position() const noexcept { return position_; }

 private:
  struct memory_source;
  sound_reader() = default;
  void close() noexcept;
  SNDFILE* file_{nullptr};
  std::unique_ptr<memory_source> memory_;  // stable address for the virtual I/O callbacks
  sound_info info_;
  std::string name_;
  std::int64_t position_{0};
};

/// Throws io_error naming `path` when it is not a regular file (a pipe, a terminal, a
/// device): for readers that open their input more than once or seek in it; `why` says
/// what needs that, e.g. "render reads its input twice".
void require_seekable_file(const std::filesystem::path& path, std::string_view why);

/// One channel (counted from 0) of an interleaved block.
std::vector<double> channel_of(std::span<const double> interleaved, int channels, int channel);
/// Every channel of an interleaved block: result[channel][frame].
std::vector<std::vector<double>> deinterleave(std::span<const double> interleaved, int channels);
/// Reads `frames` frames from the reader's position (all that remain when frames < 0) and
/// returns one channel of them (counted from 0). Throws input_error when channel is out of range.
std::vector<double> read_channel(sound_reader& reader, int channel, std::int64_t frames = -1);

struct write_settings {
  double rate_hz{48000.0};                     ///< whole hertz, 1 .. 768000
  int channels{1};                             ///< 1 .. 64
  sample_format format{sample_format::wav24};
  bool tpdf_dither{false};                     ///< integer formats only; see above
  std::uint64_t dither_seed{1};
  bool overwrite{false};                       ///< replace an existing file
  std::vector<std::filesystem::path> inputs;   ///< files the output must never be
};

class sound_writer {
 public:
  /// Creates the temporary file beside `path`. Throws io_error when the folder is missing
  /// or not writable, when it is a folder, or
  /// when it is one of `settings.inputs` (compared as files, so links and relative paths
  /// are seen through); file_exists_error (an io_error) when `path` exists and overwrite is
  /// not set; input_error when the rate or channels are out of range.
  static sound_writer create(const std::filesystem::path& path, const write_settings& settings);

  sound_writer(sound_writer&&) noexcept;
  sound_writer& operator=(sound_writer&&) noexcept;
  /// Removes the temporary file unless commit() succeeded.
  ~sound_writer();

  /// Appends interleaved frames (size a multiple of channels). Throws io_error when the
  /// write fails (a full disk), internal_error on a non-finite sample.
  void write(std::span<const double> interleaved);
  /// Finishes the file and puts it in place. Throws io_error when that fails (the
  /// temporary is then removed), file_exists_error when the target appeared meanwhile and
  /// overwrite is not set.
  void commit();
  /// Finishes the file and hands it over uncommitted, to be committed with other outputs
  /// (base::output_set). Throws io_error when the file cannot be completed.
  base::output_file finish();

  std::int64_t frames_written() const noexcept { return frames_; }
  std::int64_t clipped_samples() const noexcept { return clipped_; }
  const std::filesystem::path& path() const noexcept { return target_; }
  const write_settings& settings() const noexcept { return settings_; }

 private:
  sound_writer() = default;
  void discard() noexcept;
  SNDFILE* file_{nullptr};
  std::optional<base::output_file> out_;
  std::filesystem::path target_;
  write_settings settings_;
  std::int64_t frames_{0}, clipped_{0};
  std::vector<int> codes_;  // scratch for integer encodings
  std::uint64_t dither_state_{0};
  double uniform() noexcept;  // [-1/2, 1/2), from dither_state_
};

}  // namespace pinchoff::dsp
