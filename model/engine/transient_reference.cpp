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
  cap_v_.resize(nc);
  cap_i_.assign(nc, 0.0);
  for (std::size_t k = 0; k < nc; ++k) {
    const net_capacitor& c = net_.capacitors[k];
    caps_[k].g_s = 2.0 * c.farad / t_s_;
    cap_v_[k] = node_v(op.x, c.a) - node_v(op.x, c.b);
  }
  x_ = op.x;
}

double transient_reference::process(double generator_v) {
  // Trapezoidal companion: i_n = G v_n - (G v_{n-1} + i_{n-1}), a current source of
  // -(G v_{n-1} + i_{n-1}) from a to b in parallel with G.
  for (std::size_t k = 0; k < caps_.size(); ++k) caps_[k].i_a = -(caps_[k].g_s * cap_v_[k] + cap_i_[k]);
  const mna_system lin = assemble_linear(net_, caps_, net_.supply_v, net_.sign * generator_v);
  const newton_result r = solve_nodal(net_, lin, x_, opt_);
  ++stats_.samples;
  stats_.iterations += r.iterations;
  if (!r.converged) ++stats_.failed;
  for (std::size_t k = 0; k < caps_.size(); ++k) {
    const net_capacitor& c = net_.capacitors[k];
    cap_v_[k] = node_v(x_, c.a) - node_v(x_, c.b);
    cap_i_[k] = caps_[k].g_s * cap_v_[k] + caps_[k].i_a;
  }
  return net_.sign * node_v(x_, net_.output_node);
}

Eigen::Vector2d transient_reference::ports_v(int device) const {
  const net_jfet& q = net_.jfets.at(static_cast<std::size_t>(device));
  const double vg = node_v(x_, q.gate), vs = node_v(x_, q.source), vd = node_v(x_, q.drain);
  return net_.sign * Eigen::Vector2d(vg - vs, vd - vs);
}

}  // namespace pinchoff::model
