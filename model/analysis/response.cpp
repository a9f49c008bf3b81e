#include "model/analysis/response.hpp"

#include <cmath>
#include <numbers>

#include "model/analysis/small_signal.hpp"

namespace pinchoff::model {
namespace {

double gain_mag2(const network& net, std::span<const jfet_linear> lin, double f_hz, int node) {
  ac_setup g;
  g.midband = false;
  g.s = {0.0, 2.0 * std::numbers::pi * f_hz};
  g.generator_v = 1.0;
  return std::norm(solve_small_signal(net, lin, g)[node]);
}
double gain_mag2(const network& net, std::span<const jfet_linear> lin, double f_hz) {
  return gain_mag2(net, lin, f_hz, net.output_node);
}

// Where e(log f) changes sign between a and b (e(a) = ea), by bisection to 1e-9 in log f.
template <class E>
double bisect_log(E&& e, double a, double b, double ea) {
  while (b - a > 1e-9) {
    const double m = 0.5 * (a + b);
    const double em = e(m);
    if ((em < 0) == (ea < 0)) {
      a = m;
      ea = em;
    } else {
      b = m;
    }
  }
  return std::exp(0.5 * (a + b));
}

}  // namespace

response_point response_at(const network& net, const operating_point& op, double f_hz) {
  const std::vector<jfet_linear> lin = linearise_all(net, op);
  const std::complex<double> s{0.0, 2.0 * std::numbers::pi * f_hz};
  ac_setup g;
  g.midband = false;
  g.s = s;
  g.generator_v = 1.0;
  ac_setup z = g;
  z.generator_present = false;
  z.inject_a = net.input_node;
  // The stage alone: a pickup's own capacitance across the input is the source's, not the stage's.
  for (std::size_t k = 0; k < net.capacitors.size(); ++k)
    if (net.capacitors[k].role == cap_role::pickup_load) z.removed_cap = static_cast<int>(k);
  return {f_hz, solve_small_signal(net, lin, g)[net.output_node], solve_small_signal(net, lin, z)[net.input_node]};
}

std::optional<resonance_figures> find_resonance(const network& net, const operating_point& op, int node) {
  if (net.inductors.empty()) return std::nullopt;
  const std::vector<jfet_linear> lin = linearise_all(net, op);
  ac_setup mid;
  mid.generator_v = 1.0;
  mid.small_caps_hz = net.midband_hz;
  const double mid2 = std::norm(solve_small_signal(net, lin, mid)[node]);
  auto g2 = [&](double log_f) { return gain_mag2(net, lin, std::exp(log_f), node); };

  // The largest |gain| on a grid of 40 points a decade over the analysis band, then golden-
  // section search (Kiefer 1953) in log f between its neighbours.
  const double lo = std::log(lowest_analysis_hz), hi = std::log(highest_analysis_hz);
  const double step = std::log(10.0) / 40.0;
  const int n = static_cast<int>((hi - lo) / step);
  int best = 0;
  double best_g2 = -1.0;
  for (int k = 0; k <= n; ++k) {
    const double v = g2(lo + k * step);
    if (v > best_g2) {
      best_g2 = v;
      best = k;
    }
  }
  if (!(best_g2 > mid2 * (1.0 + 1e-9))) return std::nullopt;
  double a = lo + std::max(best - 1, 0) * step, b = lo + std::min(best + 1, n) * step;
  const double r = 0.5 * (std::sqrt(5.0) - 1.0);
  double c = b - r * (b - a), d = a + r * (b - a), gc = g2(c), gd = g2(d);
  while (b - a > 1e-10) {
    if (gc > gd) {
      b = d;
      d = c;
      gd = gc;
      c = b - r * (b - a);
      gc = g2(c);
    } else {
      a = c;
      c = d;
      gc = gd;
      d = a + r * (b - a);
      gd = g2(d);
    }
  }
  const double peak_log_f = 0.5 * (a + b);
  resonance_figures res;
  res.frequency_hz = std::exp(peak_log_f);
  const double peak2 = g2(peak_log_f);
  res.peak_gain = std::sqrt(peak2);
  res.peak_db = 10.0 * std::log10(peak2 / mid2);

  // Half power either side: down from the peak until the gain falls through peak^2 / 2 (or,
  // below the peak, gets back to its mid-band value first: no lower point).
  const double half = 0.5 * peak2;
  auto e = [&](double log_f) { return g2(log_f) - half; };
  for (double f = peak_log_f, prev = peak_log_f; f > lo;) {
    prev = f;
    f = std::max(f - step / 4.0, lo);
    const double v = g2(f);
    if (v < half) {
      res.below_hz = bisect_log(e, f, prev, v - half);
      break;
    }
    if (v <= mid2) break;
  }
  for (double f = peak_log_f, prev = peak_log_f; f < hi;) {
    prev = f;
    f = std::min(f + step / 4.0, hi);
    const double v = g2(f);
    if (v < half) {
      res.above_hz = bisect_log(e, prev, f, peak2 - half);
      break;
    }
  }
  return res;
}

input_figures analyse_input(const network& net, const operating_point& op) {
  const std::vector<jfet_linear> lin = linearise_all(net, op);
  constexpr double f_hz = 1000.0;
  ac_setup g;
  g.midband = false;
  g.s = {0.0, 2.0 * std::numbers::pi * f_hz};
  g.generator_v = 1.0;
  const Eigen::VectorXcd v = solve_small_signal(net, lin, g);
  const net_jfet& q = net.jfet();
  input_figures in;
  const std::complex<double> vg = v[q.gate];
  if (std::abs(vg) > 0.0)
    in.capacitance_f = (q.device.cgs_f * (1.0 - v[q.source] / vg) + q.device.cgd_f * (1.0 - v[q.drain] / vg)).real();
  in.z_1khz_ohm = response_at(net, op, f_hz).zin_ohm;
  in.z_10khz_ohm = response_at(net, op, 10.0 * f_hz).zin_ohm;
  in.resonance = find_resonance(net, op, net.input_node);
  return in;
}

response_result analyse_response(const network& net, const operating_point& op, double f_lo_hz, double f_hi_hz,
                                 int points) {
  const std::vector<jfet_linear> lin = linearise_all(net, op);
  response_result r;
  ac_setup mid;
  mid.generator_v = 1.0;
  mid.small_caps_hz = net.midband_hz;  // a capsule network: the gain at 1 kHz, the capsule's divider included
  const std::complex<double> g_mid = solve_small_signal(net, lin, mid)[net.output_node];
  r.midband_gain = g_mid.real() < 0 ? -std::abs(g_mid) : std::abs(g_mid);

  for (int k = 0; k < points; ++k) {
    const double f = f_lo_hz * std::pow(f_hi_hz / f_lo_hz, double(k) / (points - 1));
    r.points.push_back(response_at(net, op, f));
  }

  // -3 dB crossings: |H|^2 = |H_mid|^2 / 2 (half power).
  const double half = 0.5 * r.midband_gain * r.midband_gain;
  const double lo = lowest_analysis_hz, hi = highest_analysis_hz;
  constexpr int per_decade = 40;
  const int n = static_cast<int>(std::log10(hi / lo) * per_decade);
  double f_prev = lo, e_prev = gain_mag2(net, lin, lo) - half;
  for (int k = 1; k <= n; ++k) {
    const double f = lo * std::pow(10.0, double(k) / per_decade);
    const double e = gain_mag2(net, lin, f) - half;
    if ((e < 0) != (e_prev < 0)) {
      const double fc = bisect_log([&](double m) { return gain_mag2(net, lin, std::exp(m)) - half; }, std::log(f_prev),
                                   std::log(f), e_prev);
      r.corners.push_back({fc, e_prev < 0});
    }
    f_prev = f;
    e_prev = e;
  }
  r.resonance = find_resonance(net, op, net.output_node);
  return r;
}

}  // namespace pinchoff::model
