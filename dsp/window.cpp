#include "dsp/window.hpp"

#include <array>
#include <cmath>
#include <numbers>

#include "base/error.hpp"

namespace pinchoff::dsp {
namespace {

// Harris 1978, Table 1 / section V; Heinzel, Rüdiger & Schilling 2002, section C (flat-tops).
constexpr std::array<double, 1> rect_a{1.0};
constexpr std::array<double, 2> hann_a{0.5, 0.5};
constexpr std::array<double, 3> blackman_a{0.42, 0.5, 0.08};
constexpr std::array<double, 4> bh4_a{0.35875, 0.48829, 0.14128, 0.01168};
constexpr std::array<double, 5> hft95_a{1.0, 1.9383379, 1.3045202, 0.4028270, 0.0350665};
constexpr std::array<double, 5> hft90d_a{1.0, 1.942604, 1.340318, 0.440811, 0.043097};

double magnitude(std::span<const double> w, double f) { return std::abs(window_dtft(w, f)); }

// Golden-section search for the maximum of |W| on [a, b] (unimodal there).
double refine_max(std::span<const double> w, double a, double b) {
  const double g = (std::sqrt(5.0) - 1.0) / 2.0;
  double c = b - g * (b - a), d = a + g * (b - a);
  double fc = magnitude(w, c), fd = magnitude(w, d);
  while (b - a > 1e-6) {
    if (fc > fd) {
      b = d; d = c; fd = fc;
      c = b - g * (b - a); fc = magnitude(w, c);
    } else {
      a = c; c = d; fc = fd;
      d = a + g * (b - a); fd = magnitude(w, d);
    }
  }
  return std::max(fc, fd);
}

}  // namespace

std::span<const double> cosine_coefficients(window_kind kind) noexcept {
  switch (kind) {
    case window_kind::rectangular: return rect_a;
    case window_kind::hann: return hann_a;
    case window_kind::blackman: return blackman_a;
    case window_kind::blackman_harris_4: return bh4_a;
    case window_kind::hft95: return hft95_a;
    case window_kind::hft90d: return hft90d_a;
  }
  return rect_a;
}

std::string_view window_name(window_kind kind) noexcept {
  switch (kind) {
    case window_kind::rectangular: return "rectangular";
    case window_kind::hann: return "hann";
    case window_kind::blackman: return "blackman";
    case window_kind::blackman_harris_4: return "blackman-harris-4";
    case window_kind::hft95: return "hft95";
    case window_kind::hft90d: return "hft90d";
  }
  return "rectangular";
}

int main_lobe_half_width_bins(window_kind kind) noexcept {
  return static_cast<int>(cosine_coefficients(kind).size());
}

std::vector<double> make_window(window_kind kind, std::size_t n) {
  if (n == 0) throw input_error("a window needs at least 1 sample");
  const std::span<const double> a = cosine_coefficients(kind);
  std::vector<double> w(n);
  for (std::size_t t = 0; t < n; ++t) {
    double s = 0.0;
    for (std::size_t k = 0; k < a.size(); ++k) {
      // Phase k t / n reduced to [0, 1) turns in integers, so large n loses no precision.
      const double turns = static_cast<double>((k * t) % n) / static_cast<double>(n);
      s += (k % 2 == 0 ? 1.0 : -1.0) * a[k] * std::cos(2.0 * std::numbers::pi * turns);
    }
    w[t] = s;
  }
  return w;
}

double coherent_gain(std::span<const double> w) {
  double s = 0.0;
  for (double v : w) s += v;
  return s / static_cast<double>(w.size());
}

double enbw_bins(std::span<const double> w) {
  double s = 0.0, s2 = 0.0;
  for (double v : w) {
    s += v;
    s2 += v * v;
  }
  return static_cast<double>(w.size()) * s2 / (s * s);
}

std::complex<double> window_dtft(std::span<const double> w, double freq_bins) {
  // Direct sum; the phasor is recomputed every 64 samples to stop rotation error growing.
  const double step = -2.0 * std::numbers::pi * freq_bins / static_cast<double>(w.size());
  const std::complex<double> rot = std::polar(1.0, step);
  std::complex<double> acc = 0.0, z = 1.0;
  for (std::size_t t = 0; t < w.size(); ++t) {
    if (t % 64 == 0) z = std::polar(1.0, step * static_cast<double>(t));
    acc += w[t] * z;
    z *= rot;
  }
  return acc;
}

double scallop_loss_db(std::span<const double> w) {
  return -20.0 * std::log10(std::abs(window_dtft(w, 0.5)) / std::abs(window_dtft(w, 0.0)));
}

double highest_sidelobe_db(std::span<const double> w) {
  if (w.size() < 8) throw input_error("sidelobe search needs a window of at least 8 samples");
  const double h = 1.0 / 32.0;
  const double limit = static_cast<double>(w.size()) / 2.0;
  const double peak = magnitude(w, 0.0);
  // Main lobe: flat-tops rise slightly off centre, so start the walk where |W| has fallen
  // to half, then walk while it keeps falling; the first local minimum is the lobe's edge.
  double f = h;
  while (f < limit && magnitude(w, f) > 0.5 * peak) f += h;
  double prev = magnitude(w, f), cur = magnitude(w, f + h);
  f += h;
  while (f + h <= limit && cur <= prev) {
    prev = cur;
    cur = magnitude(w, f + h);
    f += h;
  }
  // Sidelobes: refine every grid maximum that could be the highest (a grid sample of a lobe
  // is within a few percent of its true peak at 1/32 bin, so 0.5 is a safe margin).
  double highest = 0.0;
  while (f + h <= limit) {
    const double next = magnitude(w, f + h);
    if (cur >= prev && cur >= next && cur > 0.5 * highest) highest = std::max(highest, refine_max(w, f - h, f + h));
    prev = cur;
    cur = next;
    f += h;
  }
  return 20.0 * std::log10(highest / peak);
}

double worst_amplitude_error_db(std::span<const double> w) {
  const double peak = std::abs(window_dtft(w, 0.0));
  double worst = 0.0;
  for (int i = 1; i <= 1000; ++i) {
    const double e = 20.0 * std::log10(std::abs(window_dtft(w, 0.5 * i / 1000.0)) / peak);
    if (std::abs(e) > std::abs(worst)) worst = e;
  }
  return worst;
}

}  // namespace pinchoff::dsp
