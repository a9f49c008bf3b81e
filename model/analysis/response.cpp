#include "model/analysis/response.hpp"

#include <cmath>
#include <numbers>

#include "model/analysis/small_signal.hpp"

namespace pinchoff::model {
namespace {

double gain_mag2(const network& net, std::span<const jfet_linear> lin, double f_hz) {
  ac_setup g;
  g.midband = false;
  g.s = {0.0, 2.0 * std::numbers::pi * f_hz};
  g.generator_v = 1.0;
  return std::norm(solve_small_signal(net, lin, g)[net.output_node]);
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
  return {f_hz, solve_small_signal(net, lin, g)[net.output_node], solve_small_signal(net, lin, z)[net.input_node]};
}

response_result analyse_response(const network& net, const operating_point& op, double f_lo_hz, double f_hi_hz,
                                 int points) {
  const std::vector<jfet_linear> lin = linearise_all(net, op);
  response_result r;
  ac_setup mid;
  mid.generator_v = 1.0;
  r.midband_gain = solve_small_signal(net, lin, mid)[net.output_node].real();

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
      double a = std::log(f_prev), b = std::log(f), ea = e_prev;
      while (b - a > 1e-9) {
        const double m = 0.5 * (a + b);
        const double em = gain_mag2(net, lin, std::exp(m)) - half;
        if ((em < 0) == (ea < 0)) {
          a = m;
          ea = em;
        } else {
          b = m;
        }
      }
      r.corners.push_back({std::exp(0.5 * (a + b)), e_prev < 0});
    }
    f_prev = f;
    e_prev = e;
  }
  return r;
}

}  // namespace pinchoff::model
