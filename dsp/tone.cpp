#include "dsp/tone.hpp"

#include <algorithm>
#include <cmath>
#include <numbers>
#include <string>

#include "base/error.hpp"
#include "base/units.hpp"

namespace pinchoff::dsp {

std::vector<tone_step> level_staircase(double from_dbfs, double to_dbfs, double step_db, double seconds) {
  if (!std::isfinite(from_dbfs) || !std::isfinite(to_dbfs) || !std::isfinite(step_db) || step_db == 0.0)
    throw input_error("a level staircase needs finite levels and a non-zero step in dB");
  if (from_dbfs > 0.0 || to_dbfs > 0.0)
    throw input_error("levels above 0 dBFS would clip; the staircase goes to " + base::format_number(std::max(from_dbfs, to_dbfs)) +
                      " dBFS");
  const double span = std::abs(to_dbfs - from_dbfs);
  const double step = std::abs(step_db);
  // A step that divides the range up to rounding (-40..0:10/3) still reaches the end.
  // Counted in double first: a step of 1e-300 dB gives more steps than any integer holds.
  const double steps_d = std::floor(span / step + 1e-9) + 1.0;
  if (steps_d > 1000.0)
    throw input_error("a staircase of " + (steps_d < 1e15 ? std::to_string(static_cast<long long>(steps_d)) : base::format_number(steps_d)) +
                      " steps is too long (1000 at most)");
  const auto count = static_cast<long long>(steps_d);
  const double dir = to_dbfs >= from_dbfs ? 1.0 : -1.0;
  std::vector<tone_step> steps;
  for (long long i = 0; i < count; ++i) steps.push_back({from_dbfs + dir * step * static_cast<double>(i), seconds});
  return steps;
}

namespace {
// With an SI prefix where one fits (1.00 ms, 800 kHz), else plain (1e+300 s).
std::string quantity_text(double v, const char* unit) {
  const double a = std::fabs(v);
  return a >= 1e-15 && a < 1e15 ? base::format_si(v, unit) : base::format_number(v) + " " + unit;
}
std::int64_t frames_of(double seconds, double rate_hz) { return static_cast<std::int64_t>(std::llround(seconds * rate_hz)); }
}  // namespace

std::int64_t tone_frames(const tone_plan& plan) {
  std::int64_t n = 0;
  for (const tone_step& s : plan.steps) n += frames_of(s.seconds, plan.rate_hz);
  return n;
}

tone_generator::tone_generator(const tone_plan& plan) : plan_(plan) {
  if (!(plan.rate_hz > 0.0) || !std::isfinite(plan.rate_hz))
    throw setting_error("rate_hz", "sample rate must be positive, got " + base::format_number(plan.rate_hz));
  if (!(plan.rate_hz >= 1.0 && plan.rate_hz <= max_tone_rate_hz))
    throw setting_error("rate_hz", "sample rate must be 1 Hz to 768 kHz (what an audio file here holds), got " +
                                       quantity_text(plan.rate_hz, "Hz"));
  if (plan.rate_hz != std::floor(plan.rate_hz))
    throw setting_error("rate_hz", "sample rate must be a whole number of hertz (an audio file's header holds no "
                                   "fraction), got " + base::format_number(plan.rate_hz, 9));
  if (!(plan.frequency_hz >= min_tone_hz))
    throw input_error("tone frequency " + quantity_text(plan.frequency_hz, "Hz") +
                      " is below 1 Hz: not an audio test tone (the audio band starts at 20 Hz)");
  if (!(plan.frequency_hz > 0.0) || !(plan.frequency_hz < plan.rate_hz / 2))
    throw input_error("tone frequency " + base::format_si(plan.frequency_hz, "Hz") + " must lie between 0 and half the sample rate (" +
                      base::format_si(plan.rate_hz / 2, "Hz") + ")");
  if (plan.steps.empty()) throw input_error("a tone needs at least one level");
  if (!(plan.fade_seconds >= 0.0) || !std::isfinite(plan.fade_seconds))
    throw setting_error("fade_seconds", "fade time must be zero or positive, got " + base::format_si(plan.fade_seconds, "s"));
  // A fade lasts at most half a step, and a step at most max_tone_seconds; refused here
  // before it is counted in frames (1e300 s does not fit in any count).
  if (plan.fade_seconds > max_tone_seconds / 2)
    throw setting_error("fade_seconds", "a fade of " + quantity_text(plan.fade_seconds, "s") +
                                            " is longer than half the longest tone (" +
                                            base::format_number(max_tone_seconds) + " s, one hour)");
  fade_frames_ = frames_of(plan.fade_seconds, plan.rate_hz);
  starts_.push_back(0);
  for (std::size_t i = 0; i < plan.steps.size(); ++i) {
    const tone_step& s = plan.steps[i];
    if (!(s.level_dbfs <= 0.0))
      throw input_error("level " + base::format_number(s.level_dbfs) + " dBFS is above full scale (0 dBFS at most)");
    if (s.level_dbfs < min_tone_dbfs)
      throw input_error("level " + base::format_number(s.level_dbfs) + " dBFS is below " + base::format_number(min_tone_dbfs) +
                        " dBFS, far under any converter's noise (a 24-bit step is -144 dBFS)");
    if (!(s.seconds > 0.0) || !std::isfinite(s.seconds))
      throw setting_error("step_seconds", "a step must last a positive time, got " + base::format_number(s.seconds) + " s");
    if (s.seconds > max_tone_seconds)
      throw setting_error("step_seconds", "a step of " + base::format_number(s.seconds) + " s is longer than a test tone may be (" +
                        base::format_number(max_tone_seconds) + " s, one hour)");
    const std::int64_t n = frames_of(s.seconds, plan.rate_hz);
    const bool is_last = i + 1 == plan.steps.size();
    // The last step holds a ramp in and a ramp out, so it needs at least four fades to keep
    // half of itself steady; the others two.
    if (n < 1)
      throw setting_error("step_seconds", "a step of " + quantity_text(s.seconds, "s") + " is shorter than one sample at " +
                        quantity_text(plan.rate_hz, "Hz"));
    if (n < (is_last ? 4 : 2) * fade_frames_)
      throw setting_error("step_seconds", "a step of " + base::format_number(s.seconds) + " s is too short for fades of " +
                        base::format_number(plan.fade_seconds) + " s (at least " + (is_last ? "four" : "two") + " fades long)");
    starts_.push_back(starts_.back() + n);
    amplitudes_.push_back(base::ratio_from_db(s.level_dbfs));
    peak_ = std::max(peak_, amplitudes_.back());
  }
  total_ = starts_.back();
  if (static_cast<double>(total_) > max_tone_seconds * plan.rate_hz)
    throw input_error("the tone would last " + base::format_number(static_cast<double>(total_) / plan.rate_hz, 4) +
                      " s, longer than a test tone may be (" + base::format_number(max_tone_seconds) + " s, one hour)");
}

double tone_generator::envelope(std::int64_t t) const noexcept {
  // The step holding t: starts_ is sorted, so a binary search.
  const auto it = std::upper_bound(starts_.begin(), starts_.end(), t);
  const std::size_t i = static_cast<std::size_t>(it - starts_.begin()) - 1;
  const double a1 = amplitudes_[i];
  const auto ramp = [this](std::int64_t k) {  // 0 -> 1 over fade_frames_
    const double u = (static_cast<double>(k) + 0.5) / static_cast<double>(fade_frames_);
    return 0.5 * (1.0 - std::cos(std::numbers::pi * u));
  };
  double a = a1;
  const std::int64_t into = t - starts_[i];
  if (fade_frames_ > 0 && into < fade_frames_) {
    const double a0 = i == 0 ? 0.0 : amplitudes_[i - 1];
    a = a0 + (a1 - a0) * ramp(into);
  }
  const std::int64_t left = total_ - 1 - t;
  if (fade_frames_ > 0 && i + 1 == amplitudes_.size() && left < fade_frames_) a *= ramp(left);
  return a;
}

std::size_t tone_generator::generate(std::span<double> out) {
  const std::size_t n = static_cast<std::size_t>(std::min<std::int64_t>(static_cast<std::int64_t>(out.size()), total_ - at_));
  const long double cycles_per_frame = static_cast<long double>(plan_.frequency_hz) / static_cast<long double>(plan_.rate_hz);
  for (std::size_t k = 0; k < n; ++k) {
    const std::int64_t t = at_ + static_cast<std::int64_t>(k);
    const long double turns = cycles_per_frame * static_cast<long double>(t);
    const double phase = 2.0 * std::numbers::pi * static_cast<double>(turns - std::floor(turns));
    out[k] = envelope(t) * std::sin(phase);
  }
  at_ += static_cast<std::int64_t>(n);
  return n;
}

std::vector<steady_span> steady_spans(const tone_plan& plan) {
  const tone_generator g(plan);  // validates
  const std::int64_t fade = frames_of(plan.fade_seconds, plan.rate_hz);
  std::vector<steady_span> spans;
  std::int64_t start = 0;
  for (std::size_t i = 0; i < plan.steps.size(); ++i) {
    const std::int64_t end = start + frames_of(plan.steps[i].seconds, plan.rate_hz);
    spans.push_back({start + fade, i + 1 == plan.steps.size() ? end - fade : end});
    start = end;
  }
  return spans;
}

}  // namespace pinchoff::dsp
