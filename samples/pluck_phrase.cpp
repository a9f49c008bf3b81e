#include "samples/pluck_phrase.hpp"

#include <algorithm>
#include <cmath>
#include <numbers>
#include <string>
#include <utility>

#include "base/error.hpp"

namespace pinchoff::samples {

namespace {

void require(bool ok, const std::string& what) {
  if (!ok) throw input_error("plucked string: " + what);
}

}  // namespace

plucked_string::plucked_string(const string_settings& settings, double fs_hz) : fs_hz_(fs_hz), s_(settings) {
  require(fs_hz >= 8000.0 && fs_hz <= 768000.0, "rate must be 8000 to 768000 Hz");
  require(s_.frequency_hz >= 20.0 && s_.frequency_hz <= fs_hz / 8.0, "frequency must be 20 Hz to fs/8");
  require(s_.loss_g >= 0.0 && s_.loss_g <= 0.25, "loss_g must be 0 to 0.25");
  require(s_.pick_position > 0.0 && s_.pick_position <= 0.5, "pick_position must be above 0 and at most 0.5");
  require(s_.pluck_cutoff_hz >= 20.0 && s_.pluck_cutoff_hz <= fs_hz / 2.0, "pluck_cutoff_hz must be 20 Hz to fs/2");

  const double period = fs_hz / s_.frequency_hz;  // samples round the loop
  const double w0 = 2.0 * std::numbers::pi / period;
  if (s_.tuning_allpass) {
    // N + 1 + d = period with d in [0.1, 1.1).
    delay_ = static_cast<int>(std::floor(period - 1.1));
    frac_ = period - 1.0 - delay_;
    c_ = std::sin((1.0 - frac_) * w0 / 2.0) / std::sin((1.0 + frac_) * w0 / 2.0);
  } else {
    delay_ = static_cast<int>(std::lround(period - 1.0));
  }
  line_.assign(static_cast<std::size_t>(delay_), 0.0);
  set_t60(s_.t60_s);
}

void plucked_string::set_t60(double t60_s) {
  require(t60_s > 0.0, "t60 must be above 0 s");
  const double w0 = 2.0 * std::numbers::pi * s_.frequency_hz / fs_hz_;
  const double s = std::sin(w0 / 2.0);
  const double filter_gain = 1.0 - 4.0 * s_.loss_g * s * s;
  const double rho = std::pow(10.0, -3.0 / (s_.frequency_hz * t60_s)) / filter_gain;
  require(rho <= 1.0, "t60 of " + std::to_string(t60_s) + " s is longer than the loss filter allows at " +
                          std::to_string(s_.frequency_hz) + " Hz");
  rho_ = rho;
}

void plucked_string::pluck(double rms, pluck_noise& noise) {
  const double period = fs_hz_ / s_.frequency_hz;
  const auto n = static_cast<std::size_t>(std::lround(period));
  const auto m = static_cast<std::size_t>(std::max(1L, std::lround(s_.pick_position * period)));

  std::vector<double> burst(n);
  for (double& v : burst) v = noise();
  double mean = 0.0;
  for (double v : burst) mean += v;
  mean /= static_cast<double>(n);

  // One-pole lowpass, pole at exp(-2 pi fc / fs) (impulse-invariant), then the pick comb.
  const double pole = std::exp(-2.0 * std::numbers::pi * s_.pluck_cutoff_hz / fs_hz_);
  std::vector<double> e(n + m, 0.0);
  double lp = 0.0;
  for (std::size_t t = 0; t < n + m; ++t) {
    const double x = t < n ? burst[t] - mean : 0.0;
    lp = (1.0 - pole) * x + pole * lp;
    e[t] = lp;
  }
  for (std::size_t t = n + m; t-- > m;) e[t] -= e[t - m];

  double power = 0.0;
  for (double v : e) power += v * v;
  const double scale = power > 0.0 ? rms / std::sqrt(power / static_cast<double>(n)) : 0.0;

  // Add to what is still queued.
  std::vector<double> queued(pluck_.begin() + static_cast<std::ptrdiff_t>(pluck_at_), pluck_.end());
  queued.resize(std::max(queued.size(), e.size()), 0.0);
  for (std::size_t t = 0; t < e.size(); ++t) queued[t] += scale * e[t];
  pluck_ = std::move(queued);
  pluck_at_ = 0;
}

double plucked_string::operator()() noexcept {
  const double y = line_[at_];  // s[n - N]
  const double g = s_.loss_g;
  const double l = rho_ * (g * y + (1.0 - 2.0 * g) * y1_ + g * y2_);
  y2_ = y1_;
  y1_ = y;
  double a = l;
  if (s_.tuning_allpass) {
    a = c_ * l + l1_ - c_ * a1_;
    l1_ = l;
    a1_ = a;
  }
  double out = a;
  if (pluck_at_ < pluck_.size()) out += pluck_[pluck_at_++];
  line_[at_] = out;
  if (++at_ == line_.size()) at_ = 0;
  return out;
}

void plucked_string::reset() noexcept {
  std::fill(line_.begin(), line_.end(), 0.0);
  at_ = 0;
  y1_ = y2_ = l1_ = a1_ = 0.0;
  pluck_.clear();
  pluck_at_ = 0;
}

std::vector<double> pluck_note(const string_settings& settings, double fs_hz, std::size_t frames,
                               std::uint64_t seed) {
  plucked_string string(settings, fs_hz);
  pluck_noise noise(seed);
  string.pluck(0.1, noise);
  std::vector<double> x(frames);
  for (double& v : x) v = string();
  return x;
}

double equal_tempered_hz(int midi_note) noexcept { return 440.0 * std::exp2((midi_note - 69) / 12.0); }

namespace {

// The phrase, in eighth notes at 100 beats per minute (0.3 s each), E minor pentatonic
// (E G A B D) on the lowest bass strings. A double stop is two notes at one onset, the
// upper one 12 ms after the lower (one finger reaching the second string a moment later).
struct phrase_note {
  int onset_eighths;
  int length_eighths;  // 0: rings to the end of the clip
  int midi;
  double velocity;  // 0..1: rms of the pluck and its brightness
};

constexpr phrase_note phrase_notes[] = {
    {0, 2, 28, 1.00},                     // E1
    {2, 1, 28, 0.70},                     // E1
    {3, 1, 31, 0.80},                     // G1
    {4, 2, 33, 0.90},                     // A1
    {6, 1, 35, 0.80},                     // B1
    {7, 1, 38, 0.80},                     // D2
    {8, 4, 28, 1.00},  {8, 4, 35, 0.85},  // E1 + B1, a fifth
    {12, 1, 33, 0.80},                    // A1
    {13, 1, 35, 0.70},                    // B1
    {14, 2, 38, 0.90},                    // D2
    {16, 0, 33, 1.00}, {16, 0, 40, 0.85}, // A1 + E2, a fifth, left to ring
};

constexpr double eighth_s = 0.3;
constexpr double lead_in_s = 0.05;     // silence before the first note
constexpr double stagger_s = 0.012;    // upper note of a double stop
constexpr double ring_t60_s = 3.0;     // a held note
constexpr double damped_t60_s = 0.08;  // a finger lifted (fretting hand releases)
constexpr double tail_s = 0.6;         // rendered after the damping starts
constexpr double fade_out_s = 0.4;     // raised cosine at the end of the clip

}  // namespace

std::vector<double> pluck_phrase(double fs_hz) {
  const auto frames = static_cast<std::size_t>(std::lround(phrase_seconds * fs_hz));
  std::vector<double> mix(frames, 0.0);
  pluck_noise noise(phrase_seed);

  int previous_onset = -1;
  for (const phrase_note& p : phrase_notes) {
    const bool upper = p.onset_eighths == previous_onset;
    previous_onset = p.onset_eighths;
    const double onset_s = lead_in_s + p.onset_eighths * eighth_s + (upper ? stagger_s : 0.0);
    const double release_s = p.length_eighths > 0 ? lead_in_s + (p.onset_eighths + p.length_eighths) * eighth_s
                                                  : phrase_seconds;

    string_settings s;
    s.frequency_hz = equal_tempered_hz(p.midi);
    s.t60_s = ring_t60_s;
    s.pluck_cutoff_hz = 200.0 + 800.0 * p.velocity;  // a harder pluck is brighter
    plucked_string string(s, fs_hz);
    string.pluck(0.3 * p.velocity, noise);

    const auto begin = static_cast<std::size_t>(std::lround(onset_s * fs_hz));
    const auto release = static_cast<std::size_t>(std::lround(release_s * fs_hz));
    const std::size_t end = std::min(frames, static_cast<std::size_t>(std::lround((release_s + tail_s) * fs_hz)));
    for (std::size_t t = begin; t < end; ++t) {
      if (t == release) string.set_t60(damped_t60_s);
      mix[t] += string();
    }
  }

  // Raised-cosine fade (Hann half-window) so the clip ends at silence without a click.
  const auto fade = static_cast<std::size_t>(std::lround(fade_out_s * fs_hz));
  for (std::size_t k = 0; k < fade; ++k) {
    const double u = static_cast<double>(k + 1) / static_cast<double>(fade);
    mix[frames - fade + k] *= 0.5 * (1.0 + std::cos(std::numbers::pi * u));
  }

  double peak = 0.0;
  for (double v : mix) peak = std::max(peak, std::abs(v));
  const double gain = std::pow(10.0, phrase_peak_dbfs / 20.0) / peak;
  for (double& v : mix) v *= gain;
  return mix;
}

}  // namespace pinchoff::samples
