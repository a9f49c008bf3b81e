#pragma once
// A plucked string by the Karplus-Strong method, and the demo bass phrase made from it
// (samples/pluck-phrase-48k.wav; see MANIFEST.md).
//
// String: Karplus & Strong, "Digital synthesis of plucked-string and drum timbres",
// Computer Music Journal 7(2), 1983, with refinements from Jaffe & Smith, "Extensions of
// the Karplus-Strong plucked-string algorithm", Computer Music Journal 7(2), 1983.
// The output s is the input of a delay line of N whole samples, fed back through a loss
// filter L(z) and a tuning allpass A(z):
//
//   s[n] = e[n] + (A L z^-N s)[n],   one trip round the loop = N + 1 + d samples.
//
// - Loss filter L(z) = rho (g + (1 - 2g) z^-1 + g z^-2), 0 <= g <= 1/4. It is symmetric,
//   so its delay is exactly one sample at every frequency; g = 1/4 is Karplus & Strong's
//   two-point average (1 + z^-1)/2 applied twice, g = 0 a lossless delay. Its gain
//   rho (1 - 4 g sin^2(w/2)) falls with frequency, so the upper partials die first; a low
//   note passes the filter few times a second, so g = 1/4 is used there to dull it
//   faster than the single average would. rho <= 1 sets the fundamental's decay to
//   `t60_s` (Jaffe & Smith's decay shortening): rho (1 - 4 g sin^2(w0/2)) =
//   10^(-3 / (f0 t60)), one factor per period.
// - Tuning allpass A(z) = (c + z^-1) / (1 + c z^-1) supplies the fraction d of the period
//   that whole samples cannot (Jaffe & Smith). d is kept in [0.1, 1.1): near d = 0, c -> 1
//   puts the allpass pole near Nyquist, where it rings (their reason, from memory).
//   c = sin((1 - d) w0 / 2) / sin((1 + d) w0 / 2) makes the phase delay exactly d at the
//   note's w0 = 2 pi f0 / fs (solved from arg A(e^jw0) = -d w0); Jaffe & Smith's
//   c = (1 - d) / (1 + d) is its limit as w0 -> 0. Without the allpass the loop is N + 1
//   samples with N rounded, and the note is off by up to half a sample of its period.
// - Pluck e[n]: one period (round(fs / f0) samples) of white noise uniform in [-1, 1),
//   less its mean, through a one-pole lowpass at `pluck_cutoff_hz` (Jaffe & Smith's
//   dynamic-level filter: a softer pluck is duller) and the comb 1 - z^-M,
//   M = round(pick_position fs / f0) (Jaffe & Smith's pick position: partials with a node
//   at the plucking point are missing), scaled to the asked rms.
//
// Noise: the raw 64-bit output of std::mt19937_64, whose sequence the C++ standard fixes,
// never the implementation-defined std distributions, so that the same seed gives the same
// samples everywhere (up to the last bits of std::sin and std::pow).
//
// Units: frequencies in hertz, times in seconds, samples in full scale (1.0 = 0 dBFS).
#include <cstddef>
#include <cstdint>
#include <random>
#include <vector>

namespace pinchoff::samples {

/// Uniform noise in [-1, 1) from the top 53 bits of mt19937_64: (x >> 11) 2^-52 - 1, exact.
class pluck_noise {
 public:
  explicit pluck_noise(std::uint64_t seed) : engine_(seed) {}
  double operator()() noexcept { return static_cast<double>(engine_() >> 11) * 0x1p-52 - 1.0; }

 private:
  std::mt19937_64 engine_;
};

struct string_settings {
  double frequency_hz{55.0};      ///< 20 Hz .. fs / 8
  double t60_s{3.0};              ///< the fundamental's fall to -60 dB, > 0
  double loss_g{0.25};            ///< g of the loss filter, 0 .. 1/4
  double pick_position{0.22};     ///< plucking point as a fraction of the string from the bridge, 0 .. 1/2
  double pluck_cutoff_hz{2000.0}; ///< lowpass of the pluck, 20 Hz .. fs / 2
  bool tuning_allpass{true};
};

/// One string: a small value type; operator() gives the next output sample.
class plucked_string {
 public:
  /// Throws input_error when a setting is out of its range, or when the decay asked is
  /// longer than the loss filter alone allows at this note (rho would exceed 1).
  plucked_string(const string_settings& settings, double fs_hz);

  /// Queues a pluck of the given rms (full scale) drawn from `noise`; it sounds from the
  /// next sample on, added to whatever still rings.
  void pluck(double rms, pluck_noise& noise);
  /// Changes the fundamental's decay from the next sample on (a finger damping the
  /// string: a short t60). Throws input_error as the constructor does.
  void set_t60(double t60_s);
  double operator()() noexcept;
  /// Silence: the loop and the queued pluck are cleared.
  void reset() noexcept;

  int delay_samples() const noexcept { return delay_; }       ///< N
  double fraction_samples() const noexcept { return frac_; }  ///< d (0 without the allpass)
  double allpass_c() const noexcept { return c_; }
  /// N + 1 + d: fs divided by this is the note the loop is tuned to.
  double period_samples() const noexcept { return delay_ + 1.0 + frac_; }
  double rho() const noexcept { return rho_; }

 private:
  double fs_hz_;
  string_settings s_;
  int delay_{};
  double frac_{}, c_{}, rho_{};
  std::vector<double> line_;
  std::size_t at_{0};
  double y1_{}, y2_{}, l1_{}, a1_{};
  std::vector<double> pluck_;
  std::size_t pluck_at_{0};
};

/// One note: a string plucked at sample 0 with rms 0.1, `frames` samples long.
std::vector<double> pluck_note(const string_settings& settings, double fs_hz, std::size_t frames,
                               std::uint64_t seed);

/// Equal temperament on A4 = 440 Hz (ISO 16), MIDI note numbers (A4 = 69, E1 = 28).
double equal_tempered_hz(int midi_note) noexcept;

/// The demo phrase: a bass line of our own in E minor pentatonic at 100 beats per minute,
/// with two fifth double stops; see pluck_phrase.cpp for the notes.
inline constexpr double phrase_rate_hz = 48000.0;
inline constexpr double phrase_seconds = 6.5;       ///< 312000 frames at 48 kHz
inline constexpr double phrase_peak_dbfs = -6.0;    ///< sample peak of the whole clip
inline constexpr std::uint64_t phrase_seed = 20250;

/// The whole clip at fs_hz, mono, scaled so that its sample peak is phrase_peak_dbfs.
std::vector<double> pluck_phrase(double fs_hz);

}  // namespace pinchoff::samples
