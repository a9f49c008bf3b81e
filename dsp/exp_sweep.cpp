#include "dsp/exp_sweep.hpp"

#include <kissfft.hh>

#include <algorithm>
#include <cmath>
#include <limits>
#include <numbers>
#include <string>

#include "base/error.hpp"
#include "base/units.hpp"
#include "dsp/fft.hpp"

namespace pinchoff::dsp {

namespace {
constexpr double third_octave = 1.2599210498948732;  // 2^(1/3)

// The smallest even 5-smooth number >= n: both the real transform (n/2 complex) and the
// complex inverse run on radix 2..5 butterflies.
std::size_t even_smooth_at_least(std::size_t n) {
  const std::size_t half = std::max<std::size_t>(1, (n + 1) / 2);
  std::size_t best = std::numeric_limits<std::size_t>::max();
  for (std::size_t p2 = 1; p2 < 4 * half; p2 *= 2)
    for (std::size_t p3 = p2; p3 < 4 * half; p3 *= 3)
      for (std::size_t p5 = p3; p5 < 4 * half; p5 *= 5)
        if (p5 >= half) best = std::min(best, p5);
  return 2 * best;
}

// Raised cosine in log frequency: 0 at or below f1 and at or above f2, 1 from f1 2^(1/3)
// to f2 / 2^(1/3).
double band_taper(double f, double f1, double f2) {
  if (!(f > f1) || !(f < f2)) return 0.0;
  const auto ramp = [](double u) { return 0.5 - 0.5 * std::cos(std::numbers::pi * u); };
  const double lo = std::log(f / f1) / std::log(third_octave), hi = std::log(f2 / f) / std::log(third_octave);
  return (lo < 1.0 ? ramp(lo) : 1.0) * (hi < 1.0 ? ramp(hi) : 1.0);
}

// The DTFT of h[i] w(i) around `centre` (samples, fractional; indices taken modulo N), at f,
// with the delay `centre` removed: sum h w exp(-j 2 pi f (i - centre) / fs). The window
// reaches `before` samples before the centre and `after` after it: it rises as a raised
// cosine over the first half of the part before, is 1 from there to halfway into the part
// after, and falls over the rest.
std::complex<double> windowed_dtft(const std::vector<double>& h, double centre, double before, double after, double f_hz,
                                   double fs_hz) {
  const auto n = static_cast<long long>(h.size());
  const auto first = static_cast<long long>(std::ceil(centre - before));
  const auto last = static_cast<long long>(std::floor(centre + after));
  const double w = -2.0 * std::numbers::pi * f_hz / fs_hz;
  std::complex<double> sum{0.0, 0.0};
  std::complex<double> rot{1.0, 0.0};
  const std::complex<double> step = std::polar(1.0, w);
  for (long long i = first; i <= last; ++i) {
    if ((i - first) % 1024 == 0) rot = std::polar(1.0, w * (static_cast<double>(i) - centre));
    const double u = static_cast<double>(i) - centre;  // from the centre
    double g = 1.0;
    if (u < -0.5 * before) g = 0.5 - 0.5 * std::cos(std::numbers::pi * (u + before) / (0.5 * before));
    else if (u > 0.5 * after) g = 0.5 - 0.5 * std::cos(std::numbers::pi * (after - u) / (0.5 * after));
    long long k = i % n;
    if (k < 0) k += n;
    sum += h[static_cast<std::size_t>(k)] * g * rot;
    rot *= step;
  }
  return sum;
}
}  // namespace

void validate(const exp_sweep_plan& p) {
  if (!(p.rate_hz >= 1.0 && p.rate_hz <= 768000.0))
    throw setting_error("rate_hz", "the sample rate must be 1 Hz to 768 kHz, got " + base::format_number(p.rate_hz));
  if (!(p.start_hz >= 1.0))
    throw setting_error("start_hz", "the sweep must start at 1 Hz or above, got " + base::format_number(p.start_hz) + " Hz");
  if (!(p.end_hz < p.rate_hz / 2))
    throw setting_error("end_hz", "the sweep must end below half the sample rate (" + base::format_si(p.rate_hz / 2, "Hz") +
                                      "), got " + base::format_number(p.end_hz) + " Hz");
  if (!(p.end_hz >= 4.0 * p.start_hz))
    throw setting_error("end_hz", "the sweep must span two octaves at least (end at 4 times its start or more: the "
                                  "harmonics are told apart by the time between them), got " +
                                      base::format_number(p.start_hz) + " to " + base::format_number(p.end_hz) + " Hz");
  if (!(p.seconds >= 0.5) || !(p.seconds * p.rate_hz <= static_cast<double>(max_sweep_frames)))
    throw setting_error("seconds", "a sweep must last 0.5 s to " +
                                       base::format_number(static_cast<double>(max_sweep_frames) / p.rate_hz, 4) +
                                       " s at this rate (" + std::to_string(max_sweep_frames) + " samples), got " +
                                       base::format_number(p.seconds) + " s");
  if (!(p.level_dbfs <= 0.0) || !(p.level_dbfs >= -200.0))
    throw setting_error("level_dbfs", "the sweep's level must be -200 to 0 dBFS, got " + base::format_number(p.level_dbfs));
  if (!(p.fade_seconds >= 0.0) || !(p.fade_seconds <= 0.1 * p.seconds))
    throw setting_error("fade_seconds", "the fades must be zero or positive and at most a tenth of the sweep (" +
                                            base::format_si(0.1 * p.seconds, "s") + "), got " +
                                            base::format_number(p.fade_seconds * 1000.0) + " ms");
}

double sweep_rate_constant_s(const exp_sweep_plan& p) { return p.seconds / std::log(p.end_hz / p.start_hz); }

std::vector<double> exp_sweep_samples(const exp_sweep_plan& p) {
  validate(p);
  const auto n = static_cast<std::size_t>(std::llround(p.seconds * p.rate_hz));
  const long double L = sweep_rate_constant_s(p), f1 = p.start_hz, fs = p.rate_hz;
  const double a = base::ratio_from_db(p.level_dbfs);
  const auto fade = static_cast<std::size_t>(std::llround(p.fade_seconds * p.rate_hz));
  std::vector<double> x(n);
  for (std::size_t t = 0; t < n; ++t) {
    // Turns f1 L (exp(t/L) - 1), reduced to [0, 1) before the sine.
    const long double turns = f1 * L * std::expm1(static_cast<long double>(t) / fs / L);
    const double frac = static_cast<double>(turns - std::floor(turns));
    double g = 1.0;
    if (fade > 0 && t < fade) g = 0.5 - 0.5 * std::cos(std::numbers::pi * static_cast<double>(t) / static_cast<double>(fade));
    if (fade > 0 && n - 1 - t < fade)
      g = std::min(g, 0.5 - 0.5 * std::cos(std::numbers::pi * static_cast<double>(n - 1 - t) / static_cast<double>(fade)));
    x[t] = a * g * std::sin(2.0 * std::numbers::pi * frac);
  }
  return x;
}

double sweep_deconvolution::trusted_low_hz() const noexcept { return start_hz * std::numbers::sqrt2; }
double sweep_deconvolution::trusted_high_hz() const noexcept { return end_hz / third_octave; }
double sweep_deconvolution::harmonic_position(int n) const noexcept {
  const double size = static_cast<double>(h.size());
  double p = static_cast<double>(linear_index) - rate_constant_s * std::log(static_cast<double>(n)) * rate_hz;
  p = std::fmod(p, size);
  return p < 0 ? p + size : p;
}

sweep_deconvolution deconvolve_sweep(std::span<const double> y, std::span<const double> x, const exp_sweep_plan& plan) {
  validate(plan);
  if (y.size() < x.size())
    throw input_error("the recording holds " + std::to_string(y.size()) + " samples, fewer than the sweep's " +
                      std::to_string(x.size()) + ": it must hold the whole sweep");
  if (y.size() > 2 * max_sweep_frames)
    throw input_error("the recording holds " + std::to_string(y.size()) + " samples; a sweep's is read up to " +
                      std::to_string(2 * max_sweep_frames) + " (twice the longest sweep)");
  sweep_deconvolution d;
  d.rate_hz = plan.rate_hz;
  d.start_hz = plan.start_hz;
  d.end_hz = plan.end_hz;
  d.rate_constant_s = sweep_rate_constant_s(plan);
  d.sweep_seconds = plan.seconds;
  const auto guard = static_cast<std::size_t>(std::ceil(d.rate_constant_s * std::log(11.0) * plan.rate_hz));
  const std::size_t n = even_smooth_at_least(y.size() + x.size() + guard);
  const real_fft fft(n);
  std::vector<double> pad(n, 0.0);
  std::copy(x.begin(), x.end(), pad.begin());
  const std::vector<std::complex<double>> X = fft.forward(pad);
  std::fill(pad.begin(), pad.end(), 0.0);
  std::copy(y.begin(), y.end(), pad.begin());
  const std::vector<std::complex<double>> Y = fft.forward(pad);
  std::vector<std::complex<double>> full(n), out(n);
  const double df = plan.rate_hz / static_cast<double>(n);
  for (std::size_t k = 0; k < X.size(); ++k) {
    const double taper = band_taper(static_cast<double>(k) * df, plan.start_hz, plan.end_hz);
    const std::complex<double> v = taper > 0.0 && std::abs(X[k]) > 0.0 ? taper * Y[k] / X[k] : std::complex<double>{};
    full[k] = v;
    if (k > 0 && k < n - k) full[n - k] = std::conj(v);
  }
  kissfft<double>(n, true).transform(full.data(), out.data());
  d.h.resize(n);
  double peak = 0.0;
  for (std::size_t i = 0; i < n; ++i) {
    d.h[i] = out[i].real() / static_cast<double>(n);
    if (std::abs(d.h[i]) > peak) {
      peak = std::abs(d.h[i]);
      d.linear_index = i;
    }
  }
  if (!(peak > 0.0)) throw input_error("the recording holds no response to the sweep (silence in the sweep's band)");
  return d;
}

namespace {
double linear_before_samples(const sweep_deconvolution& d) {
  return std::min(0.5 * d.rate_constant_s * std::log(2.0), 0.25) * d.rate_hz;
}
double linear_after_samples(const sweep_deconvolution& d) { return std::min(d.sweep_seconds, 2.0) * d.rate_hz; }
}  // namespace

double linear_window_flat_samples(const sweep_deconvolution& d) noexcept { return 0.5 * linear_before_samples(d); }

std::vector<std::complex<double>> linear_response(const sweep_deconvolution& d, std::span<const double> f_hz) {
  return linear_response(d, f_hz, static_cast<double>(d.linear_index));
}

std::vector<std::complex<double>> linear_response(const sweep_deconvolution& d, std::span<const double> f_hz,
                                                  double latency_samples) {
  const double fs = d.rate_hz;
  const double centre = static_cast<double>(d.linear_index);
  std::vector<std::complex<double>> r;
  r.reserve(f_hz.size());
  // sum h w exp(-j w (i - latency)) = exp(-j w (centre - latency)) sum h w exp(-j w (i - centre)).
  for (const double f : f_hz)
    r.push_back(windowed_dtft(d.h, centre, linear_before_samples(d), linear_after_samples(d), f, fs) *
                std::polar(1.0, -2.0 * std::numbers::pi * f / fs * (centre - latency_samples)));
  return r;
}

std::vector<double> harmonic_ratio(const sweep_deconvolution& d, int n, std::span<const double> f_hz) {
  const double fs = d.rate_hz, L = d.rate_constant_s;
  const double centre = d.harmonic_position(n);
  // Halfway to the neighbours' windows: n + 1 lies L ln((n+1)/n) earlier, n - 1 later.
  const double before = 0.5 * L * std::log((n + 1.0) / n) * fs, after = 0.5 * L * std::log(n / (n - 1.0)) * fs;
  const std::vector<std::complex<double>> lin = linear_response(d, f_hz);
  std::vector<double> r;
  r.reserve(f_hz.size());
  for (std::size_t i = 0; i < f_hz.size(); ++i) {
    const double fo = n * f_hz[i];
    if (!(fo >= d.trusted_low_hz() && fo <= d.trusted_high_hz() && f_hz[i] >= d.trusted_low_hz())) {
      r.push_back(std::nan(""));
      continue;
    }
    r.push_back(std::abs(windowed_dtft(d.h, centre, before, after, fo, fs)) / std::abs(lin[i]));
  }
  return r;
}

}  // namespace pinchoff::dsp
