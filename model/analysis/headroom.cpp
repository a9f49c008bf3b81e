#include "model/analysis/headroom.hpp"

#include <algorithm>
#include <cmath>
#include <vector>

#include "base/error.hpp"
#include "model/analysis/small_signal.hpp"

namespace pinchoff::model {
namespace {

struct probe {
  bool ok{false};
  double margin{};             // > 0 inside the clean region (every JFET's)
  swing_limit_kind kind{swing_limit_kind::none};
  double output_v{};           // load voltage (network frame)
  std::vector<double> margins;                 // each JFET's
  std::vector<swing_limit_kind> kinds;         // each JFET's nearest edge
};

probe evaluate(const network& net, std::span<const cap_treatment> caps, double u, Eigen::VectorXd& x) {
  probe p;
  const newton_result r = solve_point(net, caps, u, x);
  if (!r.converged) {
    p.kind = swing_limit_kind::no_convergence;
    p.margins.assign(net.jfets.size(), -1.0);
    p.kinds.assign(net.jfets.size(), swing_limit_kind::no_convergence);
    return p;
  }
  p.ok = true;
  p.margin = INFINITY;
  for (const net_jfet& q : net.jfets) {
    const double vd = node_v(x, q.drain), vg = node_v(x, q.gate), vs = node_v(x, q.source);
    const double vgs = vg - vs, vds = vd - vs;
    const double scale = std::max(1.0, std::fabs(q.device.vp_v));
    const double m_triode = (vds - (vgs - q.device.vp_v)) / scale;
    const double m_cutoff = (vgs - q.device.vp_v) / scale;
    const double m_gate = -vgs / scale;
    double m = m_triode;
    swing_limit_kind kind = swing_limit_kind::triode;
    if (m_cutoff < m) {
      m = m_cutoff;
      kind = swing_limit_kind::cutoff;
    }
    if (m_gate < m) {
      m = m_gate;
      kind = swing_limit_kind::gate_forward;
    }
    p.margins.push_back(m);
    p.kinds.push_back(kind);
    if (m < p.margin) {
      p.margin = m;
      p.kind = kind;
    }
  }
  p.output_v = node_v(x, net.output_node);
  return p;
}

// Where each JFET first leaves its clean region, sweeping the generator from rest in
// direction `dir` over a geometric grid (a chain's last stage can clip at millivolts), each
// edge found by bisection on that JFET's own margin.
void find_stage_edges(const network& net, std::span<const cap_treatment> caps, const Eigen::VectorXd& start, double dir,
                      double limit, std::vector<stage_clip>& best) {
  constexpr int steps = 240;
  constexpr double first = 1e-5;
  const std::size_t n = net.jfets.size();
  std::vector<bool> done(n, false);
  std::vector<double> last_in(n, 0.0);
  std::vector<Eigen::VectorXd> x_in(n, start);
  Eigen::VectorXd x = start;
  for (int k = 0; k <= steps; ++k) {
    const double u = dir * first * std::pow(limit / first, static_cast<double>(k) / steps);
    Eigen::VectorXd y = x;
    const probe p = evaluate(net, caps, u, y);
    if (p.ok) x = y;
    bool all = true;
    for (std::size_t j = 0; j < n; ++j) {
      if (done[j]) continue;
      if (p.ok && p.margins[j] > 0) {
        last_in[j] = u;
        x_in[j] = y;
        all = false;
        continue;
      }
      double lo = last_in[j], hi = u;
      Eigen::VectorXd xl = x_in[j];
      swing_limit_kind kind = p.kinds[j];
      for (int it = 0; it < 60 && std::fabs(hi - lo) > 1e-9 * std::max(1e-6, std::fabs(hi)); ++it) {
        const double mid = 0.5 * (lo + hi);
        Eigen::VectorXd ym = xl;
        const probe pm = evaluate(net, caps, mid, ym);
        if (pm.ok && pm.margins[j] > 0) {
          lo = mid;
          xl = ym;
        } else {
          hi = mid;
          kind = pm.kinds[j];
        }
      }
      done[j] = true;
      stage_clip& b = best[j];
      if (b.kind == swing_limit_kind::none || std::fabs(lo) < b.drive_vpk) {
        b.kind = kind;
        b.drive_vpk = std::fabs(lo);
        b.drive_sign = net.sign * dir;
      }
    }
    if (all) break;
  }
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

headroom_figures analyse_headroom(const network& net, const operating_point& op, headroom_detail detail) {
  std::vector<cap_treatment> caps = uniform_caps(net, cap_treatment::kind::open);
  for (std::size_t k = 0; k < net.capacitors.size(); ++k) {
    const net_capacitor& c = net.capacitors[k];
    // A capsule holds its rest voltage too, so the gate follows the generator; its divider
    // with the gate's capacitance is applied to the drive figures below.
    if (!is_large_cap(c.role) && c.role != cap_role::capsule) continue;
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
  double vp_max = 0.0;
  for (const net_jfet& q : net.jfets) vp_max = std::max(vp_max, std::fabs(q.device.vp_v));
  h.search_limit_v = 4.0 * (net.supply_v + vp_max);
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

  // The clip order: for one JFET, its edge is the chain's.
  std::vector<stage_clip> edges(detail == headroom_detail::with_clip_order ? net.jfets.size() : 0);
  for (std::size_t j = 0; j < edges.size(); ++j) edges[j].stage = static_cast<int>(j);
  if (edges.empty()) {
  } else if (net.jfets.size() == 1) {
    const swing_limit& first = std::fabs(h.up.drive_v) <= std::fabs(h.down.drive_v) ? h.up : h.down;
    edges[0] = {0, first.kind, std::fabs(first.drive_v), first.drive_v < 0 ? -1.0 : 1.0};
  } else {
    find_stage_edges(net, caps, start, 1.0, h.search_limit_v, edges);
    find_stage_edges(net, caps, start, -1.0, h.search_limit_v, edges);
  }
  std::stable_sort(edges.begin(), edges.end(), [](const stage_clip& a, const stage_clip& b) {
    const bool an = a.kind == swing_limit_kind::none, bn = b.kind == swing_limit_kind::none;
    if (an != bn) return bn;
    return a.drive_vpk < b.drive_vpk;
  });
  h.clip_order = std::move(edges);

  // A capsule network: the sweep above drove the gate straight (the capsule held); the
  // generator reaches the gate through the capacitive divider of the capsule against the
  // stray and the gate's input capacitance, so each drive figure is the gate's divided by the
  // divider's mid-band ratio (small-signal: the Miller part of the input capacitance is that
  // of rest, a first-order figure near the clipping edge).
  if (net.midband_hz > 0.0) {
    ac_setup mid;
    mid.generator_v = 1.0;
    mid.small_caps_hz = net.midband_hz;
    const double ratio = std::abs(solve_small_signal(net, linearise_all(net, op), mid)[net.input_node]);
    if (ratio > 0.0) {
      for (swing_limit* l : {&h.up, &h.down}) l->drive_v /= ratio;
      h.clean_drive_vpk /= ratio;
      for (stage_clip& c : h.clip_order) c.drive_vpk /= ratio;
    }
  }
  return h;
}

}  // namespace pinchoff::model
