#pragma once
// DC operating point of a network (any number of JFETs): every capacitor open, generator at 0 V.
#include <string>

#include <Eigen/Dense>

#include "model/circuit/network.hpp"
#include "model/circuit/nodal.hpp"

namespace pinchoff::model {

/// Terminal voltages and currents in real (bench) signs: negative supply side for a
/// p-channel part, id_a negative when the current flows source -> drain.
struct terminal_point {
  double vg_v{}, vs_v{}, vd_v{};
  double vgs_v{}, vds_v{};
  double id_a{};      ///< channel current drain -> source
  double ig_a{};      ///< gate current into the gate terminal (junction leakage/conduction)
  jfet_region region{jfet_region::cutoff};
};

struct operating_point {
  terminal_point at;        ///< of the first JFET (terminals_of(net, x, k) gives JFET k)
  Eigen::VectorXd x;        ///< the network solution (mirrored), for the analyses built on it
  newton_result newton;     ///< the final Newton solve
  int source_steps{0};      ///< 0 when the direct solve converged; else steps of the ramp
};

/// Solves the DC point: damped Newton with junction limiting from a cutoff guess, then
/// source stepping (the supply ramped up in steps) as the fallback. Throws internal_error
/// saying why when neither converges.
operating_point solve_operating_point(const network& net);

/// The same for a network with the given capacitor treatment and generator voltage (a
/// quasi-static point), starting from `guess`; returns converged = false on failure.
newton_result solve_point(const network& net, std::span<const cap_treatment> caps, double generator_v,
                          Eigen::VectorXd& x);

/// Reads the terminal quantities (real signs) of JFET `device` (0: the first) out of a
/// network solution. Throws internal_error for an index out of range.
terminal_point terminals_of(const network& net, const Eigen::VectorXd& x, int device = 0);

}  // namespace pinchoff::model
