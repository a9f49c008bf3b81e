#include "model/engine/dk_probes.hpp"

#include <string>

#include "base/error.hpp"
#include "model/engine/dk_matrices.hpp"

namespace pinchoff::model {

dk_probes::dk_probes(const network& net, std::vector<int> nodes, double sample_rate_hz) : nodes_(std::move(nodes)) {
  for (int node : nodes_)
    if (node < 1 || node >= net.node_count)
      throw internal_error("dk_probes: node " + std::to_string(node) + " is not a node of the network");
  sign_ = net.sign;
  supply_v_ = net.supply_v;
  for (const net_jfet& q : net.jfets) dev_.push_back(detail::device_consts::of(q.device, net.vt_v));
  // Each probe's row is discretise's output row of the same network with that node across
  // the output: the same stamps, the same extended-precision solve, so the same bits as the
  // engine's own output row where the node is the load.
  network probe_net = net;
  for (std::size_t p = 0; p < nodes_.size(); ++p) {
    probe_net.output_node = nodes_[p];
    const dk_matrices m = discretise(probe_net, sample_rate_hz);
    if (p == 0) {
      a_ = m.a;
      b_ = m.b;
      c_ = m.c;
      w_.resize(static_cast<Eigen::Index>(nodes_.size()), m.states + 2 + 3 * m.devices);
    }
    w_.row(static_cast<Eigen::Index>(p)) << m.d_out, m.e_out, m.f_out;
  }
  if (nodes_.empty()) {
    const dk_matrices m = discretise(net, sample_rate_hz);
    a_ = m.a;
    b_ = m.b;
    c_ = m.c;
    w_.resize(0, m.states + 2 + 3 * m.devices);
  }
}

void dk_probes::inputs(const Eigen::Ref<const Eigen::VectorXd>& x_prev, double generator_v, std::span<const double> ports,
                       Eigen::VectorXd& in) const {
  const int ns = states(), nd = devices();
  if (x_prev.size() != ns || static_cast<int>(ports.size()) < 2 * nd)
    throw internal_error("dk_probes: wrong number of states or port voltages");
  in.resize(ns + 2 + 3 * nd);
  in.head(ns) = x_prev;
  in[ns] = supply_v_;
  in[ns + 1] = sign_ * generator_v;
  for (int j = 0; j < nd; ++j) {
    const detail::port_currents c = detail::evaluate_ports(dev_[static_cast<std::size_t>(j)], ports[2 * j], ports[2 * j + 1]);
    in[ns + 2 + 3 * j] = c.igs_a;
    in[ns + 2 + 3 * j + 1] = c.igd_a;
    in[ns + 2 + 3 * j + 2] = c.id_a;
  }
}

void dk_probes::evaluate(const Eigen::Ref<const Eigen::VectorXd>& x_prev, double generator_v, std::span<const double> ports,
                         std::span<double> out) const {
  if (static_cast<int>(out.size()) < size()) throw internal_error("dk_probes: output too short");
  Eigen::VectorXd in;
  inputs(x_prev, generator_v, ports, in);
  const Eigen::VectorXd v = w_ * in;
  for (int p = 0; p < size(); ++p) out[static_cast<std::size_t>(p)] = sign_ * v[p];
}

std::vector<double> dk_probes::trace(const Eigen::Ref<const Eigen::VectorXd>& x0, std::span<const double> drive,
                                     std::span<const double> ports) const {
  const int ns = states(), nd = devices(), np = size();
  const std::size_t per = 2 * static_cast<std::size_t>(nd);
  if (ports.size() < drive.size() * per) throw internal_error("dk_probes: fewer port voltages than samples");
  std::vector<double> out(drive.size() * static_cast<std::size_t>(np));
  Eigen::VectorXd x = x0, next(ns), in, v(np);
  for (std::size_t n = 0; n < drive.size(); ++n) {
    inputs(x, drive[n], ports.subspan(n * per, per), in);
    v.noalias() = w_ * in;
    for (int p = 0; p < np; ++p) out[n * static_cast<std::size_t>(np) + static_cast<std::size_t>(p)] = sign_ * v[p];
    next.noalias() = a_ * in.head(ns);
    next.noalias() += b_ * in.segment(ns, 2);
    next.noalias() += c_ * in.tail(3 * nd);
    x.swap(next);
  }
  return out;
}

}  // namespace pinchoff::model
