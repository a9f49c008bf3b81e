#include "dsp/fft.hpp"

#include <kissfft.hh>

#include <string>

#include "base/error.hpp"

namespace pinchoff::dsp {

// Even n: a complex plan of n/2 points fed the real samples as interleaved pairs
// (kissfft::transform_real). Odd n: a complex plan of n points.
struct real_fft::plan {
  kissfft<double> fft;
  explicit plan(std::size_t n) : fft(n % 2 == 0 ? n / 2 : n, false) {}
};

real_fft::real_fft(std::size_t n) : n_(n) {
  if (n == 0) throw input_error("FFT size must be at least 1 sample");
  plan_ = std::make_unique<plan>(n);
}

real_fft::~real_fft() = default;
real_fft::real_fft(const real_fft& other) : n_(other.n_), plan_(std::make_unique<plan>(*other.plan_)) {}
real_fft& real_fft::operator=(const real_fft& other) {
  if (this != &other) {
    plan_ = std::make_unique<plan>(*other.plan_);
    n_ = other.n_;
  }
  return *this;
}
real_fft::real_fft(real_fft&&) noexcept = default;
real_fft& real_fft::operator=(real_fft&&) noexcept = default;

void real_fft::forward(std::span<const double> x, std::span<std::complex<double>> out) const {
  if (!plan_) throw internal_error("real_fft used after being moved from");
  if (x.size() != n_ || out.size() != bins())
    throw internal_error("real_fft of size " + std::to_string(n_) + " given " + std::to_string(x.size()) +
                         " samples and " + std::to_string(out.size()) + " output bins (expected " +
                         std::to_string(bins()) + ")");
  if (n_ == 1) {
    out[0] = x[0];
    return;
  }
  if (n_ % 2 == 0) {
    // transform_real writes n/2 values; bin 0 packs DC (real part) and Nyquist (imaginary part).
    plan_->fft.transform_real(x.data(), out.data());
    const double dc = out[0].real();
    const double nyquist = out[0].imag();
    out[0] = {dc, 0.0};
    out[n_ / 2] = {nyquist, 0.0};
    return;
  }
  std::vector<std::complex<double>> in(x.begin(), x.end());
  std::vector<std::complex<double>> full(n_);
  plan_->fft.transform(in.data(), full.data());
  for (std::size_t k = 0; k < out.size(); ++k) out[k] = full[k];
}

std::vector<std::complex<double>> real_fft::forward(std::span<const double> x) const {
  std::vector<std::complex<double>> out(bins());
  forward(x, out);
  return out;
}

}  // namespace pinchoff::dsp
