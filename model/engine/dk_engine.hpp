#pragma once
// Nonlinear state-space ("DK") engine for a network: the nodal DK method (Yeh, Abel &
// Smith, IEEE TASLP 18(4), 2010; Holters & Zölzer, EUSIPCO 2015) on the modified nodal
// system of the network (Ho, Ruehli & Brennan, IEEE TCAS 22(6), 1975).
//
// Resistors, trapezoidal capacitor companions (G = 2C/T) and the two ideal sources are
// stamped into one constant MNA matrix S, inverted once. Each of the network's k JFETs
// enters through its three currents [igs(vgs), igd(vgs - vds), id(vgs, vds)] (an incidence
// matrix) and is controlled by its two port voltages [vgs, vds] (read through another);
// i (3k) and v (2k) stack them device after device. With u = [supply_v, generator_v]
// this gives, per sample n,
//
//   x_n = A x_{n-1} + B u_n + C i_n
//   v_n = D x_{n-1} + E u_n + F i_n,   i_n = f(v_n)
//   y_n = Do x_{n-1} + Eo u_n + Fo i_n
//
// and only the 2k port voltages are found by Newton.
//
// The engine is a façade over two solvers (model/engine/dk_solver.hpp says what a solver
// gives): single_solver for one JFET (closed-form 2x2 solves, a sample loop compiled per
// state count; dk_single.hpp) and general_solver for k JFETs (the device Jacobian Jf block
// diagonal, 3x2 per JFET, and I - F Jf factored by partial-pivoting LU each iteration;
// dk_general.hpp). They share the discretisation (dk_matrices.hpp), the device
// (dk_device.hpp), the acceptance's per-device part (dk_acceptance.hpp) and the DC start,
// junction limiting, damping and sub-stepping (dk_steps.hpp). The façade picks the solver
// once, when it is built, and dispatches once per call or block, never per sample.
//
// State: for capacitor k, the trapezoidal history voltage q_k = v_k + i_k / G_k, with the
// capacitor's voltage v_k and current i_k (a -> b) at the same sample and G_k = 2 C_k / T.
// The companion of the next sample is then the conductance G_k in series with the voltage
// q_k (q_{k,n} = 2 v_{k,n} - q_{k,n-1}). At DC (no capacitor current) q_k equals the
// capacitor voltage, so the states are volts and start at the DC operating point.
//
// The solvers carry x, i, u and y as offsets from the DC point (x_dc, the states of the
// DC operating point; i_dc, the device currents there; the supply): the update computes
// x_n - x_dc = A (x_{n-1} - x_dc) + B (u_n - u_dc) + C (i_n - i_dc), which is the same
// equation in exact arithmetic (x_dc = A x_dc + B u_dc + C i_dc at DC), but makes x_dc an
// exact fixed point of the update as computed. Carried as absolute values, the DC point of
// the rounded matrices lies off the network's: where a slow state (100 MΩ and 1 µF, a
// time constant of 3.8e7 samples) holds a volt of DC, I - A has an eigenvalue near 5e-8,
// and rounding of 1e-16 in A, B, C moved the engine's DC by several nanovolts from the
// reference solver's. Offsets also keep the sums small at rest, so their rounding is.
//
// Everything inside is the n-channel network frame (model/circuit/network.hpp); the engine's
// inputs and outputs are real (bench) signs: network u = sign * real u, real y = sign * y.
#include <cstddef>
#include <span>
#include <variant>

#include <Eigen/Dense>

#include "model/circuit/network.hpp"
#include "model/circuit/operating_point.hpp"
#include "model/engine/dk_general.hpp"
#include "model/engine/dk_matrices.hpp"
#include "model/engine/dk_single.hpp"
#include "model/engine/dk_solver.hpp"
#include "model/engine/dk_stats.hpp"

namespace pinchoff::model {

static_assert(dk_solver<single_solver> && dk_solver<general_solver>);

class dk_engine {
 public:
  /// Engine for `net` at the (oversampled) rate, starting at the DC operating point `op`.
  dk_engine(const network& net, const operating_point& op, double sample_rate_hz, const dk_options& opt = {});
  /// The same, solving the DC operating point first (throws as solve_operating_point does).
  dk_engine(const network& net, double sample_rate_hz, const dk_options& opt = {});

  /// One sample: generator open-circuit voltage in (real volts, finite), voltage across
  /// the load out (real volts). Allocates nothing.
  double process(double generator_v) noexcept;
  /// A block; in and out may be the same span; sizes must match. Allocates nothing.
  void process(std::span<const double> in, std::span<double> out) noexcept;

  /// The same as process(), and `sensitivity` <- (d x_n / d x_{n-1}) * sensitivity, the
  /// per-sample factor of the monodromy matrix (Aprille & Trick 1972) at the converged
  /// point: A + C Jf (I - F Jf)^-1 D. `sensitivity` is ns x ns. Allocates nothing.
  double process_tracked(double generator_v, Eigen::MatrixXd& sensitivity);

  /// Back to the DC operating point, statistics cleared.
  void reset();

  int states() const noexcept { return base().matrices().states; }
  /// Number of JFETs.
  int devices() const noexcept { return base().matrices().devices; }
  /// The state vector (network frame, volts; see the file comment).
  Eigen::VectorXd state() const { return base().state(); }
  /// Sets the states (size ns); the warm-start history is kept.
  void set_state(const Eigen::Ref<const Eigen::VectorXd>& x);
  const Eigen::VectorXd& dc_state() const noexcept { return base().dc_state(); }

  /// Port voltages (vgs, vds) of JFET `device` (0..devices()-1) at the last sample, real signs.
  Eigen::Vector2d ports_v(int device = 0) const noexcept { return sign_ * ports_network_v(device); }
  /// Network frame (n-channel mirror), as used inside.
  Eigen::Vector2d ports_network_v(int device = 0) const noexcept {
    return std::visit([device](const auto& s) -> Eigen::Vector2d { return s.ports_network_v(device); }, solver_);
  }
  /// Output (real volts) the DC state gives with the generator at 0 V.
  double dc_output_v() const noexcept { return base().dc_output_v(); }

  const dk_stats& stats() const noexcept { return base().stats(); }
  /// Which compiled sample loop runs: "AVX2+FMA" or "portable"; two JFETs with AVX2 + FMA
  /// take a loop of their own, "AVX2+FMA, two-JFET" (the general solver's other AVX2+FMA
  /// loop covers 3-6 JFETs; more take the portable one).
  const char* sample_loop() const noexcept {
    return std::visit([](const auto& s) { return s.sample_loop(); }, solver_);
  }
  void clear_stats() noexcept { base().clear_stats(); }
  const dk_matrices& matrices() const noexcept { return base().matrices(); }
  const dk_options& options() const noexcept { return base().options(); }
  double sample_rate_hz() const noexcept { return matrices().sample_rate_hz; }

 private:
  static std::variant<single_solver, general_solver> make_solver(const network& net, const operating_point& op,
                                                                 double sample_rate_hz, const dk_options& opt);
  const dk_solver_base& base() const noexcept {
    return std::visit([](const auto& s) -> const dk_solver_base& { return s; }, solver_);
  }
  dk_solver_base& base() noexcept {
    return std::visit([](auto& s) -> dk_solver_base& { return s; }, solver_);
  }

  std::variant<single_solver, general_solver> solver_;
  double sign_{1.0};  // network frame = sign * real
};

}  // namespace pinchoff::model
