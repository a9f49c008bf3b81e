#include "dsp/shaped_noise.hpp"

#include <kissfft.hh>

#include <algorithm>
#include <cmath>
#include <numbers>
#include <string>

#include "base/error.hpp"

namespace pinchoff::dsp {

struct noise_shape::plan {
  kissfft<double> forward, inverse;
  plan(std::size_t m) : forward(m, false), inverse(m, true) {}
};

std::size_t shaped_noise_length(double rate_hz) noexcept {
  std::size_t n = 4;
  while (n < 65536 && rate_hz / static_cast<double>(n) > 3.0) n *= 2;
  return n;
}

noise_shape::noise_shape(std::span<const double> density_v2_hz, double rate_hz) : rate_(rate_hz) {
  const std::size_t bins = density_v2_hz.size();
  n_ = 2 * (bins - 1);
  if (bins < 3 || (n_ & (n_ - 1)) != 0 || !(rate_hz > 0.0) || !std::isfinite(rate_hz))
    throw internal_error("noise_shape: the density needs n/2 + 1 values with n a power of two from 4, got " +
                         std::to_string(bins));
  for (double s : density_v2_hz)
    if (!(s >= 0.0) || !std::isfinite(s)) throw internal_error("noise_shape: a density value is negative or not finite");
  const std::size_t n = n_;
  // The zero-phase response on the whole circle (A_k = A_{n-k}), then its inverse DFT.
  std::vector<std::complex<double>> a(n), h0(n);
  for (std::size_t k = 0; k < bins; ++k) {
    const double ak = std::sqrt(density_v2_hz[k] * rate_hz / 2.0);
    a[k] = ak;
    if (k > 0 && k < n / 2) a[n - k] = ak;
  }
  kissfft<double>(n, true).transform(a.data(), h0.data());
  // Centred at n/2 and tapered (Hann over the n taps; the centre tap keeps its weight 1).
  taps_.resize(n);
  for (std::size_t t = 0; t < n; ++t) {
    const double w = 0.5 - 0.5 * std::cos(2.0 * std::numbers::pi * static_cast<double>(t) / static_cast<double>(n));
    taps_[t] = h0[(t + n / 2) % n].real() / static_cast<double>(n) * w;
    variance_ += taps_[t] * taps_[t];
  }
  plan_ = std::make_unique<plan>(2 * n);
  std::vector<std::complex<double>> padded(2 * n);
  for (std::size_t t = 0; t < n; ++t) padded[t] = taps_[t];
  spectrum_.resize(2 * n);
  plan_->forward.transform(padded.data(), spectrum_.data());
}

noise_shape::~noise_shape() = default;

namespace {
std::uint64_t splitmix64(std::uint64_t& x) noexcept {
  std::uint64_t z = (x += 0x9e3779b97f4a7c15ULL);
  z = (z ^ (z >> 30)) * 0xbf58476d1ce4e5b9ULL;
  z = (z ^ (z >> 27)) * 0x94d049bb133111ebULL;
  return z ^ (z >> 31);
}
std::uint64_t rotl(std::uint64_t x, int k) noexcept { return (x << k) | (x >> (64 - k)); }
}  // namespace

std::uint64_t stream_seed(std::uint64_t seed, std::uint64_t index) noexcept {
  std::uint64_t x = seed;
  const std::uint64_t a = splitmix64(x);
  x = a ^ (index * 0xd1b54a32d192ed03ULL);
  return splitmix64(x);
}

shaped_noise::shaped_noise(std::shared_ptr<const noise_shape> shape, std::uint64_t seed) : shape_(std::move(shape)) {
  std::uint64_t x = seed;
  for (std::uint64_t& s : s_) s = splitmix64(x);
  const std::size_t n = shape_->n_;
  work_.resize(2 * n);
  freq_.resize(2 * n);
  tail_.assign(n, 0.0);
  ready_.assign(n, 0.0);
  next_block();  // the start-up block: its output lacks the noise before it
  next_block();
}

double shaped_noise::gaussian() {
  if (has_spare_) {
    has_spare_ = false;
    return spare_;
  }
  // xoshiro256** (Blackman & Vigna), 53-bit uniforms in (0, 1].
  auto next = [this] {
    const std::uint64_t r = rotl(s_[1] * 5, 7) * 9;
    const std::uint64_t t = s_[1] << 17;
    s_[2] ^= s_[0];
    s_[3] ^= s_[1];
    s_[1] ^= s_[2];
    s_[0] ^= s_[3];
    s_[2] ^= t;
    s_[3] = rotl(s_[3], 45);
    return (static_cast<double>(r >> 11) + 1.0) * 0x1.0p-53;
  };
  const double u1 = next(), u2 = next();
  const double r = std::sqrt(-2.0 * std::log(u1));
  spare_ = r * std::sin(2.0 * std::numbers::pi * u2);
  has_spare_ = true;
  return r * std::cos(2.0 * std::numbers::pi * u2);
}

void shaped_noise::next_block() {
  const std::size_t n = shape_->n_, m = 2 * n;
  for (std::size_t t = 0; t < n; ++t) work_[t] = gaussian();
  std::fill(work_.begin() + static_cast<std::ptrdiff_t>(n), work_.end(), std::complex<double>{});
  shape_->plan_->forward.transform(work_.data(), freq_.data());
  for (std::size_t k = 0; k < m; ++k) freq_[k] *= shape_->spectrum_[k];
  shape_->plan_->inverse.transform(freq_.data(), work_.data());
  const double scale = 1.0 / static_cast<double>(m);
  for (std::size_t t = 0; t < n; ++t) {
    ready_[t] = tail_[t] + work_[t].real() * scale;
    tail_[t] = work_[t + n].real() * scale;
  }
  used_ = 0;
}

void shaped_noise::generate(std::span<double> out) {
  std::size_t done = 0;
  while (done < out.size()) {
    if (used_ == ready_.size()) next_block();
    const std::size_t k = std::min(out.size() - done, ready_.size() - used_);
    std::copy_n(ready_.begin() + static_cast<std::ptrdiff_t>(used_), k, out.begin() + static_cast<std::ptrdiff_t>(done));
    used_ += k;
    done += k;
  }
}

}  // namespace pinchoff::dsp
