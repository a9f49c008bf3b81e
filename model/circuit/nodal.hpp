#pragma once
// Modified nodal analysis of a network (Ho, Ruehli & Brennan, IEEE TCAS 22(6), 1975) and
// the full nodal Newton solve with the JFETs. This is the plain, general solver: the DC
// operating point, quasi-static sweeps and the reference time-domain solver use it.
//
// Unknowns: node voltages 1..N-1 (index k-1 for node k), then the currents of the supply
// source, the generator source, of every inductor treated as a short (a -> b), and of every
// capacitor treated as a voltage source.
#include <span>
#include <vector>

#include <Eigen/Dense>

#include "model/circuit/network.hpp"

namespace pinchoff::model {

/// How one capacitor enters a linear solve.
struct cap_treatment {
  enum class kind { open, shorted, held, companion };
  kind how{kind::open};
  double volts{0};   ///< held: the capacitor voltage V(a) - V(b)
  double g_s{0};     ///< companion: conductance (trapezoidal: 2C/T)
  double i_a{0};     ///< companion: current source from a to b in parallel with g
};

/// How one inductor enters a linear solve: a short (DC, and the quasi-static analyses; its
/// current is an unknown), or its trapezoidal companion, a conductance T/(2L) in parallel
/// with a current source (Nagel 1975, the dual of the capacitor's).
struct ind_treatment {
  enum class kind { shorted, companion };
  kind how{kind::shorted};
  double g_s{0};  ///< companion: conductance (trapezoidal: T/(2L))
  double i_a{0};  ///< companion: current source from a to b in parallel with g
};

/// The unknown that holds inductor j's current (a -> b) when every inductor is a short and
/// no capacitor is a source (the DC operating point's solution).
inline int inductor_current_unknown(const network& net, int j) noexcept { return net.node_count - 1 + 2 + j; }

/// One treatment per network capacitor, all the same.
std::vector<cap_treatment> uniform_caps(const network& net, cap_treatment::kind how);

/// The linear part A x + i(x) = rhs of a nodal solve. With an `origin` (a full solution
/// vector of the same layout) the unknowns are offsets from it: A dx + i(origin + dx) = rhs,
/// where rhs already holds the sources less the linear part's currents at the origin (the
/// caller forms that once). Large conductances then multiply small offsets, and the
/// solution is not rounded at eps times their currents at the origin.
struct mna_system {
  Eigen::MatrixXd a;    ///< square, node_unknowns + branch unknowns
  Eigen::VectorXd rhs;
  int node_unknowns{0};
  Eigen::VectorXd origin;  ///< empty: the unknowns are absolute
};

/// Linear part of the network with the given capacitor treatments and source values
/// (mirrored volts). `inds` holds one treatment per inductor, or none: every inductor a short.
mna_system assemble_linear(const network& net, std::span<const cap_treatment> caps, double supply_v,
                           double generator_v, std::span<const ind_treatment> inds = {});

/// Expected numeric failure is a value, never silent.
struct newton_result {
  bool converged{false};
  int iterations{0};
  double residual_a{0};  ///< largest KCL residual at the end
};

struct nodal_options {
  int max_iterations{200};
  double vtol_v{1e-9};    ///< step tolerance, plus vtol_rel * |v| (the error after a step this small is far below it: Newton converges quadratically)
  double vtol_rel{1e-9};
  double itol_a{1e-15};   ///< residual tolerance, plus itol_rel * largest branch current
  double itol_rel{1e-12};
  /// Each Newton step's linear solve is refined once with its residual b - J x summed as
  /// if in twice the working precision (error-free products and sums: Ogita, Rump & Oishi,
  /// SIAM J. Sci. Comput. 26(6), 2005, Dot2), instead of in working precision, and with J
  /// taken as the linear network plus each device's tangent applied apart (not J as
  /// summed, whose entries keep a device's conductance only to their own last place).
  bool compensated_refinement{false};
};

/// Solves the linear system plus every JFET by damped Newton with junction limiting.
/// `v` holds all unknowns: on entry the starting guess, on exit the solution (or the last
/// iterate when not converged); offsets from lin.origin when it is set. The devices always
/// see full terminal voltages, and the tolerances keep their meaning in either frame: the
/// step tolerance's relative part is taken of the full node voltage.
newton_result solve_nodal(const network& net, const mna_system& lin, Eigen::VectorXd& v,
                          const nodal_options& opt = {});

/// Voltage of node k from a solution vector (node 0 is ground).
inline double node_v(const Eigen::VectorXd& x, int node) noexcept { return node == 0 ? 0.0 : x[node - 1]; }

}  // namespace pinchoff::model
