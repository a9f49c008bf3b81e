#include "model/engine/transient_reference.hpp"

#include <cmath>

#include "base/error.hpp"

namespace pinchoff::model {

transient_reference::transient_reference(const network& net, const operating_point& op, double sample_rate_hz,
                                         const nodal_options& opt)
    : net_(net), opt_(opt) {
  if (!(sample_rate_hz > 0.0) || !std::isfinite(sample_rate_hz))
    throw internal_error("transient_reference: the sample rate must be a positive number of hertz");
  t_s_ = 1.0 / sample_rate_hz;
  const std::size_t nc = net_.capacitors.size();
  caps_.assign(nc, cap_treatment{cap_treatment::kind::companion, 0.0, 0.0, 0.0});
  cap_dv_.assign(nc, 0.0);
  cap_i_.assign(nc, 0.0);
  for (std::size_t k = 0; k < nc; ++k) caps_[k].g_s = 2.0 * net_.capacitors[k].farad / t_s_;
  const std::size_t nl = net_.inductors.size();
  inds_.assign(nl, ind_treatment{ind_treatment::kind::companion, 0.0, 0.0});
  ind_v_.assign(nl, 0.0);
  ind_di_.assign(nl, 0.0);
  for (std::size_t j = 0; j < nl; ++j) inds_[j].g_s = t_s_ / (2.0 * net_.inductors[j].henry);
  // The companion system has no branch unknowns for the inductors: op.x without them.
  x_dc_ = op.x;
  if (nl > 0) {
    const int first = inductor_current_unknown(net_, 0), n = static_cast<int>(op.x.size());
    Eigen::VectorXd y(n - static_cast<int>(nl));
    y << op.x.head(first), op.x.tail(n - first - static_cast<int>(nl));
    x_dc_ = y;
  }
  // The constant part of the offset system, formed once: the sources at their DC values
  // (the generator at 0) and every inductor as a source of its DC current, less the linear
  // part at the DC point. At the DC point it balances the JFETs' currents (to the DC
  // solve's residual), so silence stays at dx = 0. The companion conductances are not in
  // it: a capacitor's G v_dc cancels against its history term, and an inductor is a short
  // at DC (no voltage across it).
  {
    std::vector<ind_treatment> dc_inds(nl, ind_treatment{ind_treatment::kind::companion, 0.0, 0.0});
    for (std::size_t j = 0; j < nl; ++j) dc_inds[j].i_a = op.x[inductor_current_unknown(net_, static_cast<int>(j))];
    const mna_system dc = assemble_linear(net_, uniform_caps(net_, cap_treatment::kind::open), net_.supply_v, 0.0, dc_inds);
    dc_rhs_ = dc.rhs - dc.a * x_dc_;
  }
  dx_ = Eigen::VectorXd::Zero(x_dc_.size());
  x_ = x_dc_;
}

double transient_reference::process(double generator_v) {
  // Trapezoidal companion: i_n = G v_n - (G v_{n-1} + i_{n-1}), a current source of
  // -(G v_{n-1} + i_{n-1}) from a to b in parallel with G; in offsets from the DC voltage,
  // -(G dv_{n-1} + i_{n-1}) (a capacitor carries no DC current).
  for (std::size_t k = 0; k < caps_.size(); ++k) caps_[k].i_a = -(caps_[k].g_s * cap_dv_[k] + cap_i_[k]);
  // Inductors: i_n = i_{n-1} + G (v_n + v_{n-1}), G = T/(2L): a current source of
  // i_{n-1} + G v_{n-1} from a to b in parallel with G; in offsets from the DC current,
  // di_{n-1} + G v_{n-1} (the DC current is in the constant part).
  for (std::size_t j = 0; j < inds_.size(); ++j) inds_[j].i_a = ind_di_[j] + inds_[j].g_s * ind_v_[j];
  // The offset system: the companions and the sources' offsets from their DC values (the
  // supply none, the generator all of it), plus the constant part.
  mna_system lin = assemble_linear(net_, caps_, 0.0, net_.sign * generator_v, inds_);
  lin.rhs += dc_rhs_;
  lin.origin = x_dc_;
  const newton_result r = solve_nodal(net_, lin, dx_, opt_);
  ++stats_.samples;
  stats_.iterations += r.iterations;
  if (!r.converged) ++stats_.failed;
  for (std::size_t k = 0; k < caps_.size(); ++k) {
    const net_capacitor& c = net_.capacitors[k];
    cap_dv_[k] = node_v(dx_, c.a) - node_v(dx_, c.b);
    cap_i_[k] = caps_[k].g_s * cap_dv_[k] + caps_[k].i_a;
  }
  for (std::size_t j = 0; j < inds_.size(); ++j) {
    const net_inductor& l = net_.inductors[j];
    ind_v_[j] = node_v(dx_, l.a) - node_v(dx_, l.b);
    ind_di_[j] = inds_[j].g_s * ind_v_[j] + inds_[j].i_a;
  }
  x_ = x_dc_ + dx_;
  return net_.sign * node_v(x_, net_.output_node);
}

Eigen::Vector2d transient_reference::ports_v(int device) const {
  const net_jfet& q = net_.jfets.at(static_cast<std::size_t>(device));
  const double vg = node_v(x_, q.gate), vs = node_v(x_, q.source), vd = node_v(x_, q.drain);
  return net_.sign * Eigen::Vector2d(vg - vs, vd - vs);
}

}  // namespace pinchoff::model
