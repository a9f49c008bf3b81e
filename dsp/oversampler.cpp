#include "dsp/oversampler.hpp"

#include <algorithm>
#include <cmath>
#include <string>

#include "base/error.hpp"

namespace pinchoff::dsp {

namespace {

// Base-rate samples handled per pass through the stages; bounds the scratch buffers.
constexpr std::size_t chunk_base = 128;

int stage_count(int factor) {
  switch (factor) {
    case 1: return 0;
    case 2: return 1;
    case 4: return 2;
    case 8: return 3;
    case 16: return 4;
    case 32: return 5;
    case 64: return 6;
    default:
      throw input_error("oversampling factor " + std::to_string(factor) +
                        " is not supported; expected 1, 2, 4, 8, 16, 32 or 64");
  }
}

}  // namespace

oversampler::oversampler(int factor, double base_rate_hz) : factor_(factor), base_rate_hz_(base_rate_hz) {
  const int stages = stage_count(factor);
  if (!(base_rate_hz > 2.0 * passband_edge_hz && base_rate_hz <= 1e6))
    throw input_error("oversampler base rate " + std::to_string(base_rate_hz) +
                      " Hz must be above 40 kHz and at most 1 MHz");

  // Stage s runs at r = 2^s fb on its high side; stopband from r/2 - 20 kHz (see header).
  long twice_latency_num = 0;  // sum over stages of (2K_s - 1) * 2^(M-s): up latency * factor
  for (int s = 1; s <= stages; ++s) {
    const double rate_hz = base_rate_hz * static_cast<double>(1 << s);
    const double edge = 0.5 - passband_edge_hz / rate_hz;
    designs_.push_back(design_halfband(edge, stage_attenuation_db));
    up_.emplace_back(designs_.back());
    down_.emplace_back(designs_.back());
    twice_latency_num += static_cast<long>(designs_.back().delay_samples()) * (1L << (stages - s));
  }
  // Round trip without padding, in units of 1/factor base samples: 2 * twice_latency_num
  // (both directions). Pad the downsampler up to the next multiple of factor.
  const long round_num = 2 * twice_latency_num;
  const long pad = (factor - round_num % factor) % factor;
  pad_line_.assign(static_cast<std::size_t>(pad), 0.0);
  up_latency_ = static_cast<double>(twice_latency_num) / factor;
  down_latency_ = static_cast<double>(twice_latency_num + pad) / factor;
  latency_ = static_cast<int>((round_num + pad) / factor);

  scratch_a_.assign(chunk_base * static_cast<std::size_t>(factor), 0.0);
  scratch_b_.assign(chunk_base * static_cast<std::size_t>(factor), 0.0);
}

double oversampler::multiplies_per_base_sample() const noexcept {
  // Stage s: K multiplies per low-rate sample when upsampling, K + 1 when downsampling;
  // its low rate is 2^(s-1) fb.
  double total = 0.0;
  for (std::size_t i = 0; i < designs_.size(); ++i) {
    const double k = designs_[i].side_count();
    total += static_cast<double>(1 << i) * (2.0 * k + 1.0);
  }
  return total;
}

void oversampler::reset() noexcept {
  for (halfband_interpolator& u : up_) u.reset();
  for (halfband_decimator& d : down_) d.reset();
  std::fill(pad_line_.begin(), pad_line_.end(), 0.0);
}

void oversampler::upsample(std::span<const double> in, std::span<double> out) {
  const std::size_t f = static_cast<std::size_t>(factor_);
  if (out.size() != in.size() * f)
    throw internal_error("oversampler::upsample given " + std::to_string(in.size()) + " inputs and " +
                         std::to_string(out.size()) + " outputs (expected " + std::to_string(in.size() * f) + ")");
  if (up_.empty()) {
    std::copy(in.begin(), in.end(), out.begin());
    return;
  }
  for (std::size_t start = 0; start < in.size(); start += chunk_base) {
    const std::size_t n = std::min(chunk_base, in.size() - start);
    std::span<const double> src = in.subspan(start, n);
    std::size_t len = n;
    for (std::size_t s = 0; s < up_.size(); ++s) {
      len *= 2;
      const bool last = s + 1 == up_.size();
      std::span<double> dst = last ? out.subspan(start * f, len)
                                   : std::span<double>(s % 2 == 0 ? scratch_a_ : scratch_b_).first(len);
      up_[s].process(src, dst);
      src = dst;
    }
  }
}

void oversampler::downsample(std::span<const double> in, std::span<double> out) {
  const std::size_t f = static_cast<std::size_t>(factor_);
  if (in.size() != out.size() * f)
    throw internal_error("oversampler::downsample given " + std::to_string(in.size()) + " inputs and " +
                         std::to_string(out.size()) + " outputs (expected " + std::to_string(out.size() * f) + ")");
  if (down_.empty()) {
    std::copy(in.begin(), in.end(), out.begin());
    return;
  }
  const std::size_t pad = pad_line_.size();
  for (std::size_t start = 0; start < out.size(); start += chunk_base) {
    const std::size_t n = std::min(chunk_base, out.size() - start);
    std::size_t len = n * f;
    std::span<const double> src = in.subspan(start * f, len);
    if (pad > 0) {
      // A delay of pad < factor <= len samples: the held samples, then all but the last pad
      // of this chunk, whose last pad are held for the next.
      std::span<double> delayed = std::span<double>(scratch_b_).first(len);
      std::copy(pad_line_.begin(), pad_line_.end(), delayed.begin());
      std::copy(src.begin(), src.end() - static_cast<std::ptrdiff_t>(pad), delayed.begin() + static_cast<std::ptrdiff_t>(pad));
      std::copy(src.end() - static_cast<std::ptrdiff_t>(pad), src.end(), pad_line_.begin());
      src = delayed;
    }
    // Highest-rate stage first; alternate buffers so a stage never reads what it writes.
    for (std::size_t i = down_.size(); i-- > 0;) {
      len /= 2;
      std::span<double> dst = (i == 0) ? out.subspan(start, len)
                                       : std::span<double>(src.data() == scratch_a_.data() ? scratch_b_ : scratch_a_).first(len);
      down_[i].process(src, dst);
      src = dst;
    }
  }
}

}  // namespace pinchoff::dsp
