#include "dsp/loudness.hpp"

#include <ebur128.h>

#include <algorithm>
#include <cmath>
#include <limits>
#include <string>

#include "base/error.hpp"
#include "base/units.hpp"

namespace pinchoff::dsp {

struct loudness_meter::handle {
  ebur128_state* st{nullptr};
  handle() = default;
  handle(const handle&) = delete;
  handle& operator=(const handle&) = delete;
  ~handle() {
    if (st) ebur128_destroy(&st);
  }
};

loudness_meter::loudness_meter(loudness_meter&&) noexcept = default;
loudness_meter& loudness_meter::operator=(loudness_meter&&) noexcept = default;
loudness_meter::~loudness_meter() = default;

loudness_meter::loudness_meter(int channels, double rate_hz) : channels_(channels), rate_hz_(rate_hz) {
  if (channels < 1 || channels > 64)
    throw input_error("loudness: channel count must be 1 to 64, got " + std::to_string(channels));
  if (!(rate_hz >= 8000.0 && rate_hz <= 768000.0) || rate_hz != std::floor(rate_hz))
    throw input_error("loudness: sample rate must be a whole number of hertz from 8000 to 768000, got " +
                      base::format_number(rate_hz));
  h_ = std::make_unique<handle>();
  h_->st = ebur128_init(static_cast<unsigned>(channels), static_cast<unsigned long>(rate_hz),
                        EBUR128_MODE_I | EBUR128_MODE_SAMPLE_PEAK | EBUR128_MODE_TRUE_PEAK);
  if (!h_->st) throw internal_error("loudness: libebur128 could not initialise (out of memory)");
  // Weight 1 for every channel (see the header).
  for (int c = 0; c < channels; ++c)
    if (ebur128_set_channel(h_->st, static_cast<unsigned>(c), EBUR128_CENTER) != EBUR128_SUCCESS)
      throw internal_error("loudness: libebur128 refused the channel map");
}

void loudness_meter::add(std::span<const double> interleaved) {
  const auto ch = static_cast<std::size_t>(channels_);
  if (interleaved.size() % ch != 0)
    throw internal_error("loudness: " + std::to_string(interleaved.size()) + " samples is not a whole number of " +
                         std::to_string(channels_) + "-channel frames");
  const std::size_t frames = interleaved.size() / ch;
  if (frames == 0) return;
  if (ebur128_add_frames_double(h_->st, interleaved.data(), frames) != EBUR128_SUCCESS)
    throw internal_error("loudness: libebur128 ran out of memory");
  frames_ += static_cast<long long>(frames);
}

double loudness_meter::integrated_lufs() const {
  double l = 0.0;
  if (ebur128_loudness_global(h_->st, &l) != EBUR128_SUCCESS)
    throw internal_error("loudness: libebur128 could not compute the integrated loudness");
  return std::isfinite(l) ? l : -std::numeric_limits<double>::infinity();
}

double loudness_meter::sample_peak() const {
  double peak = 0.0;
  for (int c = 0; c < channels_; ++c) {
    double p = 0.0;
    if (ebur128_sample_peak(h_->st, static_cast<unsigned>(c), &p) != EBUR128_SUCCESS)
      throw internal_error("loudness: libebur128 could not give the sample peak");
    peak = std::max(peak, p);
  }
  return peak;
}

double loudness_meter::true_peak() const {
  double peak = 0.0;
  for (int c = 0; c < channels_; ++c) {
    double p = 0.0;
    if (ebur128_true_peak(h_->st, static_cast<unsigned>(c), &p) != EBUR128_SUCCESS)
      throw internal_error("loudness: libebur128 could not give the true peak");
    peak = std::max(peak, p);
  }
  return peak;
}

}  // namespace pinchoff::dsp
