#pragma once
// Test signals for the bench: a sine at one level, or a staircase of levels each held for a
// while, made block by block so that any length streams in flat memory.
//
// Levels are in dBFS of the sine's peak: 0 dBFS is a sine whose peak reaches full scale
// (amplitude 1.0), so a level L has amplitude 10^(L/20). Levels above 0 dBFS would clip
// in an integer file and are refused.
//
// Envelope: every step starts with a raised-cosine ramp (Hann half-window,
// a(u) = a0 + (a1 - a0) (1 - cos(pi u)) / 2, 0 <= u <= 1) of `fade_seconds` from the level
// before it (silence for the first step) to its own; the last step ends with a ramp of the
// same length down to silence. A step therefore holds its level steadily from
// start + fade to its end (to end - fade for the last one). The ramps keep the steps from
// clicking: a raised cosine has no jump in the envelope or its slope.
// The sine is phase-continuous across steps: x[t] = a(t) sin(2 pi f t / fs), the phase
// reduced in long double so that hour-long files keep it to about 1e-7 turn.
#include <cstddef>
#include <cstdint>
#include <span>
#include <vector>

namespace pinchoff::dsp {

struct tone_step {
  double level_dbfs{};   ///< <= 0
  double seconds{};      ///< > 0
};

struct tone_plan {
  double frequency_hz{1000.0};   ///< 0 < f < rate / 2
  double rate_hz{48000.0};       ///< 1 Hz to max_tone_rate_hz
  std::vector<tone_step> steps;  ///< one step: a plain tone
  double fade_seconds{0.01};     ///< >= 0, at most half of every step (the last one: a quarter)
};

/// A staircase from `from_dbfs` to `to_dbfs` (either direction) in steps of |step_db|, both
/// ends included when the step divides the range; each held `seconds`. Throws input_error
/// when step_db is 0, the range needs more than 1000 steps, or a level is above 0 dBFS.
std::vector<tone_step> level_staircase(double from_dbfs, double to_dbfs, double step_db, double seconds);

/// The longest plan a tone_generator takes: one hour. Longer is taken for a slip of the
/// keyboard (a length of 1e12 s would write until the disk is full).
inline constexpr double max_tone_seconds = 3600.0;
/// The lowest frequency a tone is made at (common practice: the audio band starts at 20 Hz).
inline constexpr double min_tone_hz = 1.0;
/// The quietest level a tone is made at: far under any converter's noise (common practice).
inline constexpr double min_tone_dbfs = -200.0;
/// The highest rate a tone is made at: the top rate of the file writer (dsp/io/sound_file.hpp).
inline constexpr double max_tone_rate_hz = 768000.0;

/// The plan's length in frames: the sum over steps of round(seconds * rate).
std::int64_t tone_frames(const tone_plan& plan);

/// Where a step holds its level steadily, in frames from the start of the file.
struct steady_span {
  std::int64_t begin{}, end{};
};
std::vector<steady_span> steady_spans(const tone_plan& plan);

class tone_generator {
 public:
  /// Validates the plan (throws input_error naming the bad value; setting_error naming the
  /// field for rate_hz and fade_seconds).
  explicit tone_generator(const tone_plan& plan);
  /// Writes the next min(out.size(), frames left) mono samples; returns how many.
  std::size_t generate(std::span<double> out);
  std::int64_t frames() const noexcept { return total_; }
  std::int64_t position() const noexcept { return at_; }
  /// The largest |sample| the plan produces: the loudest step's amplitude.
  double peak() const noexcept { return peak_; }

 private:
  double envelope(std::int64_t t) const noexcept;
  tone_plan plan_;
  std::vector<std::int64_t> starts_;  // first frame of each step, then the total
  std::vector<double> amplitudes_;
  std::int64_t fade_frames_{0};
  std::int64_t total_{0};
  std::int64_t at_{0};
  double peak_{0.0};
};

}  // namespace pinchoff::dsp
