#include "model/device/jfet.hpp"

#include <cmath>
#include <limits>

namespace pinchoff::model {
namespace {

// Forward channel (vds >= 0) of the level-1 model.
channel_eval forward_channel(const jfet_params& p, double vgs, double vds) noexcept {
  const double beta = beta_of(p);
  const double vgst = vgs - p.vp_v;
  if (vgst <= 0.0) return {0.0, 0.0, 0.0};
  const double clm = 1.0 + p.lambda_per_v * vds;
  if (vds < vgst) {
    // Triode: id = beta vds (2 vgst - vds)(1 + lambda vds)
    const double core = vds * (2.0 * vgst - vds);
    return {beta * core * clm, 2.0 * beta * vds * clm,
            beta * ((2.0 * vgst - 2.0 * vds) * clm + core * p.lambda_per_v)};
  }
  // Saturation: id = beta vgst^2 (1 + lambda vds)
  return {beta * vgst * vgst * clm, 2.0 * beta * vgst * clm, beta * vgst * vgst * p.lambda_per_v};
}

constexpr double exp_limit_arg = 80.0;  // exp(80) ~ 5.5e34: beyond, continue linearly

}  // namespace

channel_eval drain_current(const jfet_params& p, double vgs_v, double vds_v) noexcept {
  if (vds_v >= 0.0) return forward_channel(p, vgs_v, vds_v);
  // Inverse mode: drain and source swap roles. With g = vgs - vds and w = -vds,
  // id = -F(g, w); d id/d vgs = -F_g; d id/d vds = F_g + F_w.
  const channel_eval f = forward_channel(p, vgs_v - vds_v, -vds_v);
  return {-f.id_a, -f.gm_s, f.gm_s + f.gds_s};
}

junction_eval junction_current(const jfet_params& p, double v, double vt_v) noexcept {
  if (p.is_a <= 0.0) return {0.0, 0.0};
  const double nvt = p.n * vt_v;
  const double arg = v / nvt;
  if (arg > exp_limit_arg) {
    const double e = std::exp(exp_limit_arg);
    return {p.is_a * (e * (1.0 + arg - exp_limit_arg) - 1.0), p.is_a * e / nvt};
  }
  const double e = std::exp(arg);
  return {p.is_a * (e - 1.0), p.is_a * e / nvt};
}

double thermal_voltage(double temperature_k) noexcept {
  constexpr double k_boltzmann = 1.380649e-23;   // J/K, exact (SI 2019)
  constexpr double q_electron = 1.602176634e-19;  // C, exact (SI 2019)
  return k_boltzmann * temperature_k / q_electron;
}

jfet_region region_of(const jfet_params& p, double vgs_v, double vds_v) noexcept {
  double vgs = vgs_v, vds = vds_v;
  if (vds < 0.0) {
    vgs = vgs_v - vds_v;
    vds = -vds_v;
  }
  const double vgst = vgs - p.vp_v;
  if (vgst <= 0.0) return jfet_region::cutoff;
  return vds < vgst ? jfet_region::triode : jfet_region::saturation;
}

const char* region_name(jfet_region r) noexcept {
  switch (r) {
    case jfet_region::cutoff: return "cutoff";
    case jfet_region::triode: return "triode";
    case jfet_region::saturation: return "saturation";
  }
  return "cutoff";
}

double critical_voltage(const jfet_params& p, double vt_v) noexcept {
  if (p.is_a <= 0.0) return std::numeric_limits<double>::infinity();
  const double nvt = p.n * vt_v;
  return nvt * std::log(nvt / (std::sqrt(2.0) * p.is_a));
}

double limit_junction(double v_new, double v_old, double nvt, double vcrit) noexcept {
  // Nagel 1975 (SPICE2 pnjlim): above vcrit, a large forward step is replaced by the
  // logarithm of the step so the exponential cannot overflow or overshoot.
  if (v_new > vcrit && std::fabs(v_new - v_old) > 2.0 * nvt) {
    if (v_old > 0.0) {
      const double arg = 1.0 + (v_new - v_old) / nvt;
      return arg > 0.0 ? v_old + nvt * std::log(arg) : vcrit;
    }
    return nvt * std::log(v_new / nvt);
  }
  return v_new;
}

}  // namespace pinchoff::model
