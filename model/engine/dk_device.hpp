#pragma once
// The JFET of model/device/jfet.hpp, evaluated for the per-sample loop of the DK engine: the same
// equations (Shichman–Hodges square law, SPICE2 level-1 JFET, with the exponential gate
// junctions and their linear continuation beyond exp(80)), inlined, with the parameter
// arithmetic done once. Tests check it against drain_current() / junction_current().
//
// One shortcut, exact in double precision: where a junction is so far reverse biased that
// exp(v / (n Vt)) < 2^-54, is (exp - 1) rounds to exactly -is, so the exponential is not
// evaluated; its conductance (below 1e-27 S for is = 1e-14 A) is then taken as 0, which only
// touches the Newton Jacobian, never the solution. A user of these functions may move the
// threshold up (device_consts::skip_arg) if it bounds what that leaves out: below skip_arg
// the current differs from -is by at most is exp(skip_arg) (the DK engine adds that to its
// acceptance bound).
#include <cmath>
#include <limits>

#include "model/device/jfet.hpp"

namespace pinchoff::model::detail {

// exp(-38) = 3.1e-17 < 2^-54: (exp - 1) rounds to exactly -1 below this argument.
inline constexpr double junction_deep_reverse = -38.0;

struct device_consts {
  double beta{};      ///< A/V^2
  double vto_v{};     ///< < 0 (n-channel frame)
  double lambda{};    ///< 1/V
  double is_a{};      ///< A (0: no junction current)
  double leak_a{};    ///< the gate's constant reverse leakage, taken from igs (A)
  double nvt_v{};     ///< n Vt
  double inv_nvt{};   ///< 1 / (n Vt)
  double vcrit_v{};   ///< pnjlim critical voltage (infinite when is = 0)
  /// Below this v / (n Vt) a junction is taken as -is with no conductance; the default is
  /// exact in double precision (see above).
  double skip_arg{junction_deep_reverse};

  static device_consts of(const jfet_params& p, double vt_v) noexcept {
    device_consts d;
    d.beta = beta_of(p);
    d.vto_v = p.vp_v;
    d.lambda = p.lambda_per_v;
    d.is_a = p.is_a > 0.0 ? p.is_a : 0.0;
    d.leak_a = p.gate_leakage_a;
    d.nvt_v = p.n * vt_v;
    d.inv_nvt = 1.0 / d.nvt_v;
    d.vcrit_v = critical_voltage(p, vt_v);
    return d;
  }
};

/// Currents and derivatives at one port point (vgs, vds), network (n-channel) frame.
struct port_currents {
  double igs_a, igd_a, id_a;            ///< gate->source, gate->drain, drain->source
  double ggs_s, ggd_s, gm_s, gds_s;     ///< d igs/d vgs, d igd/d vgd, d id/d vgs, d id/d vds
};

// Same constant as model/device/jfet.cpp: beyond exp(80) the junction current is continued linearly.
inline constexpr double junction_exp_limit = 80.0;

inline void junction(const device_consts& d, double v, double& i, double& g) noexcept {
  const double arg = v * d.inv_nvt;
  if (arg < d.skip_arg) {
    i = -d.is_a;
    g = 0.0;
    return;
  }
  if (arg > junction_exp_limit) {
    const double e = std::exp(junction_exp_limit);
    i = d.is_a * (e * (1.0 + arg - junction_exp_limit) - 1.0);
    g = d.is_a * e * d.inv_nvt;
    return;
  }
  const double e = std::exp(arg);
  i = d.is_a * (e - 1.0);
  g = d.is_a * e * d.inv_nvt;
}

// Forward channel (vds >= 0); writes id, gm, gds.
inline void forward_channel(const device_consts& d, double vgs, double vds, double& id, double& gm,
                            double& gds) noexcept {
  const double vgst = vgs - d.vto_v;
  if (vgst <= 0.0) {
    id = gm = gds = 0.0;
    return;
  }
  const double clm = 1.0 + d.lambda * vds;
  if (vds < vgst) {
    const double core = vds * (2.0 * vgst - vds);
    id = d.beta * core * clm;
    gm = 2.0 * d.beta * vds * clm;
    gds = d.beta * ((2.0 * vgst - 2.0 * vds) * clm + core * d.lambda);
    return;
  }
  id = d.beta * vgst * vgst * clm;
  gm = 2.0 * d.beta * vgst * clm;
  gds = d.beta * vgst * vgst * d.lambda;
}

/// Everything the DK Newton needs at (vgs, vds).
inline port_currents evaluate_ports(const device_consts& d, double vgs, double vds) noexcept {
  port_currents c;
  junction(d, vgs, c.igs_a, c.ggs_s);
  c.igs_a -= d.leak_a;  // gate_source_current(): the constant leakage beside the junction
  junction(d, vgs - vds, c.igd_a, c.ggd_s);
  if (vds >= 0.0) {
    forward_channel(d, vgs, vds, c.id_a, c.gm_s, c.gds_s);
  } else {
    // Inverse mode: id = -F(vgs - vds, -vds); d/dvgs = -F_g; d/dvds = F_g + F_w.
    double f, fg, fw;
    forward_channel(d, vgs - vds, -vds, f, fg, fw);
    c.id_a = -f;
    c.gm_s = -fg;
    c.gds_s = fg + fw;
  }
  return c;
}

/// The channel current alone at (vgs, vds), network frame: the id_a of evaluate_ports()
/// (the same operations, so the same bits), without the junction exponentials. The Newton
/// acceptance uses it to get the channel's linearisation error exactly.
inline double channel_current(const device_consts& d, double vgs, double vds) noexcept {
  const bool inverse = vds < 0.0;
  const double g = inverse ? vgs - vds : vgs;
  const double w = inverse ? -vds : vds;
  const double vgst = g - d.vto_v;
  if (vgst <= 0.0) return 0.0;
  const double clm = 1.0 + d.lambda * w;
  const double f = w < vgst ? d.beta * (w * (2.0 * vgst - w)) * clm : d.beta * vgst * vgst * clm;
  return inverse ? -f : f;
}

}  // namespace pinchoff::model::detail
