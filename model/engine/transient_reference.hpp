#pragma once
// The plain time-domain reference: on every sample the whole network is solved by the
// general nodal Newton of model/circuit/nodal.hpp (assemble_linear with trapezoidal companion
// capacitors, G = 2C/T, and inductors, G = T/(2L), then solve_nodal), with the same device model and the same
// trapezoidal rule as the DK engine. Slow and simple on purpose: tests compare the fast
// engine with it sample by sample.
//
// The unknowns are offsets from the DC operating point, x = x_dc + dx (mna_system::origin).
// A bypass capacitor's companion conductance 2C/T is tens of siemens at 384 kHz; solved in
// absolute volts, its history current G v_{n-1} is tens of amperes, and the rounding of the
// node voltages (eps times that current over the smallest conductance the node sees) made
// the last Newton steps wander by up to about 1e-9 V. In offsets the history is
// -(G dv_{n-1} + i_{n-1}) with dv the capacitor's voltage less its DC voltage (G v_dc cancels
// against the DC point), and an inductor's is its current less its DC current. Where a
// coupling capacitor of siemens carries a swing of volts into a load of megohms the offsets
// are as large as the voltages, and each Newton step's solve is refined with a residual
// summed as if in twice the working precision (nodal_options::compensated_refinement),
// with the devices' tangents applied apart from the network's matrix: stamped into a
// diagonal of siemens, a channel's conductance keeps only the bits above that entry's last
// place, and with offsets of volts the Newton's fixed point moved by 1-3e-9 V where that
// node sees megohms.
// Neither shares code with the engine: this is what the engine is checked against.
#include <vector>

#include <Eigen/Dense>

#include "model/circuit/network.hpp"
#include "model/circuit/nodal.hpp"
#include "model/circuit/operating_point.hpp"

namespace pinchoff::model {

struct reference_stats {
  long long samples{0};
  long long iterations{0};  ///< nodal Newton iterations, all samples
  long long failed{0};      ///< samples whose nodal Newton did not converge
};

/// Nodal Newton tolerances for the reference: a last step below 1e-10 V + 1e-12 |v| (the
/// error after it is far smaller still, by quadratic convergence), each step's linear solve
/// refined with a compensated residual. With the unknowns as offsets from the DC point and
/// that refinement, the samples of 1000 random 2-4 stage chains driven to clipping move by
/// at most 1.3e-10 V when the step tolerance is made 10x or 100x tighter, and every sample
/// converges at this tolerance. Not tighter: at 10x, 16 samples in 8 of those chains no
/// longer converge within the iteration limit (318 samples in 58 chains at 100x): the last
/// iterates alternate between points about 5e-11 V apart whose KCL residuals are both at
/// the rounding floor, 1e-4 of the residual tolerance (a node's voltage is only fixed to
/// the rounding of the currents that meet there, over its conductance).
inline nodal_options transient_nodal_options() {
  nodal_options o;
  o.vtol_v = 1e-10;
  o.vtol_rel = 1e-12;
  o.compensated_refinement = true;
  return o;
}

class transient_reference {
 public:
  /// Starts at the DC operating point `op`: every capacitor at its DC voltage, no current;
  /// every inductor at its DC current, no voltage.
  transient_reference(const network& net, const operating_point& op, double sample_rate_hz,
                      const nodal_options& opt = transient_nodal_options());

  /// One sample: generator open-circuit voltage in, voltage across the load out (real volts).
  double process(double generator_v);

  /// Port voltages (vgs, vds) of JFET `device` (0: the first) at the last sample, real signs.
  Eigen::Vector2d ports_v(int device = 0) const;
  /// The full network solution of the last sample (network frame).
  const Eigen::VectorXd& solution() const noexcept { return x_; }
  const reference_stats& stats() const noexcept { return stats_; }

 private:
  network net_;
  nodal_options opt_;
  double t_s_{0};
  std::vector<cap_treatment> caps_;
  std::vector<double> cap_dv_, cap_i_;  // voltage a - b less its DC voltage, and current a -> b, of each capacitor
  std::vector<ind_treatment> inds_;
  std::vector<double> ind_v_, ind_di_;  // voltage a - b, and current a -> b less its DC current, of each inductor
  Eigen::VectorXd x_dc_;   // the DC operating point (companion layout: no inductor unknowns)
  Eigen::VectorXd dc_rhs_;  // the DC point's constant part of the offset system (see the constructor)
  Eigen::VectorXd dx_;     // the last solution, as offsets from x_dc_
  Eigen::VectorXd x_;      // x_dc_ + dx_
  reference_stats stats_;
};

}  // namespace pinchoff::model
