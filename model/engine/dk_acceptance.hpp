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

/// The correction of an accepted step (the solvers' accept branch): the accepted point
/// v + dv leaves each junction's current short of the device's by its remainder, always of
/// one sign (e^x - 1 - x >= 0), and a state that integrates a junction's current (a
/// coupling capacitor behind megohms, charged by gate conduction) adds these up over the
/// samples: up to 1e-8 V in 350 samples on a random two-stage chain, with every sample
/// within tol_v. The correction takes one more Newton step from v + dv with the same
/// matrix, whose residual is F times the junctions' remainders themselves, known without
/// an exponential: g nVt (e^x - 1 - x) from its series (x = dv / nVt, |x| <= 0.01: the
/// terms to x^5 leave less than 1e-12 of it). The channel's remainder is left as it is
/// (correcting it too cost the one-JFET path a tenth of its time at 1 V, where no junction
/// conducts, and the drift came from the junctions). Below this share of tol_v the
/// junctions' part of the bound, the step is accepted as it is. Taken at two JFETs (the
/// general solver); the one-JFET loop does not take it: on the presets at 3-20 V and on
/// 300 random stages at 10 V it moved no sample beyond the reference's own resolution, and
/// it cost that loop 3-9 % of its time (docs/engine-decisions.md, 2026-12-05).
inline constexpr double correction_floor = 1e-3;

/// g nVt (e^x - 1 - x), x = dv / nVt (|x| <= 0.01): a junction's remainder over the step dv
/// from where its conductance is g (0 for a junction taken as -is: no remainder).
__attribute__((always_inline)) inline double junction_remainder(double g, const device_consts& d, double dv) noexcept {
  const double x = dv * d.inv_nvt;
  return g * d.nvt_v * (x * x * (0.5 + x * (1.0 / 6.0 + x * (1.0 / 24.0 + x * (1.0 / 120.0)))));
}

/// Whether the correction may be taken at all: no junction of the step's start on the
/// linear continuation beyond exp(80) (there the remainder is 0, not the series), and the
/// correction (e0, e1) small enough for the bounds below (|e| <= 0.01 nVt).
__attribute__((always_inline)) inline bool correction_applies(const device_consts& d, double v0, double v1, double e0,
                                                               double e1) noexcept {
  const double lim = junction_exp_limit - 1.0;
  return v0 * d.inv_nvt < lim && (v0 - v1) * d.inv_nvt < lim && small_junction_steps(d, e0, e0 - e1);
}

/// Bounds on what each current (igs, igd, id) at the corrected point vn + e differs from
/// the corrected currents by, so that the residual there is at most |F| times them: a
/// junction's remainder changes by g nVt |(e^x - 1) y + e^x (e^y - 1 - y)| <= g |e|
/// (1.0101 |x| + 0.5101 |y|) for |x|, |y| <= 0.01 (x = d / nVt, y = e / nVt); the
/// channel's remainder at the corrected point exactly, from its current there (vc0, vc1),
/// plus its rounding. id_end: the channel's linearised current at vn (c.id_a + id_lin_d).
__attribute__((always_inline)) inline void correction_remainders(const device_consts& d, const port_currents& c,
                                                                  double d0, double d1, double e0, double e1,
                                                                  double vc0, double vc1, double id_end,
                                                                  double* out) noexcept {
  const double xgs = std::fabs(d0) * d.inv_nvt, xgd = std::fabs(d0 - d1) * d.inv_nvt;
  const double egs = std::fabs(e0), egd = std::fabs(e0 - e1);
  out[0] = c.ggs_s * egs * (1.0101 * xgs + 0.5101 * egs * d.inv_nvt);
  out[1] = c.ggd_s * egd * (1.0101 * xgd + 0.5101 * egd * d.inv_nvt);
  const double id_c = channel_current(d, vc0, vc1);
  const double lin = c.gm_s * e0 + c.gds_s * e1;
  out[2] = std::fabs(id_c - id_end - lin) +
           acceptance_round_k * (std::fabs(id_c) + std::fabs(id_end) + std::fabs(c.gm_s * e0) + std::fabs(c.gds_s * e1));
}

}  // namespace pinchoff::model::detail
