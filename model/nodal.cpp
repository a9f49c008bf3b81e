#include "model/nodal.hpp"

#include <algorithm>
#include <cmath>

namespace pinchoff::model {
namespace {

struct jfet_currents {
  double id, igs, igd;           // channel d->s, junction g->s, junction g->d
  double gm, gds, ggs, ggd;      // derivatives
};

jfet_currents eval_jfet(const network& net, double vgs, double vds) noexcept {
  const channel_eval ch = drain_current(net.device, vgs, vds);
  const junction_eval js = junction_current(net.device, vgs, net.vt_v);
  const junction_eval jd = junction_current(net.device, vgs - vds, net.vt_v);
  return {ch.id_a, js.i_a, jd.i_a, ch.gm_s, ch.gds_s, js.g_s, jd.g_s};
}

// Node k's row in the unknown vector, or -1 for ground.
inline int row(int node) noexcept { return node - 1; }

// Residual F = A x + i_nl(x) - rhs, plus a scale for the relative tolerance per row.
void residual(const network& net, const mna_system& lin, const Eigen::VectorXd& x, Eigen::VectorXd& f,
              Eigen::VectorXd& scale) {
  f = lin.a * x - lin.rhs;
  scale = (lin.a.cwiseAbs() * x.cwiseAbs()) + lin.rhs.cwiseAbs();
  const double vd = node_v(x, net.drain), vg = node_v(x, net.gate), vs = node_v(x, net.source);
  const jfet_currents c = eval_jfet(net, vg - vs, vd - vs);
  auto add = [&](int node, double i) {
    if (node == 0) return;
    f[row(node)] += i;
    scale[row(node)] += std::fabs(i);
  };
  add(net.drain, c.id - c.igd);
  add(net.gate, c.igs + c.igd);
  add(net.source, -c.id - c.igs);
}

void jacobian(const network& net, const mna_system& lin, const Eigen::VectorXd& x, Eigen::MatrixXd& j) {
  j = lin.a;
  const double vd = node_v(x, net.drain), vg = node_v(x, net.gate), vs = node_v(x, net.source);
  const jfet_currents c = eval_jfet(net, vg - vs, vd - vs);
  // Partial derivatives of each terminal current with respect to (vd, vg, vs).
  const double did[3] = {c.gds, c.gm, -c.gm - c.gds};
  const double digs[3] = {0.0, c.ggs, -c.ggs};
  const double digd[3] = {-c.ggd, c.ggd, 0.0};
  const int nodes[3] = {net.drain, net.gate, net.source};
  for (int col = 0; col < 3; ++col) {
    if (nodes[col] == 0) continue;
    const int cj = row(nodes[col]);
    if (net.drain != 0) j(row(net.drain), cj) += did[col] - digd[col];
    if (net.gate != 0) j(row(net.gate), cj) += digs[col] + digd[col];
    if (net.source != 0) j(row(net.source), cj) += -did[col] - digs[col];
  }
}

}  // namespace

std::vector<cap_treatment> uniform_caps(const network& net, cap_treatment::kind how) {
  return std::vector<cap_treatment>(net.capacitors.size(), cap_treatment{how, 0, 0, 0});
}

mna_system assemble_linear(const network& net, std::span<const cap_treatment> caps, double supply_v,
                           double generator_v) {
  int branches = 2;
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
  Eigen::VectorXd f(n), scale(n), step(n), trial(n), f_trial(n), scale_trial(n);
  Eigen::MatrixXd jac(n, n);
  Eigen::PartialPivLU<Eigen::MatrixXd> lu(n);
  const double nvt = net.device.n * net.vt_v;
  const double vcrit = critical_voltage(net.device, net.vt_v);

  auto norm_of = [&](const Eigen::VectorXd& r, const Eigen::VectorXd& s) {
    double worst = 0.0;  // largest residual relative to its tolerance
    for (int k = 0; k < lin.node_unknowns; ++k)
      worst = std::max(worst, std::fabs(r[k]) / (opt.itol_a + opt.itol_rel * s[k]));
    return worst;
  };

  newton_result res;
  residual(net, lin, x, f, scale);
  double fnorm = norm_of(f, scale);
  for (int it = 1; it <= opt.max_iterations; ++it) {
    res.iterations = it;
    jacobian(net, lin, x, jac);
    lu.compute(jac);
    step = lu.solve(-f);
    if (!step.allFinite()) break;

    // Junction limiting on the two gate junctions scales the whole step.
    double alpha = 1.0;
    auto limit = [&](int p, int q) {
      const double v_old = node_v(x, p) - node_v(x, q);
      const double dv = node_v(step, p) - node_v(step, q);
      if (dv == 0.0) return;
      const double v_lim = limit_junction(v_old + dv, v_old, nvt, vcrit);
      if (v_lim != v_old + dv) alpha = std::min(alpha, std::max(1e-3, (v_lim - v_old) / dv));
    };
    limit(net.gate, net.source);
    limit(net.gate, net.drain);

    // Step halving until the residual falls (damped Newton).
    double fnorm_trial = 0.0;
    for (int h = 0; h < 12; ++h) {
      trial = x + alpha * step;
      residual(net, lin, trial, f_trial, scale_trial);
      fnorm_trial = norm_of(f_trial, scale_trial);
      if (fnorm_trial <= fnorm || fnorm_trial <= 1.0) break;
      alpha *= 0.5;
    }
    double worst_step = 0.0;
    for (int k = 0; k < lin.node_unknowns; ++k)
      worst_step = std::max(worst_step, std::fabs(alpha * step[k]) / (opt.vtol_v + opt.vtol_rel * std::fabs(trial[k])));
    x = trial;
    f = f_trial;
    scale = scale_trial;
    fnorm = fnorm_trial;
    if (alpha == 1.0 && worst_step <= 1.0 && fnorm <= 1.0) {
      res.converged = true;
      break;
    }
  }
  double worst_abs = 0.0;
  for (int k = 0; k < lin.node_unknowns; ++k) worst_abs = std::max(worst_abs, std::fabs(f[k]));
  res.residual_a = worst_abs;
  return res;
}

}  // namespace pinchoff::model
