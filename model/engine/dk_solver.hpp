#pragma once
// What the DK engine's façade (model/engine/dk_engine.hpp) asks of a solver, and the state
// every solver keeps. Two solvers meet it: single_solver (one JFET, closed-form 2x2 Newton,
// model/engine/dk_single.hpp) and general_solver (k JFETs, LU, dk_general.hpp). A new
// solver derives from dk_solver_base, fills its members when it is built and meets the
// dk_solver concept below; the façade calls it once per call or block, never per sample
// from outside.
#include <concepts>
#include <cstddef>

#include <Eigen/Dense>

#include "model/circuit/network.hpp"
#include "model/circuit/operating_point.hpp"
#include "model/engine/dk_matrices.hpp"
#include "model/engine/dk_stats.hpp"

namespace pinchoff::model {

/// The state both solvers keep, in the network frame (the engine's file comment).
class dk_solver_base {
 public:
  const dk_matrices& matrices() const noexcept { return m_; }
  const dk_options& options() const noexcept { return opt_; }
  const dk_stats& stats() const noexcept { return stats_; }
  void clear_stats() noexcept { stats_ = {}; }
  /// The states of the DC operating point (volts).
  const Eigen::VectorXd& dc_state() const noexcept { return x_dc_; }
  /// Output (real volts) the DC state gives with the generator at 0 V.
  double dc_output_v() const noexcept { return y_dc_; }
  /// The state vector (volts; the solvers carry it as its offset from dc_state()).
  Eigen::VectorXd state() const { return x_dc_ + in_.head(m_.states); }

 protected:
  /// Takes the matrices, checks the options (internal_error naming the field) and reads the
  /// network's sign and supply.
  dk_solver_base(dk_matrices m, const dk_options& opt, const network& net);

  /// [x; u; i] at the DC operating point, as the solvers carry them: offsets from the DC
  /// point (x - x_dc; the supply's offset, always 0, and the generator; i - i_dc for the
  /// 3k device currents), so all zero. The offsets keep the DC point an exact fixed point
  /// of the update as computed (the engine's file comment says why).
  void inputs_at_dc(Eigen::Index currents) {
    in_.setZero(m_.states + 2 + currents);
  }

  /// sensitivity <- (A + cj md) sensitivity, with cj = C Jf (ns x r) and md = M D (r x ns)
  /// at the converged point: the per-sample factor of the monodromy matrix (Aprille &
  /// Trick 1972). The product runs column by column over rows padded to whole packets
  /// (monodromy_step), with AVX2 and FMA where the processor has them and the options allow.
  template <class CJ, class MD>
  void apply_factor(const CJ& cj, const MD& md, Eigen::MatrixXd& sensitivity) {
    track_cj_.topRows(m_.states) = cj;
    track_md_ = md;
    monodromy_step(sensitivity);
  }

  dk_matrices m_;
  dk_options opt_;
  double sign_{1.0};                // network frame = sign * real
  double supply_v_{0};              // network frame
  Eigen::VectorXd x_dc_;
  double y_dc_{0};
  dk_stats stats_;
  Eigen::VectorXd in_;              // [x; u; i] - their DC values: states, supply and generator, device currents
  // apply_factor's scratch: A, C Jf, A + C Jf M D and the product, column-major with
  // track_rows_ rows (ns padded to whole packets of 4, the padding zero); M D (r x ns)
  Eigen::MatrixXd track_a_, track_cj_, track_md_, phi_, tmp_;
  Eigen::Index track_rows_{0};
  bool track_wide_{false};

 private:
  void monodromy_step(Eigen::MatrixXd& sensitivity) noexcept;
};

/// The interface of a solver to the façade. Every call but construction allocates nothing.
///   S(net, op, m, opt)        built for the network at the DC operating point op, with its
///                             discretisation m (m.devices JFETs) and the options
///   process(in, out, n)       n samples: generator open-circuit voltage in (real volts),
///                             voltage across the load out (real volts); in == out allowed
///   track(sensitivity)        sensitivity <- the monodromy factor at the last sample
///   reset()                   back to the DC operating point, statistics cleared
///   set_state(x)              the states (size ns, checked by the façade); the warm-start
///                             history is kept
///   ports_network_v(j)        JFET j's (vgs, vds) at the last sample, network frame
///   sample_loop()             the name of the compiled sample loop that runs
/// plus what dk_solver_base gives (matrices, options, statistics, DC state and output).
template <class S>
concept dk_solver =
    std::derived_from<S, dk_solver_base> &&
    std::constructible_from<S, const network&, const operating_point&, dk_matrices, const dk_options&> &&
    requires(S s, const S cs, const double* in, double* out, std::size_t n, Eigen::MatrixXd& sens,
             const Eigen::Ref<const Eigen::VectorXd>& x, int j) {
      { s.process(in, out, n) } noexcept;
      s.track(sens);
      s.reset();
      s.set_state(x);
      { cs.ports_network_v(j) } noexcept -> std::convertible_to<Eigen::Vector2d>;
      { cs.sample_loop() } noexcept -> std::convertible_to<const char*>;
    };

}  // namespace pinchoff::model
