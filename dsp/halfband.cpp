#include "dsp/halfband.hpp"

#include <algorithm>
#include <cmath>
#include <cstring>
#include <numbers>
#include <string>

#include "base/error.hpp"

namespace pinchoff::dsp {

double bessel_i0(double x) noexcept {
  // Terms t_k = ((x/2)^k / k!)^2 are all positive, so the sum has no cancellation; stop
  // when a term no longer changes it.
  const double q = 0.25 * x * x;
  double term = 1.0;
  double sum = 1.0;
  for (int k = 1; k < 500; ++k) {
    term *= q / (static_cast<double>(k) * static_cast<double>(k));
    sum += term;
    if (term < sum * 1e-17) break;
  }
  return sum;
}

double kaiser_beta(double attenuation_db) noexcept {
  const double a = attenuation_db;
  if (a > 50.0) return 0.1102 * (a - 8.7);
  if (a >= 21.0) return 0.5842 * std::pow(a - 21.0, 0.4) + 0.07886 * (a - 21.0);
  return 0.0;
}

int kaiser_length_estimate(double attenuation_db, double transition_width) noexcept {
  return static_cast<int>(std::ceil((attenuation_db - 7.95) / (14.36 * transition_width) + 1.0));
}

double halfband_amplitude(std::span<const double> side_taps, double f) noexcept {
  // cos((2i+1) t) by the three-term recurrence c_{i+1} = 2 cos(2t) c_i - c_{i-1}, with
  // c_{-1} = c_0 = cos t. Its rounding error grows at most like K^2 eps near t = 0 or pi,
  // about 1e-11 for K = 300: far below the 1e-6 (120 dB) scale it is used at.
  const double t = 2.0 * std::numbers::pi * f;
  const double two_cos_2t = 2.0 * std::cos(2.0 * t);
  double c_prev = std::cos(t);
  double c = c_prev;
  double sum = 0.0;
  for (const double g : side_taps) {
    sum += g * c;
    const double next = two_cos_2t * c - c_prev;
    c_prev = c;
    c = next;
  }
  return 0.5 + 2.0 * sum;
}

namespace {

std::vector<double> kaiser_halfband_taps(int k, double beta) {
  // Ideal half-band h(d) = sin(pi d / 2) / (pi d) times the Kaiser window of length 4K-1,
  // w(d) = I0(beta sqrt(1 - (d/D)^2)) / I0(beta), D = 2K-1 (Kaiser 1974).
  const double d_max = 2.0 * k - 1.0;
  const double i0_beta = bessel_i0(beta);
  std::vector<double> g(static_cast<std::size_t>(k));
  for (int i = 0; i < k; ++i) {
    const double d = 2.0 * i + 1.0;
    const double r = d / d_max;
    const double w = bessel_i0(beta * std::sqrt(std::max(0.0, 1.0 - r * r))) / i0_beta;
    const double sign = (i % 2 == 0) ? 1.0 : -1.0;
    g[static_cast<std::size_t>(i)] = w * sign / (std::numbers::pi * d);
  }
  return g;
}

// Largest |H| over [edge, 1/2]: a grid of at least 32 points per ripple (the highest term
// has 2K-1 cycles per unit frequency, so a ripple is about 1/(2(2K-1)) wide), which reads
// a peak low by at most about (pi/32)^2 / 2, 0.04 dB.
double stopband_peak(std::span<const double> g, double edge) {
  const double width = 0.5 - edge;
  const double ripples = width * 2.0 * (2.0 * static_cast<double>(g.size()) - 1.0);
  const int points = std::max(1024, static_cast<int>(std::ceil(32.0 * ripples)));
  double peak = 0.0;
  for (int j = 0; j <= points; ++j) {
    const double f = edge + width * static_cast<double>(j) / points;
    peak = std::max(peak, std::abs(halfband_amplitude(g, f)));
  }
  return peak;
}

}  // namespace

halfband_design design_halfband(double stopband_edge, double attenuation_db) {
  if (!(stopband_edge > 0.25 && stopband_edge < 0.5))
    throw input_error("half-band stopband edge " + std::to_string(stopband_edge) +
                      " (of the sample rate) must lie between 0.25 and 0.5");
  if (!(attenuation_db >= 20.0 && attenuation_db <= 200.0))
    throw input_error("half-band attenuation " + std::to_string(attenuation_db) +
                      " dB must lie between 20 and 200 dB");

  const double limit = std::pow(10.0, -attenuation_db / 20.0);
  const double transition = 2.0 * stopband_edge - 0.5;  // stopband edge minus passband edge
  halfband_design best;
  for (int extra_db = 0; extra_db <= 6; ++extra_db) {
    const double design_db = attenuation_db + extra_db;
    const double beta = kaiser_beta(design_db);
    // Length 4K-1 >= N.
    const int n_est = kaiser_length_estimate(design_db, transition);
    const int k_est = std::max(1, (n_est + 1 + 3) / 4);
    const int k_first = std::max(1, k_est - 3);
    const int k_last = best.side_taps.empty() ? k_est + 12 : best.side_count() - 1;
    for (int k = k_first; k <= k_last; ++k) {
      std::vector<double> g = kaiser_halfband_taps(k, beta);
      const double peak = stopband_peak(g, stopband_edge);
      if (peak <= limit) {
        best.side_taps = std::move(g);
        best.kaiser_beta = beta;
        best.stopband_edge = stopband_edge;
        best.stopband_peak_db = 20.0 * std::log10(peak);
        break;
      }
    }
  }
  if (best.side_taps.empty())
    throw internal_error("no Kaiser half-band met " + std::to_string(attenuation_db) +
                         " dB with stopband edge " + std::to_string(stopband_edge));
  return best;
}

// Both processors keep a linear buffer: the history a window needs, then the current piece
// of input, and move the history to the front after each piece. An output is the symmetric
// sum sum_i t_i (a[i] + b[-i]) over the K side taps, formed for `lanes` neighbouring outputs
// at once: the partial sums stay in registers while the taps run (the lane loop is
// vectorised), so each tap costs two loads, an add and a multiply-add per output, with no
// load and store of an accumulator array. Every output's sum is formed in the same order
// (tap 0 first, from 0.0) whatever the piece boundaries or the lane grouping, so results do
// not depend on block sizes.

namespace {
constexpr std::size_t piece = 256;  // samples of the lower rate per pass
constexpr std::size_t lanes = 8;    // outputs summed together (four SSE2 registers)

struct block_sums {
  double v[lanes];
};

// Two doubles in one register: the GCC/Clang vector extension, which both compile to SSE2 on
// x86-64 and to NEON on AArch64 (written out, because the compilers vectorise the tap loop
// of the plain form instead and keep the sums in memory). Lane-wise IEEE operations: the
// same results as the scalar loop.
using vec2 = double __attribute__((vector_size(16)));

inline vec2 load2(const double* p) noexcept {
  vec2 v;
  std::memcpy(&v, p, sizeof v);
  return v;
}

// For j < lanes: sum_i taps[i] (a[j + i] + b[j - i]), i = 0 .. k-1.
inline block_sums symmetric_sums(const double* taps, std::size_t k, const double* a, const double* b) noexcept {
  static_assert(lanes == 8);
  vec2 s0{0.0, 0.0}, s1{0.0, 0.0}, s2{0.0, 0.0}, s3{0.0, 0.0};
  for (std::size_t i = 0; i < k; ++i) {
    const vec2 t{taps[i], taps[i]};
    const double* ai = a + i;
    const double* bi = b - i;
    s0 += t * (load2(ai) + load2(bi));
    s1 += t * (load2(ai + 2) + load2(bi + 2));
    s2 += t * (load2(ai + 4) + load2(bi + 4));
    s3 += t * (load2(ai + 6) + load2(bi + 6));
  }
  block_sums s;
  std::memcpy(s.v, &s0, sizeof s0);
  std::memcpy(s.v + 2, &s1, sizeof s1);
  std::memcpy(s.v + 4, &s2, sizeof s2);
  std::memcpy(s.v + 6, &s3, sizeof s3);
  return s;
}

inline double symmetric_sum(const double* taps, std::size_t k, const double* a, const double* b) noexcept {
  double s = 0.0;
  for (std::size_t i = 0; i < k; ++i) s += taps[i] * (a[i] + b[-static_cast<std::ptrdiff_t>(i)]);
  return s;
}
}  // namespace

halfband_interpolator::halfband_interpolator(const halfband_design& design)
    : taps_(design.side_taps),
      line_(2 * design.side_taps.size() - 1 + piece, 0.0),
      half_(design.side_taps.size()) {
  for (double& t : taps_) t *= 2.0;
}

void halfband_interpolator::reset() noexcept { std::fill(line_.begin(), line_.end(), 0.0); }

void halfband_interpolator::process(std::span<const double> in, std::span<double> out) noexcept {
  const std::size_t k = half_;
  const std::size_t history = 2 * k - 1;
  for (std::size_t start = 0; start < in.size(); start += piece) {
    const std::size_t len = std::min(piece, in.size() - start);
    std::copy_n(in.data() + start, len, line_.data() + history);
    // Window of input n: w = line_ + n, w[j] = x[n - 2K + 1 + j]. With the causal filter
    // h[t] = h(t - (2K-1)):
    //   y[2n]   = 2 sum_i g_i (x[n-K+1+i] + x[n-K-i]) = sum_i taps_i (w[K+i] + w[K-1-i])
    //   y[2n+1] = 2 h(0) x[n-K+1] = w[K]
    const double* w = line_.data();
    double* y = out.data() + 2 * start;
    std::size_t n = 0;
    for (; n + lanes <= len; n += lanes) {
      const block_sums s = symmetric_sums(taps_.data(), k, w + k + n, w + k - 1 + n);
      for (std::size_t j = 0; j < lanes; ++j) {
        y[2 * (n + j)] = s.v[j];
        y[2 * (n + j) + 1] = w[n + j + k];
      }
    }
    for (; n < len; ++n) {
      y[2 * n] = symmetric_sum(taps_.data(), k, w + k + n, w + k - 1 + n);
      y[2 * n + 1] = w[n + k];
    }
    std::copy_n(line_.data() + len, history, line_.data());
  }
}

halfband_decimator::halfband_decimator(const halfband_design& design)
    : taps_(design.side_taps),
      even_(2 * design.side_taps.size() - 1 + piece, 0.0),
      odd_(design.side_taps.size() + piece, 0.0),
      half_(design.side_taps.size()) {}

void halfband_decimator::reset() noexcept {
  std::fill(even_.begin(), even_.end(), 0.0);
  std::fill(odd_.begin(), odd_.end(), 0.0);
}

void halfband_decimator::process(std::span<const double> in, std::span<double> out) noexcept {
  const std::size_t k = half_;
  const std::size_t even_history = 2 * k - 1;
  const std::size_t odd_history = k;
  for (std::size_t start = 0; start < out.size(); start += piece) {
    const std::size_t len = std::min(piece, out.size() - start);
    const double* v = in.data() + 2 * start;
    double* e = even_.data();
    double* o = odd_.data();
    for (std::size_t n = 0; n < len; ++n) {
      e[even_history + n] = v[2 * n];
      o[odd_history + n] = v[2 * n + 1];
    }
    // e + n is the window of output n: e[n + j] = v[2(n - 2K + 1 + j)]; o[n] = v[2(n - K) + 1].
    // With h[t] = h(t - (2K-1)):
    //   y[n] = h(0) v[2n-2K+1] + sum_i g_i (v[2(n-K+1+i)] + v[2(n-K-i)])
    //        = o[n] / 2 + sum_i g_i (e[n+K+i] + e[n+K-1-i])
    double* y = out.data() + start;
    std::size_t n = 0;
    for (; n + lanes <= len; n += lanes) {
      const block_sums s = symmetric_sums(taps_.data(), k, e + k + n, e + k - 1 + n);
      for (std::size_t j = 0; j < lanes; ++j) y[n + j] = 0.5 * o[n + j] + s.v[j];
    }
    for (; n < len; ++n) y[n] = 0.5 * o[n] + symmetric_sum(taps_.data(), k, e + k + n, e + k - 1 + n);
    std::copy_n(e + len, even_history, e);
    std::copy_n(o + len, odd_history, o);
  }
}

}  // namespace pinchoff::dsp
