// The DK engine's general path, for a network of more than one JFET (one JFET takes the
// closed-form 2x2 path of dk_engine.cpp). The same equations and the same acceptance
// argument with k devices: 2k port voltages v, 3k currents i, the device Jacobian Jf
// block diagonal (one 3x2 block per JFET), and I - F Jf (2k x 2k) factored by LU with
// partial pivoting (Golub & Van Loan, Matrix Computations, sec. 3.4) on every Newton
// iteration. Every vector and matrix is sized when the engine is built, so a sample
// allocates nothing.
#include <algorithm>
#include <cmath>
#include <limits>

#include "model/dk_engine.hpp"

namespace pinchoff::model {
namespace {

double max_abs_of(const Eigen::Ref<const Eigen::VectorXd>& v) noexcept {
  double m = 0.0;
  for (Eigen::Index k = 0; k < v.size(); ++k) m = std::max(m, std::fabs(v[k]));
  return m;
}

// JFET j's 3x2 block of the block-diagonal Jf: rows igs, igd, id; columns vgs, vds.
void put_block(Eigen::MatrixXd& jf, int j, const detail::port_currents& c) noexcept {
  const Eigen::Index r = 3 * j, k = 2 * j;
  jf(r, k) = c.ggs_s;
  jf(r, k + 1) = 0.0;
  jf(r + 1, k) = c.ggd_s;
  jf(r + 1, k + 1) = -c.ggd_s;
  jf(r + 2, k) = c.gm_s;
  jf(r + 2, k + 1) = c.gds_s;
}

// I - F Jf from the per-JFET derivatives, column pair by column pair (Jf is block diagonal,
// so each column of F Jf combines three columns of F).
void one_minus_f_jf(const Eigen::MatrixXd& f, const std::vector<detail::port_currents>& cur, Eigen::MatrixXd& j) noexcept {
  for (int d = 0; d < static_cast<int>(cur.size()); ++d) {
    const detail::port_currents& c = cur[static_cast<std::size_t>(d)];
    j.col(2 * d) = -(f.col(3 * d) * c.ggs_s + f.col(3 * d + 1) * c.ggd_s + f.col(3 * d + 2) * c.gm_s);
    j.col(2 * d + 1) = -(f.col(3 * d + 1) * (-c.ggd_s) + f.col(3 * d + 2) * c.gds_s);
  }
  j.diagonal().array() += 1.0;
}

// M = (I - F Jf)^-1 from its factors, column by column (no temporaries).
void inverse_of(const Eigen::PartialPivLU<Eigen::MatrixXd>& lu, Eigen::VectorXd& unit, Eigen::MatrixXd& m) noexcept {
  for (Eigen::Index c = 0; c < m.cols(); ++c) {
    unit.setZero();
    unit[c] = 1.0;
    m.col(c) = lu.solve(unit);
  }
}

}  // namespace

void dk_engine::port_set::resize(int k) {
  v.setZero(2 * k);
  i.setZero(3 * k);
  jf.setZero(3 * k, 2 * k);
  m.setIdentity(2 * k, 2 * k);
}

void dk_engine::init_general(const network& net, const operating_point& op) {
  const int ns = m_.states, k = m_.devices, np = 2 * k, ni = 3 * k;
  general_path& g = g_;
  g.dev.clear();
  for (const net_jfet& q : net.jfets) g.dev.push_back(detail::device_consts::of(q.device, net.vt_v));
  g.cur.assign(static_cast<std::size_t>(k), detail::port_currents{});
  g.f_abs = m_.f.cwiseAbs();

  // Stacked update as for one JFET: the state rows hold the increment x_n - x_{n-1}.
  const Eigen::MatrixXd a_minus_i = m_.a - Eigen::MatrixXd::Identity(ns, ns);
  g.w = Eigen::MatrixXd::Zero(ns + np + 1, ns + 2 + ni);
  g.w.topRows(ns) << a_minus_i, m_.b, m_.c;
  g.w.middleRows(ns, np) << m_.d * m_.a, m_.d * m_.b, m_.d * m_.c;
  g.w.row(ns + np) << m_.d_out, m_.e_out, m_.f_out;
  g.pre = Eigen::VectorXd::Zero(ns + np + 1);
  g.out = Eigen::VectorXd::Zero(ns + np + 1);
  in_ = Eigen::VectorXd::Zero(ns + 2 + ni);

  for (Eigen::VectorXd* v : {&g.q, &g.p, &g.p_last, &g.p_dc, &g.v_ext, &g.p_ext, &g.dp, &g.v, &g.r, &g.d, &g.base,
                             &g.step, &g.t, &g.bound, &g.unit, &g.pc, &g.pj, &g.guess})
    v->setZero(np);
  g.rem.setZero(ni);
  g.j.setZero(np, np);
  g.lu = Eigen::PartialPivLU<Eigen::MatrixXd>(np);
  for (port_set* s : {&g.last, &g.dc, &g.trial, &g.cur_pt, &g.next_pt}) s->resize(k);
  g.v_hist.setZero(np, 3);
  g.p_hist.setZero(np, 3);
  g.cj.setZero(ns, np);
  g.md.setZero(np, ns);
  phi_.resize(ns, ns);
  tmp_.resize(ns, ns);

  // DC point, as for one JFET: a few Newton steps on the engine's own fixed-point equations
  // so that silence in gives exactly constant samples out.
  const Eigen::Vector2d u(supply_v_, 0.0);
  Eigen::VectorXd q = dc_states(net, op.x);
  Eigen::VectorXd v(np);
  for (int j = 0; j < k; ++j) {
    const net_jfet& d = net.jfets[static_cast<std::size_t>(j)];
    v[2 * j] = node_v(op.x, d.gate) - node_v(op.x, d.source);
    v[2 * j + 1] = node_v(op.x, d.drain) - node_v(op.x, d.source);
  }
  {
    Eigen::VectorXd qp = q, vp = v;
    Eigen::MatrixXd jac(ns + np, ns + np);
    Eigen::VectorXd res(ns + np);
    bool ok = false;
    for (int it = 0; it < 20; ++it) {
      point_general(vp, g.trial);
      res.head(ns) = a_minus_i * qp + m_.b * u + m_.c * g.trial.i;
      res.tail(np) = m_.d * qp + m_.e * u + m_.f * g.trial.i - vp;
      jac.topLeftCorner(ns, ns) = a_minus_i;
      jac.topRightCorner(ns, np) = m_.c * g.trial.jf;
      jac.bottomLeftCorner(np, ns) = m_.d;
      jac.bottomRightCorner(np, np) = m_.f * g.trial.jf - Eigen::MatrixXd::Identity(np, np);
      const Eigen::FullPivLU<Eigen::MatrixXd> lu(jac);
      if (!lu.isInvertible()) break;
      const Eigen::VectorXd delta = lu.solve(-res);
      if (!delta.allFinite()) break;
      qp += delta.head(ns);
      vp += delta.tail(np);
      if (max_abs_of(delta) <= 1e-15 * (1.0 + max_abs_of(qp) + max_abs_of(vp))) {
        ok = true;
        break;
      }
    }
    // Only rounding is to be removed: a larger move means the equations disagree.
    if (ok && max_abs_of(qp - q) <= 1e-6 && max_abs_of(vp - v) <= 1e-6) {
      q = qp;
      v = vp;
    }
  }
  x_dc_ = q;
  point_general(v, g.dc);
  g.p_dc = m_.d * q + m_.e * u;
  y_dc_ = sign_ * (m_.d_out.dot(q) + m_.e_out.dot(u) + m_.f_out.dot(g.dc.i));
  reset();
}

void dk_engine::point_general(const Eigen::VectorXd& v, port_set& out) noexcept {
  general_path& g = g_;
  const int k = m_.devices;
  for (int j = 0; j < k; ++j) {
    const detail::port_currents c = detail::evaluate_ports(g.dev[static_cast<std::size_t>(j)], v[2 * j], v[2 * j + 1]);
    g.cur[static_cast<std::size_t>(j)] = c;
    out.i[3 * j] = c.igs_a;
    out.i[3 * j + 1] = c.igd_a;
    out.i[3 * j + 2] = c.id_a;
    put_block(out.jf, j, c);
  }
  out.v = v;
  one_minus_f_jf(m_.f, g.cur, g.j);
  g.lu.compute(g.j);
  inverse_of(g.lu, g.unit, out.m);
}

void dk_engine::reset_general() {
  general_path& g = g_;
  const int ns = m_.states, ni = 3 * m_.devices;
  in_.head(ns) = x_dc_;
  in_[ns] = supply_v_;
  in_[ns + 1] = 0.0;
  in_.tail(ni) = g.dc.i;
  g.q.noalias() = m_.d * x_dc_;
  g.last = g.dc;
  g.p_last = g.p_dc;
  for (int c = 0; c < 3; ++c) {
    g.v_hist.col(c) = g.dc.v;
    g.p_hist.col(c) = g.p_dc;
  }
  stats_ = {};
}

// Newton on r(v) = p + F i(v) - v = 0 from `guess`, for k JFETs; the argument of
// solve_ports() carried over. After the step dv computed at v, device j's currents at
// v + dv differ from their linearisation by a remainder bounded per current as there (the
// junction bound 0.505 g dv^2 / nVt for |dv| <= 0.01 nVt, the channel's exact, plus its
// rounding margin); stacked into R (3k), the residual at v + dv is at most |F| R and the
// distance to the exact solution at most |M| |F| R with M = (I - F Jf)^-1 (Ortega &
// Rheinboldt 1970, 12.6). Both must be below tol_v in every row.
bool dk_engine::solve_general(const Eigen::VectorXd& p, const Eigen::VectorXd& guess, port_set& out,
                              int& evals) noexcept {
  general_path& g = g_;
  const Eigen::MatrixXd& f = m_.f;
  const int k = m_.devices, np = 2 * k;
  const double tol = opt_.tol_v;
  const double eps8 = 8.0 * std::numeric_limits<double>::epsilon();
  g.v = guess;
  g.base = g.v;
  g.step.setZero();
  double rn_base = std::numeric_limits<double>::infinity();
  bool may_damp = false;
  int halvings = 0;
  for (int it = 0; it < opt_.max_iterations; ++it) {
    for (int j = 0; j < k; ++j) {
      const detail::port_currents c = detail::evaluate_ports(g.dev[static_cast<std::size_t>(j)], g.v[2 * j], g.v[2 * j + 1]);
      g.cur[static_cast<std::size_t>(j)] = c;
      out.i[3 * j] = c.igs_a;
      out.i[3 * j + 1] = c.igd_a;
      out.i[3 * j + 2] = c.id_a;
    }
    ++evals;
    g.r = p - g.v;
    g.r.noalias() += f * out.i;
    const double rn = max_abs_of(g.r);
    // Damped Newton: halve a step that made the residual grow (or not finite).
    if (may_damp && !(rn <= rn_base) && !(rn <= tol) && halvings < 30) {
      g.step *= 0.5;
      g.v = g.base + g.step;
      ++halvings;
      continue;
    }
    if (!std::isfinite(rn)) return false;

    one_minus_f_jf(f, g.cur, g.j);
    g.lu.compute(g.j);
    if (!(std::fabs(g.lu.determinant()) > 1e-200)) return false;
    g.d = g.lu.solve(g.r);
    if (!g.d.allFinite()) return false;

    // Junction-voltage limiting (Nagel 1975, SPICE2 pnjlim), per JFET; the largest cut
    // scales the whole step.
    bool limited = false;
    {
      double alpha = 1.0;
      for (int j = 0; j < k; ++j) {
        const detail::device_consts& dv = g.dev[static_cast<std::size_t>(j)];
        const double gs_old = g.v[2 * j], gd_old = g.v[2 * j] - g.v[2 * j + 1];
        const double gs_new = gs_old + g.d[2 * j], gd_new = gd_old + g.d[2 * j] - g.d[2 * j + 1];
        if (gs_new > dv.vcrit_v || gd_new > dv.vcrit_v) {
          const double ls = limit_junction(gs_new, gs_old, dv.nvt_v, dv.vcrit_v);
          if (ls != gs_new) alpha = std::min(alpha, std::max(1e-3, (ls - gs_old) / (gs_new - gs_old)));
          const double ld = limit_junction(gd_new, gd_old, dv.nvt_v, dv.vcrit_v);
          if (ld != gd_new) alpha = std::min(alpha, std::max(1e-3, (ld - gd_old) / (gd_new - gd_old)));
        }
      }
      if (alpha < 1.0) {
        g.d *= alpha;
        limited = true;
      }
    }

    bool small = !limited;
    for (int j = 0; j < k && small; ++j) {
      const double lim = 0.01 * g.dev[static_cast<std::size_t>(j)].nvt_v;
      const double dgs = g.d[2 * j], dgd = g.d[2 * j] - g.d[2 * j + 1];
      small = std::fabs(dgs) <= lim && std::fabs(dgd) <= lim;
    }
    if (small) {
      for (int j = 0; j < k; ++j) {
        const detail::device_consts& dv = g.dev[static_cast<std::size_t>(j)];
        const detail::port_currents& c = g.cur[static_cast<std::size_t>(j)];
        const double d0 = g.d[2 * j], d1 = g.d[2 * j + 1];
        const double dgs = d0, dgd = d0 - d1;
        g.rem[3 * j] = 0.505 * c.ggs_s * dv.inv_nvt * dgs * dgs;
        g.rem[3 * j + 1] = 0.505 * c.ggd_s * dv.inv_nvt * dgd * dgd;
        const double id_new = detail::channel_current(dv, g.v[2 * j] + d0, g.v[2 * j + 1] + d1);
        const double id_lin_d = c.gm_s * d0 + c.gds_s * d1;
        g.rem[3 * j + 2] = std::fabs(id_new - c.id_a - id_lin_d) +
                           eps8 * (std::fabs(id_new) + std::fabs(c.id_a) + std::fabs(c.gm_s * d0) + std::fabs(c.gds_s * d1));
      }
      g.t.noalias() = g.f_abs * g.rem;
      if (max_abs_of(g.t) <= tol) {
        inverse_of(g.lu, g.unit, out.m);
        for (int r = 0; r < np; ++r) {
          double s = 0.0;
          for (int c = 0; c < np; ++c) s += std::fabs(out.m(r, c)) * g.t[c];
          g.bound[r] = s;
        }
        if (max_abs_of(g.bound) <= tol) {
          if (opt_.confirm) {
            g.bound = g.v + g.d;  // the accepted point (bound is free now)
            for (int j = 0; j < k; ++j) {
              const detail::port_currents cc =
                  detail::evaluate_ports(g.dev[static_cast<std::size_t>(j)], g.bound[2 * j], g.bound[2 * j + 1]);
              g.rem[3 * j] = cc.igs_a;
              g.rem[3 * j + 1] = cc.igd_a;
              g.rem[3 * j + 2] = cc.id_a;
              g.cur[static_cast<std::size_t>(j)] = cc;
            }
            ++evals;
            g.t = p - g.bound;
            g.t.noalias() += f * g.rem;
            if (max_abs_of(g.t) > tol) {
              ++stats_.bound_misses;
            } else {
              out.v = g.bound;
              out.i = g.rem;
              for (int j = 0; j < k; ++j) put_block(out.jf, j, g.cur[static_cast<std::size_t>(j)]);
              return true;
            }
          } else {
            out.v = g.v + g.d;
            for (int j = 0; j < k; ++j) {
              const detail::port_currents& c = g.cur[static_cast<std::size_t>(j)];
              const double d0 = g.d[2 * j], d1 = g.d[2 * j + 1];
              out.i[3 * j] = c.igs_a + c.ggs_s * d0;
              out.i[3 * j + 1] = c.igd_a + c.ggd_s * (d0 - d1);
              out.i[3 * j + 2] = c.id_a + (c.gm_s * d0 + c.gds_s * d1);
              put_block(out.jf, j, c);
            }
            return true;
          }
        }
      }
    }
    g.base = g.v;
    g.step = g.d;
    rn_base = rn;
    may_damp = !limited;
    halvings = 0;
    g.v += g.d;
  }
  return false;
}

// As substep(): the change of p over the sample split into 2, 4, ... parts, each solved
// from the last; what still fails is held at the previous solution and counted.
void dk_engine::substep_general(const Eigen::VectorXd& p, port_set& out, int& evals) noexcept {
  general_path& g = g_;
  for (int level = 1; level <= opt_.max_substep_levels; ++level) {
    const int parts = 1 << level;
    g.cur_pt = g.last;
    g.pc = g.p_last;
    bool ok = true;
    for (int j = 1; j <= parts && ok; ++j) {
      if (j == parts)
        g.pj = p;
      else
        g.pj = g.p_last + (p - g.p_last) * (double(j) / parts);
      g.dp = g.pj - g.pc;
      g.guess = g.cur_pt.v;
      g.guess.noalias() += g.cur_pt.m * g.dp;
      ok = solve_general(g.pj, g.guess, g.next_pt, evals);
      if (ok) {
        g.cur_pt = g.next_pt;
        g.pc = g.pj;
      }
    }
    if (ok) {
      out = g.cur_pt;
      ++stats_.substepped;
      return;
    }
  }
  ++stats_.failed;
  out = g.last;
}

double dk_engine::process_general(double generator_v) noexcept {
  general_path& g = g_;
  const int ns = m_.states, np = 2 * m_.devices, ni = 3 * m_.devices;
  const double ug = sign_ * generator_v;
  in_[ns + 1] = ug;
  g.pre.noalias() = g.w.leftCols(ns + 2) * in_.head(ns + 2);
  g.p = g.q + m_.e.col(0) * supply_v_ + m_.e.col(1) * ug;

  // Warm start as for one JFET: extrapolated v, corrected to first order by M.
  g.v_ext = pred_[0] * g.last.v + pred_[1] * g.v_hist.col(0) + pred_[2] * g.v_hist.col(1) + pred_[3] * g.v_hist.col(2);
  g.p_ext = pred_[0] * g.p_last + pred_[1] * g.p_hist.col(0) + pred_[2] * g.p_hist.col(1) + pred_[3] * g.p_hist.col(2);
  g.dp = g.p - g.p_ext;
  g.guess = g.v_ext;
  g.guess.noalias() += g.last.m * g.dp;

  int evals = 0;
  if (!solve_general(g.p, g.guess, g.trial, evals)) substep_general(g.p, g.trial, evals);

  g.v_hist.col(2) = g.v_hist.col(1);
  g.v_hist.col(1) = g.v_hist.col(0);
  g.v_hist.col(0) = g.last.v;
  g.p_hist.col(2) = g.p_hist.col(1);
  g.p_hist.col(1) = g.p_hist.col(0);
  g.p_hist.col(0) = g.p_last;
  g.last = g.trial;
  g.p_last = g.p;

  in_.tail(ni) = g.last.i;
  g.out = g.pre;
  g.out.noalias() += g.w.rightCols(ni) * in_.tail(ni);
  in_.head(ns) += g.out.head(ns);
  g.q = g.out.segment(ns, np);

  ++stats_.samples;
  stats_.evaluations += evals;
  stats_.max_evaluations = std::max(stats_.max_evaluations, evals);
  return sign_ * g.out[ns + np];
}

}  // namespace pinchoff::model
