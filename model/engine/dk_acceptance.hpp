#pragma once
// The Newton acceptance's per-device part, shared by the DK engine's two solvers (the
// one-JFET solver, model/engine/dk_single.cpp, says what the bound is and why; the general
// solver, dk_general.cpp, stacks the same rows for k JFETs): the rounding constants, the
// small-step test and the remainders of one device's linearisation over a Newton step.
#include <cmath>
#include <limits>

#include "model/engine/dk_device.hpp"

namespace pinchoff::model::detail {

/// Rounding margin: 8 eps of the magnitudes summed covers the few operations on each side.
inline constexpr double acceptance_round_k = 8.0 * std::numeric_limits<double>::epsilon();
/// The rounding of the port equation is allowed on top of tol_v up to this (volts).
inline constexpr double rounding_allowance_v = 1e-8;

/// Whether a step (dgs, dgd of the junctions) is small enough for the junction remainder
/// bound: |dv| <= 0.01 n Vt.
inline bool small_junction_steps(const device_consts& d, double dgs, double dgd) noexcept {
  const double lim = 0.01 * d.nvt_v;
  return std::fabs(dgs) <= lim && std::fabs(dgd) <= lim;
}

/// For the step (d0, d1) to (vn0, vn1), with c the currents and conductances where it began:
/// rem, what each current at the new point may differ from its linearisation by (junctions
/// 0.505 g dv^2 / nVt, the channel exactly plus its rounding); mag, the magnitude of each
/// linearised current's terms (for the rounding of the port equation); id_lin_d, the
/// channel's linear change. Order: igs, igd, id.
struct step_remainders {
  double rem[3];
  double mag[3];
  double id_lin_d;
};
__attribute__((always_inline)) inline step_remainders remainders_of(const device_consts& d, const port_currents& c, double vn0, double vn1,
                                                                   double d0, double d1) noexcept {
  step_remainders s;
  const double dgs = d0, dgd = d0 - d1;
  const double k_junction = 0.505 * d.inv_nvt;
  s.rem[0] = k_junction * c.ggs_s * dgs * dgs;
  s.rem[1] = k_junction * c.ggd_s * dgd * dgd;
  const double id_new = channel_current(d, vn0, vn1);
  s.id_lin_d = c.gm_s * d0 + c.gds_s * d1;
  s.rem[2] = std::fabs(id_new - c.id_a - s.id_lin_d) +
             acceptance_round_k * (std::fabs(id_new) + std::fabs(c.id_a) + std::fabs(c.gm_s * d0) + std::fabs(c.gds_s * d1));
  s.mag[0] = std::fabs(c.igs_a) + std::fabs(c.ggs_s * dgs);
  s.mag[1] = std::fabs(c.igd_a) + std::fabs(c.ggd_s * dgd);
  s.mag[2] = std::fabs(c.id_a) + std::fabs(s.id_lin_d);
  return s;
}

}  // namespace pinchoff::model::detail
