#pragma once
// Voltages of chosen nodes alongside a DK engine run. The engine (dk_engine.hpp) puts out
// only the load voltage, y_n = Do x_{n-1} + Eo u_n + Fo i_n; any other node is another such
// row, v_n = Dp x_{n-1} + Ep u_n + Fp i_n, computed exactly as discretise computes the
// output row (the network's matrices with that node as the output). The device currents
// i_n follow from the converged port voltages through the device equations
// (dk_device.hpp), so a probe needs only what the engine already shows: its state before
// the sample (dk_engine::state()), the generator voltage and every JFET's port voltages
// after it (dk_engine::ports_network_v()).
//
// Nothing here runs inside the engine's sample loop: an analysis records the port voltages
// of the samples it wants (steady_state_options::record_ports) and traces them afterwards.
#include <span>
#include <vector>

#include <Eigen/Dense>

#include "model/circuit/network.hpp"
#include "model/engine/dk_device.hpp"

namespace pinchoff::model {

class dk_probes {
 public:
  /// Probes for `nodes` (each 1 .. node_count - 1) of `net` at `sample_rate_hz` (> 0), the
  /// rate of the engine whose run they follow. Throws internal_error as discretise does,
  /// and for a node outside the network.
  dk_probes(const network& net, std::vector<int> nodes, double sample_rate_hz);

  int size() const noexcept { return static_cast<int>(nodes_.size()); }
  int states() const noexcept { return static_cast<int>(a_.rows()); }
  int devices() const noexcept { return static_cast<int>(dev_.size()); }
  const std::vector<int>& nodes() const noexcept { return nodes_; }

  /// The probed node voltages (real volts, to ground) at one sample: from the state before
  /// it (size states(), network frame, as dk_engine::state() before process()), the
  /// generator's open-circuit voltage (real volts) and every JFET's (vgs, vds) after it
  /// (2 * devices() values, network frame, as dk_engine::ports_network_v()). out: size().
  void evaluate(const Eigen::Ref<const Eigen::VectorXd>& x_prev, double generator_v, std::span<const double> ports,
                std::span<double> out) const;

  /// A run traced: from the state `x0` before the first sample, for each of the samples of
  /// `drive` (real volts) with its ports (2 * devices() values a sample), the probed node
  /// voltages (real volts), sample after sample (size() values a sample); the state is
  /// carried from sample to sample by the engine's own update x_n = A x_{n-1} + B u_n + C i_n.
  std::vector<double> trace(const Eigen::Ref<const Eigen::VectorXd>& x0, std::span<const double> drive,
                            std::span<const double> ports) const;

 private:
  // [x; u; i] of one sample, network frame, into in_.
  void inputs(const Eigen::Ref<const Eigen::VectorXd>& x_prev, double generator_v, std::span<const double> ports,
              Eigen::VectorXd& in) const;

  std::vector<int> nodes_;
  Eigen::MatrixXd a_, b_, c_;  // the state update (discretise)
  Eigen::MatrixXd w_;          // probe rows: [Dp Ep Fp], size() x (ns + 2 + 3k)
  std::vector<detail::device_consts> dev_;
  double supply_v_{0};         // network frame
  double sign_{1.0};           // network frame = sign * real
};

}  // namespace pinchoff::model
