#include "model/circuit/operating_point.hpp"

#include <cmath>
#include <string>

#include "base/error.hpp"
#include "base/units.hpp"

namespace pinchoff::model {

terminal_point terminals_of(const network& net, const Eigen::VectorXd& x, int device) {
  if (device < 0 || device >= net.devices()) throw internal_error("terminals_of: no such JFET in the network");
  const net_jfet& q = net.jfets[static_cast<std::size_t>(device)];
  const double vd = node_v(x, q.drain), vg = node_v(x, q.gate), vs = node_v(x, q.source);
  const channel_eval ch = drain_current(q.device, vg - vs, vd - vs);
  const double ig = gate_source_current(q.device, vg - vs, net.vt_v).i_a +
                    junction_current(q.device, vg - vd, net.vt_v).i_a;
  terminal_point t;
  t.vg_v = net.sign * vg;
  t.vs_v = net.sign * vs;
  t.vd_v = net.sign * vd;
  t.vgs_v = net.sign * (vg - vs);
  t.vds_v = net.sign * (vd - vs);
  t.id_a = net.sign * ch.id_a;
  t.ig_a = net.sign * ig;
  t.region = region_of(q.device, vg - vs, vd - vs);
  return t;
}

newton_result solve_point(const network& net, std::span<const cap_treatment> caps, double generator_v,
                          Eigen::VectorXd& x) {
  const mna_system lin = assemble_linear(net, caps, net.supply_v, generator_v);
  return solve_nodal(net, lin, x);
}

operating_point solve_operating_point(const network& net) {
  const std::vector<cap_treatment> open = uniform_caps(net, cap_treatment::kind::open);
  operating_point op;
  // Starting guess: the linear network alone (the JFET treated as off).
  const mna_system lin = assemble_linear(net, open, net.supply_v, 0.0);
  Eigen::VectorXd x = lin.a.fullPivLu().solve(lin.rhs);
  if (!x.allFinite()) x = Eigen::VectorXd::Zero(lin.a.rows());
  op.newton = solve_nodal(net, lin, x);

  if (!op.newton.converged) {
    // Source stepping: ramp the supply from a small fraction to full, each step starting
    // from the last solution (common practice in SPICE-family DC solvers).
    for (int steps : {10, 40, 200}) {
      Eigen::VectorXd y = Eigen::VectorXd::Zero(lin.a.rows());
      bool ok = true;
      for (int k = 1; k <= steps && ok; ++k) {
        const mna_system part = assemble_linear(net, open, net.supply_v * k / steps, 0.0);
        op.newton = solve_nodal(net, part, y);
        ok = op.newton.converged;
      }
      if (ok) {
        x = y;
        op.source_steps = steps;
        break;
      }
    }
  }
  if (!op.newton.converged) {
    // Name the parts most likely at fault: the two whose conductances lie furthest apart.
    const std::string parts = widest_parts(net, 0.0);
    throw internal_error(source_prefix(net) + "no DC operating point found: Newton did not converge, even with source stepping (largest "
                         "current left unbalanced at a node: " + base::format_si(op.newton.residual_a, "A") + ")" +
                         (parts.empty() ? std::string() : "; the values furthest apart are " + parts));
  }
  op.x = x;
  op.at = terminals_of(net, x);
  return op;
}

}  // namespace pinchoff::model
