#pragma once
// The discretised network of the DK engine (model/engine/dk_engine.hpp says the method):
// resistors, trapezoidal capacitor companions (G = 2C/T) and the two ideal sources stamped
// into one constant MNA matrix S, inverted once, and the network's k JFETs entering
// through their three currents [igs, igd, id] and controlled by their two port voltages
// [vgs, vds]. With u = [supply_v, generator_v], per sample n,
//
//   x_n = A x_{n-1} + B u_n + C i_n
//   v_n = D x_{n-1} + E u_n + F i_n,   i_n = f(v_n)
//   y_n = Do x_{n-1} + Eo u_n + Fo i_n
//
// State: for capacitor k, the trapezoidal history voltage q_k = v_k + i_k / G_k, with the
// capacitor's voltage v_k and current i_k (a -> b) at the same sample and G_k = 2 C_k / T.
// At DC (no capacitor current) q_k equals the capacitor voltage.
//
// After the capacitors' states come the inductors' (a pickup's coil): the companion of
// inductor j is G_j = T / (2 L_j) in parallel with its history current h_j = i_j + G_j v_j
// (a -> b), so i_n = G v_n + h_{n-1} and h_n = h_{n-1} + 2 G v_n. Its state is that history
// current in volts, q_j = rho_j h_j with rho_j = inductor_state_ohm(L_j) (its reactance at
// 1 kHz, a scale fixed by the part alone, not by T), so every state is of the order of the
// node voltages it shapes. At DC (no voltage across it) q_j = rho_j times its DC current.
#include <Eigen/Dense>

#include "model/circuit/network.hpp"

namespace pinchoff::model {

/// The scale of an inductor's state: its reactance at 1 kHz, ohms.
double inductor_state_ohm(double henry) noexcept;

/// The discretised network. Sizes, for ns states (the capacitors', then the inductors') and k JFETs: A ns x ns, B ns x 2,
/// C ns x 3k; D 2k x ns, E 2k x 2, F 2k x 3k; Do 1 x ns, Eo 1 x 2, Fo 1 x 3k. Columns of
/// B/E/Eo: supply, generator (network volts); of C/F/Fo: igs, igd, id (A) of JFET 0, then
/// of JFET 1, ... Rows of D/E/F: vgs, vds of JFET 0, then of JFET 1, ...
struct dk_matrices {
  int states{0};
  int devices{1};
  double sample_rate_hz{0};
  Eigen::MatrixXd a, b, c;
  Eigen::MatrixXd d;
  Eigen::Matrix<double, Eigen::Dynamic, 2> e;
  Eigen::MatrixXd f;
  Eigen::RowVectorXd d_out;
  Eigen::RowVector2d e_out;
  Eigen::RowVectorXd f_out;
  double rcond{0};  ///< reciprocal condition estimate (1-norm) of the MNA matrix S
};

/// The discretised network before it is solved: S z = R [q; u; i] for the MNA unknowns z
/// (node voltages 1..N-1, then the supply's and the generator's branch currents), and the
/// rows that read from z what the engine needs: the state update q_n = state_rows z +
/// state_self q_{n-1} (state_self -1 for a capacitor, +1 for an inductor), the port voltages
/// (vgs, vds of each JFET) and the output. discretise() solves it whole; the split at a
/// chain's joints (dk_split.hpp) solves it stage by stage.
struct discrete_network {
  Eigen::MatrixXd s;          ///< n x n, the MNA matrix with the companions
  Eigen::MatrixXd rhs;        ///< n x (ns + 2 + 3k): R
  Eigen::MatrixXd state_rows; ///< ns x n
  Eigen::VectorXd state_self; ///< ns
  Eigen::MatrixXd port_rows;  ///< 2k x n
  Eigen::RowVectorXd out_row; ///< 1 x n
  int node_unknowns{0};
  int states{0};
  int devices{0};
};

/// The discretised network at `sample_rate_hz` (> 0), not yet solved.
discrete_network discrete_mna(const network& net, double sample_rate_hz);

/// Extended precision, for solving the discretised network once when it is built.
using matrix_ld = Eigen::Matrix<long double, Eigen::Dynamic, Eigen::Dynamic>;

/// a^-1 rhs from a's factors, with one step of iterative refinement: what discretise and the
/// split at the joints (dk_split.hpp) solve, so that their matrices round alike.
matrix_ld refined_solve(const Eigen::FullPivLU<matrix_ld>& lu, const matrix_ld& a, const matrix_ld& rhs);

/// Builds the matrices for the network at `sample_rate_hz` (> 0). Throws internal_error when
/// S is singular or too ill-conditioned to trust (rcond < 1e-15).
dk_matrices discretise(const network& net, double sample_rate_hz);

/// The stacked update of one sample, [x_n - x_{n-1}; D x_n; y_n] = W [x_{n-1}; u_n; i_n]:
/// W = [A - I, B, C; D A, D B, D C; Do, Eo, Fo], ns + 2k + 1 rows and ns + 2 + 3k columns,
/// padded with zero rows to `rows` (at least ns + 2k + 1). The state rows hold the
/// increment: near a fixed point the terms of a slow mode are then small, and so is their
/// rounding, which that mode would otherwise integrate over tau/T samples (a drift of up
/// to 1e-10 V).
Eigen::MatrixXd stacked_update(const dk_matrices& m, int rows);

/// States consistent with a DC network solution `x` (every capacitor current zero, every
/// inductor a short: the DC operating point's solution): q_k is capacitor k's voltage, then
/// inductor j's DC current times inductor_state_ohm. Size: capacitors plus inductors.
Eigen::VectorXd dc_states(const network& net, const Eigen::VectorXd& x);

}  // namespace pinchoff::model
