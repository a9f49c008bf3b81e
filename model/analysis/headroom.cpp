#include "model/analysis/headroom.hpp"

#include <algorithm>
#include <cmath>
#include <vector>

#include "base/error.hpp"

namespace pinchoff::model {
namespace {

struct probe {
  bool ok{false};
  double margin{};             // > 0 inside the clean region
  swing_limit_kind kind{swing_limit_kind::none};
  double output_v{};           // load voltage (network frame)
};

probe evaluate(const network& net, std::span<const cap_treatment> caps, double u, Eigen::VectorXd& x) {
  probe p;
  const newton_result r = solve_point(net, caps, u, x);
  if (!r.converged) {
    p.kind = swing_limit_kind::no_convergence;
    return p;
  }
  p.ok = true;
  const double vd = node_v(x, net.jfet().drain), vg = node_v(x, net.jfet().gate), vs = node_v(x, net.jfet().source);
  const double vgs = vg - vs, vds = vd - vs;
  const double scale = std::max(1.0, std::fabs(net.jfet().device.vp_v));
  const double m_triode = (vds - (vgs - net.jfet().device.vp_v)) / scale;
  const double m_cutoff = (vgs - net.jfet().device.vp_v) / scale;
  const double m_gate = -vgs / scale;
  p.margin = m_triode;
  p.kind = swing_limit_kind::triode;
  if (m_cutoff < p.margin) {
    p.margin = m_cutoff;
    p.kind = swing_limit_kind::cutoff;
  }
  if (m_gate < p.margin) {
    p.margin = m_gate;
    p.kind = swing_limit_kind::gate_forward;
  }
  p.output_v = node_v(x, net.output_node);
  return p;
}

}  // namespace

const char* swing_limit_text(swing_limit_kind k) noexcept {
  switch (k) {
    case swing_limit_kind::none: return "none found";
    case swing_limit_kind::triode: return "triode edge (vds = vgs - vp)";
    case swing_limit_kind::cutoff: return "cutoff (vgs = vp)";
    case swing_limit_kind::gate_forward: return "gate reaches the source voltage (vgs = 0)";
    case swing_limit_kind::no_convergence: return "solver did not converge";
  }
  return "";
}

headroom_figures analyse_headroom(const network& net, const operating_point& op) {
  if (net.devices() != 1) throw internal_error("the headroom sweep handles a network of one JFET");
  std::vector<cap_treatment> caps = uniform_caps(net, cap_treatment::kind::open);
  for (std::size_t k = 0; k < net.capacitors.size(); ++k) {
    const net_capacitor& c = net.capacitors[k];
    if (!is_large_cap(c.role)) continue;
    caps[k].how = cap_treatment::kind::held;
    caps[k].volts = node_v(op.x, c.a) - node_v(op.x, c.b);
  }
  Eigen::VectorXd x0 = op.x;
  // The held-capacitor system has extra unknowns (their currents): start from op.x padded.
  const mna_system lin0 = assemble_linear(net, caps, net.supply_v, 0.0);
  Eigen::VectorXd start = Eigen::VectorXd::Zero(lin0.a.rows());
  start.head(std::min<Eigen::Index>(op.x.size(), start.size())) = op.x.head(std::min<Eigen::Index>(op.x.size(), start.size()));
  probe rest = evaluate(net, caps, 0.0, start);
  const double out0 = rest.output_v;

  headroom_figures h;
  h.search_limit_v = 4.0 * (net.supply_v + std::fabs(net.jfet().device.vp_v));
  constexpr int steps = 200;
  const double du = h.search_limit_v / steps;

  swing_limit sides[2];
  for (int side = 0; side < 2; ++side) {
    const double dir = side == 0 ? 1.0 : -1.0;
    Eigen::VectorXd x = start;
    double u_in = 0.0;
    probe inside = rest;
    swing_limit lim;
    for (int k = 1; k <= steps; ++k) {
      const double u = dir * du * k;
      Eigen::VectorXd y = x;
      probe p = evaluate(net, caps, u, y);
      if (p.ok && p.margin > 0) {
        x = y;
        u_in = u;
        inside = p;
        continue;
      }
      // Bisection between the last clean point and this one.
      double lo = u_in, hi = u;
      Eigen::VectorXd xl = x;
      swing_limit_kind kind = p.kind;
      for (int it = 0; it < 60 && std::fabs(hi - lo) > 1e-12 * std::max(1.0, std::fabs(hi)); ++it) {
        const double mid = 0.5 * (lo + hi);
        Eigen::VectorXd ym = xl;
        probe pm = evaluate(net, caps, mid, ym);
        if (pm.ok && pm.margin > 0) {
          lo = mid;
          xl = ym;
          inside = pm;
        } else {
          hi = mid;
          kind = pm.kind;
        }
      }
      lim.kind = kind;
      lim.drive_v = net.sign * lo;
      lim.output_v = net.sign * (inside.output_v - out0);
      break;
    }
    if (lim.kind == swing_limit_kind::none) {
      lim.drive_v = net.sign * u_in;
      lim.output_v = net.sign * (inside.output_v - out0);
    }
    sides[side] = lim;
  }
  // Assign by the sign of the output excursion (an inverting stage swings down for a
  // positive drive).
  const swing_limit& a = sides[0];
  const swing_limit& b = sides[1];
  if (a.output_v >= b.output_v) {
    h.up = a;
    h.down = b;
  } else {
    h.up = b;
    h.down = a;
  }
  h.symmetric_output_vpk = std::min(std::fabs(h.up.output_v), std::fabs(h.down.output_v));
  h.clean_drive_vpk = std::min(std::fabs(h.up.drive_v), std::fabs(h.down.drive_v));
  return h;
}

}  // namespace pinchoff::model
