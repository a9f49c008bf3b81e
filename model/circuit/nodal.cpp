#include "model/circuit/nodal.hpp"

#include <algorithm>
#include <cmath>

namespace pinchoff::model {
namespace {

// Node k's row in the unknown vector, or -1 for ground.
inline int row(int node) noexcept { return node - 1; }

// The full voltage of `node` for unknowns x: x itself, or the origin plus x when the
// unknowns are offsets (mna_system::origin).
inline double full_v(const mna_system& lin, const Eigen::VectorXd& x, int node) noexcept {
  return lin.origin.size() == 0 ? node_v(x, node) : node_v(lin.origin, node) + node_v(x, node);
}

// Residual F = A x + i_nl(x) - rhs, plus a scale per row for the relative tolerance: the
// componentwise backward error of Oettli & Prager (Numer. Math. 6, 1964), |F| against
// |A| |x| + |rhs|, with each device's tangent conductances entering like the entries of A
// (a JFET at the point is its currents plus its conductances times its terminal voltages).
// A point within a relative itol_rel of that scale solves a network whose every element
// differs from the given one by about that much. Each branch current also counts by its
// own magnitude. Both matter where a forward gate junction and a triode channel meet at a
// drain whose resistor carries microamperes: their currents nearly cancel, and the rounding
// floor of the sum (one ulp of a 30 V node times their conductance of a siemens or so, a
// few 1e-15 A) is far above a relative tolerance of the microamperes alone.
// With an origin (offset unknowns) the linear part's scale is that of the system solved,
// |A| |dx| + |rhs|; the devices count at their full terminal voltages, as they are evaluated.
void residual(const network& net, const mna_system& lin, const Eigen::VectorXd& x, Eigen::VectorXd& f,
              Eigen::VectorXd& scale) {
  f = lin.a * x - lin.rhs;
  scale = (lin.a.cwiseAbs() * x.cwiseAbs()) + lin.rhs.cwiseAbs();
  auto add = [&](int node, double a, double b, double conductance_times_v) {
    if (node == 0) return;
    f[row(node)] += a + b;
    scale[row(node)] += std::fabs(a) + std::fabs(b) + conductance_times_v;
  };
  for (const net_jfet& q : net.jfets) {
    const double vd = full_v(lin, x, q.drain), vg = full_v(lin, x, q.gate), vs = full_v(lin, x, q.source);
    const channel_eval ch = drain_current(q.device, vg - vs, vd - vs);
    const junction_eval js = gate_source_current(q.device, vg - vs, net.vt_v);
    const junction_eval jd = junction_current(q.device, vg - vd, net.vt_v);
    const double ad = std::fabs(vd), ag = std::fabs(vg), as = std::fabs(vs);
    const double gch = std::fabs(ch.gds_s) * ad + std::fabs(ch.gm_s) * ag + std::fabs(ch.gm_s + ch.gds_s) * as;
    const double ggs = std::fabs(js.g_s) * (ag + as), ggd = std::fabs(jd.g_s) * (ag + ad);
    add(q.drain, ch.id_a, -jd.i_a, gch + ggd);
    add(q.gate, js.i_a, jd.i_a, ggs + ggd);
    add(q.source, -ch.id_a, -js.i_a, gch + ggs);
  }
}

// r = b - J x with every product and sum carried exactly to the end (Ogita, Rump & Oishi,
// SIAM J. Sci. Comput. 26(6), 2005, algorithm Dot2: TwoProduct by fused multiply-add,
// Knuth's TwoSum, the errors summed on the side): as accurate as in twice the working
// precision, then rounded once. Where two nodes are tied by a conductance of siemens and
// each swings by volts, the entries J x cancel terms of amperes, and the working-precision
// sum loses eps times those amperes: over a node's megohms, a fraction of a nanovolt.
void compensated_residual(const Eigen::MatrixXd& j, const Eigen::VectorXd& x, const Eigen::VectorXd& b,
                          Eigen::VectorXd& r) {
  const Eigen::Index n = b.size();
  for (Eigen::Index i = 0; i < n; ++i) {
    double s = b[i], err = 0.0;
    for (Eigen::Index k = 0; k < n; ++k) {
      const double a = -j(i, k), p = a * x[k];
      const double ep = std::fma(a, x[k], -p);
      const double t = s + p, z = t - s;
      err += ((s - (t - z)) + (p - z)) + ep;
      s = t;
    }
    r[i] = s + err;
  }
}

}  // namespace

std::vector<cap_treatment> uniform_caps(const network& net, cap_treatment::kind how) {
  return std::vector<cap_treatment>(net.capacitors.size(), cap_treatment{how, 0, 0, 0});
}

mna_system assemble_linear(const network& net, std::span<const cap_treatment> caps, double supply_v,
                           double generator_v, std::span<const ind_treatment> inds) {
  auto ind_shorted = [&](std::size_t j) { return inds.empty() || inds[j].how == ind_treatment::kind::shorted; };
  int branches = 2;
  for (std::size_t j = 0; j < net.inductors.size(); ++j)
    if (ind_shorted(j)) ++branches;
  for (const cap_treatment& c : caps)
    if (c.how == cap_treatment::kind::shorted || c.how == cap_treatment::kind::held) ++branches;
  const int nu = net.node_count - 1;
  mna_system m;
  m.node_unknowns = nu;
  m.a = Eigen::MatrixXd::Zero(nu + branches, nu + branches);
  m.rhs = Eigen::VectorXd::Zero(nu + branches);

  auto stamp_g = [&](int a, int b, double g) {
    if (a != 0) m.a(row(a), row(a)) += g;
    if (b != 0) m.a(row(b), row(b)) += g;
    if (a != 0 && b != 0) {
      m.a(row(a), row(b)) -= g;
      m.a(row(b), row(a)) -= g;
    }
  };
  int branch = nu;
  auto stamp_v = [&](int p, int n, double volts) {
    if (p != 0) {
      m.a(row(p), branch) += 1.0;
      m.a(branch, row(p)) += 1.0;
    }
    if (n != 0) {
      m.a(row(n), branch) -= 1.0;
      m.a(branch, row(n)) -= 1.0;
    }
    m.rhs[branch] = volts;
    ++branch;
  };

  for (const net_resistor& r : net.resistors) stamp_g(r.a, r.b, 1.0 / r.ohm);
  stamp_v(net.supply_node, 0, supply_v);
  stamp_v(net.generator_node, 0, generator_v);
  for (std::size_t j = 0; j < net.inductors.size(); ++j) {
    const net_inductor& l = net.inductors[j];
    if (ind_shorted(j)) {
      stamp_v(l.a, l.b, 0.0);
    } else {
      stamp_g(l.a, l.b, inds[j].g_s);
      if (l.a != 0) m.rhs[row(l.a)] -= inds[j].i_a;
      if (l.b != 0) m.rhs[row(l.b)] += inds[j].i_a;
    }
  }
  for (std::size_t k = 0; k < net.capacitors.size(); ++k) {
    const net_capacitor& c = net.capacitors[k];
    const cap_treatment& t = caps[k];
    switch (t.how) {
      case cap_treatment::kind::open: break;
      case cap_treatment::kind::shorted: stamp_v(c.a, c.b, 0.0); break;
      case cap_treatment::kind::held: stamp_v(c.a, c.b, t.volts); break;
      case cap_treatment::kind::companion:
        stamp_g(c.a, c.b, t.g_s);
        if (c.a != 0) m.rhs[row(c.a)] -= t.i_a;
        if (c.b != 0) m.rhs[row(c.b)] += t.i_a;
        break;
    }
  }
  return m;
}

newton_result solve_nodal(const network& net, const mna_system& lin, Eigen::VectorXd& x, const nodal_options& opt) {
  const int n = static_cast<int>(lin.a.rows());
  if (x.size() != n) x = Eigen::VectorXd::Zero(n);
  Eigen::MatrixXd jac(n, n);
  Eigen::VectorXd rhs(n), x_new(n), f(n), scale(n);
  Eigen::PartialPivLU<Eigen::MatrixXd> lu(n);

  // SPICE practice (Nagel 1975): the gate junctions are evaluated at their own limited
  // voltages, which follow the node voltages by at most a logarithmic step once forward
  // biased; each Newton step solves the network with the junctions replaced by their
  // tangent (Norton) at those voltages. The first evaluation starts at most at vcrit.
  // Every JFET has its own pair of limited junction voltages.
  auto vpair = [&](const Eigen::VectorXd& v, int p, int q) { return full_v(lin, v, p) - full_v(lin, v, q); };
  // The junctions' voltages at the origin (zero without one): the tangent of a junction
  // taken at its limited full voltage, in the offset unknowns.
  auto origin_pair = [&](int p, int q) { return lin.origin.size() == 0 ? 0.0 : node_v(lin.origin, p) - node_v(lin.origin, q); };
  struct junction_state {
    double nvt, vcrit, jgs, jgd;
  };
  std::vector<junction_state> js_state;
  js_state.reserve(net.jfets.size());
  for (const net_jfet& q : net.jfets) {
    const double vcrit = critical_voltage(q.device, net.vt_v);
    js_state.push_back({q.device.n * net.vt_v, vcrit, std::min(vpair(x, q.gate, q.source), vcrit),
                        std::min(vpair(x, q.gate, q.drain), vcrit)});
  }

  // Each JFET's stamp into the Jacobian (rows drain, gate, source; columns the same nodes),
  // kept apart for the compensated refinement below.
  struct device_stamp {
    int nodes[3];
    double rows[3][3];
  };
  std::vector<device_stamp> stamps(net.jfets.size());

  newton_result res;
  for (int it = 1; it <= opt.max_iterations; ++it) {
    res.iterations = it;
    // Linear system for the next iterate: A x' + [i(x) + J (x' - x)] = rhs, with the
    // junction currents linearised at their limited voltages.
    jac = lin.a;
    rhs = lin.rhs;
    for (std::size_t k = 0; k < net.jfets.size(); ++k) {
      const net_jfet& q = net.jfets[k];
      const junction_state& st = js_state[k];
      const double vd = node_v(x, q.drain), vg = node_v(x, q.gate), vs = node_v(x, q.source);
      const channel_eval ch = drain_current(q.device, vpair(x, q.gate, q.source), vpair(x, q.drain, q.source));
      const junction_eval js = gate_source_current(q.device, st.jgs, net.vt_v);
      const junction_eval jd = junction_current(q.device, st.jgd, net.vt_v);
      const int nodes[3] = {q.drain, q.gate, q.source};
      const double did[3] = {ch.gds_s, ch.gm_s, -ch.gm_s - ch.gds_s};
      const double digs[3] = {0.0, js.g_s, -js.g_s};
      const double digd[3] = {-jd.g_s, jd.g_s, 0.0};
      // Current of each element at the expansion point, minus its tangent times that point
      // (in the unknowns' frame: vd, vg, vs are offsets when there is an origin).
      const double id0 = ch.id_a - (did[0] * vd + did[1] * vg + did[2] * vs);
      const double igs0 = js.i_a - js.g_s * (st.jgs - origin_pair(q.gate, q.source));
      const double igd0 = jd.i_a - jd.g_s * (st.jgd - origin_pair(q.gate, q.drain));
      auto add_rhs = [&](int node, double i) {
        if (node != 0) rhs[row(node)] -= i;
      };
      add_rhs(q.drain, id0 - igd0);
      add_rhs(q.gate, igs0 + igd0);
      add_rhs(q.source, -id0 - igs0);
      device_stamp& ds = stamps[k];
      for (int col = 0; col < 3; ++col) {
        ds.nodes[col] = nodes[col];
        ds.rows[0][col] = did[col] - digd[col];
        ds.rows[1][col] = digs[col] + digd[col];
        ds.rows[2][col] = -did[col] - digs[col];
        if (nodes[col] == 0) continue;
        const int cj = row(nodes[col]);
        if (q.drain != 0) jac(row(q.drain), cj) += ds.rows[0][col];
        if (q.gate != 0) jac(row(q.gate), cj) += ds.rows[1][col];
        if (q.source != 0) jac(row(q.source), cj) += ds.rows[2][col];
      }
    }
    lu.compute(jac);
    x_new = lu.solve(rhs);
    // One step of iterative refinement (Wilkinson; Golub & Van Loan, sec. 3.5.3): in
    // absolute unknowns with large conductances the plain solve's rounding (about 1e-10 V
    // on a 9 V node) sits above a 1e-12 V step tolerance, so Newton would never see its
    // step fall below it. Cheap next to the factorisation, so it stays in either frame.
    if (opt.compensated_refinement) {
      // The residual of the network with each device's tangent applied on its own, not
      // through jac: added into a diagonal of siemens (a coupling capacitor's companion), a
      // channel conductance keeps only its bits above that entry's last place, while rhs
      // carries its tangent's constant term in full; the fixed point of the iteration then
      // sits where the two disagree, (the lost bits) times the node's offset, over the
      // node's megohms. Apart, the fixed point is the network's own.
      compensated_residual(lin.a, x_new, rhs, f);
      for (const device_stamp& ds : stamps) {
        double across[3];
        for (int col = 0; col < 3; ++col) across[col] = ds.nodes[col] == 0 ? 0.0 : x_new[row(ds.nodes[col])];
        for (int r = 0; r < 3; ++r) {
          if (ds.nodes[r] == 0) continue;
          f[row(ds.nodes[r])] -= ds.rows[r][0] * across[0] + ds.rows[r][1] * across[1] + ds.rows[r][2] * across[2];
        }
      }
      x_new += lu.solve(f);
    } else {
      rhs.noalias() -= jac * x_new;
      x_new += lu.solve(rhs);
    }
    if (!x_new.allFinite()) break;

    // Channel step limiting (in the spirit of SPICE's fetlim): the square law is only
    // trustworthy over about one pinch-off voltage, so a larger change of vgs in one
    // step is scaled back along the Newton direction (by the most any JFET asks for).
    {
      double scale_back = 1.0;
      for (const net_jfet& q : net.jfets) {
        const double dvgs = vpair(x_new, q.gate, q.source) - vpair(x, q.gate, q.source);
        const double max_dvgs = std::max(std::fabs(q.device.vp_v), 0.5);
        if (std::fabs(dvgs) > max_dvgs) scale_back = std::min(scale_back, max_dvgs / std::fabs(dvgs));
      }
      if (scale_back < 1.0) x_new = x + scale_back * (x_new - x);
    }
    double worst_step = 0.0;
    for (int k = 0; k < lin.node_unknowns; ++k) {
      const double v = lin.origin.size() == 0 ? x_new[k] : lin.origin[k] + x_new[k];
      worst_step = std::max(worst_step, std::fabs(x_new[k] - x[k]) / (opt.vtol_v + opt.vtol_rel * std::fabs(v)));
    }
    x = x_new;

    bool limited = false, junctions_settled = true;
    for (std::size_t k = 0; k < net.jfets.size(); ++k) {
      const net_jfet& q = net.jfets[k];
      junction_state& st = js_state[k];
      const double ags = vpair(x, q.gate, q.source), agd = vpair(x, q.gate, q.drain);
      const double lgs = limit_junction(ags, st.jgs, st.nvt, st.vcrit), lgd = limit_junction(agd, st.jgd, st.nvt, st.vcrit);
      limited = limited || lgs != ags || lgd != agd;
      junctions_settled = junctions_settled &&
                          std::fabs(ags - st.jgs) <= opt.vtol_v + opt.vtol_rel * std::fabs(ags) + 1e-9 * st.nvt &&
                          std::fabs(agd - st.jgd) <= opt.vtol_v + opt.vtol_rel * std::fabs(agd) + 1e-9 * st.nvt;
      st.jgs = lgs;
      st.jgd = lgd;
    }
    if (!limited && junctions_settled && worst_step <= 1.0) {
      residual(net, lin, x, f, scale);
      double worst = 0.0;
      for (int k = 0; k < lin.node_unknowns; ++k)
        worst = std::max(worst, std::fabs(f[k]) / (opt.itol_a + opt.itol_rel * scale[k]));
      if (worst <= 1.0) {
        res.converged = true;
        break;
      }
    }
  }
  residual(net, lin, x, f, scale);
  double worst_abs = 0.0;
  for (int k = 0; k < lin.node_unknowns; ++k) worst_abs = std::max(worst_abs, std::fabs(f[k]));
  res.residual_a = worst_abs;
  return res;
}

}  // namespace pinchoff::model
