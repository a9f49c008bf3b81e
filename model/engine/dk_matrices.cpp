#include "model/engine/dk_matrices.hpp"

#include <cmath>
#include <numbers>
#include <string>
#include <vector>

#include "base/error.hpp"
#include "base/units.hpp"
#include "model/circuit/nodal.hpp"

namespace pinchoff::model {
namespace {

inline int row(int node) noexcept { return node - 1; }

// rows * z for rows that read one node, or the difference of two scaled alike (every row
// discrete_mna builds): c (z_a - z_b), rounded as the difference first.
Eigen::MatrixXd read_rows(const Eigen::MatrixXd& rows, const Eigen::MatrixXd& z) {
  Eigen::MatrixXd out = Eigen::MatrixXd::Zero(rows.rows(), z.cols());
  for (Eigen::Index r = 0; r < rows.rows(); ++r) {
    Eigen::Index a = -1, b = -1;
    for (Eigen::Index k = 0; k < rows.cols(); ++k) {
      if (rows(r, k) == 0.0) continue;
      if (a < 0) a = k;
      else if (b < 0) b = k;
      else throw internal_error("discretise: a read row with more than two entries");
    }
    if (a < 0) continue;
    if (b < 0) {
      out.row(r) = rows(r, a) * z.row(a);
    } else {
      if (rows(r, a) != -rows(r, b)) throw internal_error("discretise: a read row that is not a difference");
      out.row(r) = rows(r, a) * (z.row(a) - z.row(b));
    }
  }
  return out;
}

}  // namespace

double inductor_state_ohm(double henry) noexcept { return 2.0 * std::numbers::pi * 1000.0 * henry; }

discrete_network discrete_mna(const network& net, double sample_rate_hz) {
  if (!(sample_rate_hz > 0.0) || !std::isfinite(sample_rate_hz))
    throw internal_error("discretise: the sample rate must be a positive number of hertz");
  const double t = 1.0 / sample_rate_hz;
  const int nc = static_cast<int>(net.capacitors.size());
  const int nl = static_cast<int>(net.inductors.size());
  const int ns = nc + nl;
  const int nd = net.devices();
  if (nd < 1) throw internal_error("discretise: the network has no JFET");
  const int ni = 3 * nd;  // device currents

  // S: resistors, companion conductances 2C/T and the two sources (supply first, then the
  // generator: branch unknowns nu and nu + 1, as assemble_linear orders them).
  std::vector<cap_treatment> caps(net.capacitors.size());
  for (std::size_t k = 0; k < caps.size(); ++k)
    caps[k] = {cap_treatment::kind::companion, 0.0, 2.0 * net.capacitors[k].farad / t, 0.0};
  std::vector<ind_treatment> inds(net.inductors.size());
  for (std::size_t j = 0; j < inds.size(); ++j) inds[j] = {ind_treatment::kind::companion, t / (2.0 * net.inductors[j].henry), 0.0};
  const mna_system lin = assemble_linear(net, caps, 0.0, 0.0, inds);
  const int n = static_cast<int>(lin.a.rows());
  const int nu = lin.node_unknowns;

  discrete_network d;
  d.s = lin.a;
  d.node_unknowns = nu;
  d.states = ns;
  d.devices = nd;
  // Right-hand sides: S z = Nx q + Nu u - Nl i.
  d.rhs = Eigen::MatrixXd::Zero(n, ns + 2 + ni);
  Eigen::MatrixXd& rhs = d.rhs;
  for (int k = 0; k < nc; ++k) {
    const net_capacitor& c = net.capacitors[static_cast<std::size_t>(k)];
    const double g = caps[static_cast<std::size_t>(k)].g_s;
    // Companion branch current a -> b is G v - G q: the source G q enters at a.
    if (c.a != 0) rhs(row(c.a), k) += g;
    if (c.b != 0) rhs(row(c.b), k) -= g;
  }
  for (int j = 0; j < nl; ++j) {
    const net_inductor& l = net.inductors[static_cast<std::size_t>(j)];
    // Companion branch current a -> b is G v + h, h = q / rho: the source h leaves a.
    const double per_v = 1.0 / inductor_state_ohm(l.henry);
    if (l.a != 0) rhs(row(l.a), nc + j) -= per_v;
    if (l.b != 0) rhs(row(l.b), nc + j) += per_v;
  }
  rhs(nu, ns) = 1.0;
  rhs(nu + 1, ns + 1) = 1.0;
  // Device currents leave these nodes: igs gate -> source, igd gate -> drain, id drain -> source.
  auto leave = [&](int node, int col, double s) {
    if (node != 0) rhs(row(node), ns + 2 + col) -= s;  // minus: -Nl i
  };
  for (int j = 0; j < nd; ++j) {
    const net_jfet& q = net.jfets[static_cast<std::size_t>(j)];
    leave(q.gate, 3 * j, 1.0);
    leave(q.source, 3 * j, -1.0);
    leave(q.gate, 3 * j + 1, 1.0);
    leave(q.drain, 3 * j + 1, -1.0);
    leave(q.drain, 3 * j + 2, 1.0);
    leave(q.source, 3 * j + 2, -1.0);
  }

  // What is read from the solution z: V(a) - V(b) as a row over z.
  auto diff = [&](int a, int b) -> Eigen::RowVectorXd {
    Eigen::RowVectorXd r = Eigen::RowVectorXd::Zero(n);
    if (a != 0) r[row(a)] += 1.0;
    if (b != 0) r[row(b)] -= 1.0;
    return r;
  };
  // Capacitor voltages v_n; q_n = 2 v_n - q_{n-1}. Inductor voltages likewise;
  // q_n = q_{n-1} + 2 G rho v_n.
  d.state_rows.resize(ns, n);
  d.state_self = Eigen::VectorXd::Constant(ns, -1.0);
  for (int k = 0; k < nc; ++k) {
    const net_capacitor& c = net.capacitors[static_cast<std::size_t>(k)];
    d.state_rows.row(k) = 2.0 * diff(c.a, c.b);
  }
  for (int j = 0; j < nl; ++j) {
    const net_inductor& l = net.inductors[static_cast<std::size_t>(j)];
    d.state_rows.row(nc + j) = (2.0 * inds[static_cast<std::size_t>(j)].g_s * inductor_state_ohm(l.henry)) * diff(l.a, l.b);
    d.state_self[nc + j] = 1.0;
  }
  d.port_rows.resize(2 * nd, n);
  for (int j = 0; j < nd; ++j) {
    const net_jfet& q = net.jfets[static_cast<std::size_t>(j)];
    d.port_rows.row(2 * j) = diff(q.gate, q.source);
    d.port_rows.row(2 * j + 1) = diff(q.drain, q.source);
  }
  d.out_row = diff(net.output_node, 0);
  return d;
}

matrix_ld refined_solve(const Eigen::FullPivLU<matrix_ld>& lu, const matrix_ld& a, const matrix_ld& rhs) {
  matrix_ld x = lu.solve(rhs);
  x += lu.solve(matrix_ld(rhs - a * x));
  return x;
}

dk_matrices discretise(const network& net, double sample_rate_hz) {
  const discrete_network dn = discrete_mna(net, sample_rate_hz);
  const int ns = dn.states, nd = dn.devices, ni = 3 * nd;

  // S^-1 [Nx Nu -Nl] in extended precision, with one refinement step, then rounded: the
  // states are history voltages of the order of the supply, and the outputs (a coupled
  // output sits at 0 V) are differences of them, so rounding in these matrices shows
  // directly as an output offset (about 1e-10 V with a plain double solve).
  const matrix_ld s_ld = dn.s.cast<long double>();
  const matrix_ld rhs_ld = dn.rhs.cast<long double>();
  const Eigen::FullPivLU<matrix_ld> lu(s_ld);
  dk_matrices m;
  m.states = ns;
  m.devices = nd;
  m.sample_rate_hz = sample_rate_hz;
  m.rcond = lu.isInvertible() ? static_cast<double>(lu.rcond()) : 0.0;
  if (!(m.rcond >= 1e-15))
    throw internal_error(source_prefix(net) + "the stage's network matrix at " + base::format_si(sample_rate_hz, "Hz") +
                         " is singular or too ill-conditioned (rcond " + base::format_number(m.rcond, 2) +
                         "): the parts' conductances lie too far apart, from " + widest_parts(net, sample_rate_hz));
  const Eigen::MatrixXd z = refined_solve(lu, s_ld, rhs_ld).cast<double>();  // n x (ns + 2 + 3k): columns q, u, i

  const Eigen::MatrixXd vc = read_rows(dn.state_rows, z);
  m.a = vc.leftCols(ns);
  m.a.diagonal() += dn.state_self;
  m.b = vc.middleCols(ns, 2);
  m.c = vc.rightCols(ni);
  const Eigen::MatrixXd vp = read_rows(dn.port_rows, z);
  m.d = vp.leftCols(ns);
  m.e = vp.middleCols(ns, 2);
  m.f = vp.rightCols(ni);
  const Eigen::RowVectorXd out = read_rows(dn.out_row, z);
  m.d_out = out.head(ns);
  m.e_out = out.segment(ns, 2);
  m.f_out = out.tail(ni);
  return m;
}

Eigen::MatrixXd stacked_update(const dk_matrices& m, int rows) {
  const int ns = m.states, np = 2 * m.devices, ni = 3 * m.devices;
  if (rows < ns + np + 1) throw internal_error("stacked_update: fewer rows than the update has");
  Eigen::MatrixXd w = Eigen::MatrixXd::Zero(rows, ns + 2 + ni);
  w.topRows(ns) << m.a - Eigen::MatrixXd::Identity(ns, ns), m.b, m.c;
  w.middleRows(ns, np) << m.d * m.a, m.d * m.b, m.d * m.c;
  w.row(ns + np) << m.d_out, m.e_out, m.f_out;
  return w;
}

Eigen::VectorXd dc_states(const network& net, const Eigen::VectorXd& x) {
  const std::size_t nc = net.capacitors.size(), nl = net.inductors.size();
  Eigen::VectorXd q(static_cast<Eigen::Index>(nc + nl));
  for (std::size_t k = 0; k < nc; ++k)
    q[static_cast<Eigen::Index>(k)] = node_v(x, net.capacitors[k].a) - node_v(x, net.capacitors[k].b);
  for (std::size_t j = 0; j < nl; ++j)
    q[static_cast<Eigen::Index>(nc + j)] =
        inductor_state_ohm(net.inductors[j].henry) * x[inductor_current_unknown(net, static_cast<int>(j))];
  return q;
}

}  // namespace pinchoff::model
