#pragma once
// The steps both DK solvers take (model/engine/dk_single.hpp, one JFET; dk_general.hpp,
// k JFETs), written once: the check of the options and the warm start's weights, the
// refinement of the start point at the DC operating point, the junction-voltage limiting
// of a Newton step, the damping rule, and the sub-stepping of a sample whose Newton did
// not converge. What differs between the solvers (the size and storage of the port
// vectors) comes in as arguments or as the small interface of substep().
#include <array>
#include <span>

#include <Eigen/Dense>

#include "model/engine/dk_device.hpp"
#include "model/engine/dk_matrices.hpp"
#include "model/engine/dk_stats.hpp"

namespace pinchoff::model::detail {

/// Throws internal_error naming the field when an option is out of range.
void check_options(const dk_options& opt);

/// Whether this processor runs the engine's AVX2 + FMA kernels (false where they are not
/// compiled: not x86-64, or not GCC or Clang).
bool wide_kernels_available() noexcept;

/// The warm start's Adams-Bashforth weights on dv/dp at the last three samples, for
/// dk_options::predictor_order 0..3 (order 3: 23/12, -16/12, 5/12; Hairer, Norsett &
/// Wanner, Solving ODEs I, sec. III.1, from memory).
std::array<double, 3> warm_start_weights(int order) noexcept;

/// The port voltages of the DC operating point as the engine computes them: from the DC
/// states q (taken as they are) and port voltages v (2k) of a DC network solution, a few
/// Newton steps on the engine's port equations v = D q + E u + F i(v), u = [supply_v, 0],
/// with the devices as the solver evaluates them. Only rounding is to be removed: v is left
/// as it is when the steps do not converge or move it by more than 1e-6 V. The states are
/// not refined: the solvers carry them as offsets from q, which makes q an exact fixed point
/// of the update (the engine's file comment says why).
void refine_dc_ports(const dk_matrices& m, std::span<const device_consts> devs, double supply_v,
                     const Eigen::VectorXd& q, Eigen::VectorXd& v);

/// Junction-voltage limiting (Nagel 1975, SPICE2 pnjlim, model/device/jfet.hpp
/// limit_junction) of a Newton step (d0, d1) from the port point (v0, v1) of device d: the
/// factor (1e-3..1) on the whole step that keeps each junction where the limiting puts
/// it; 1 unless a junction would land above vcrit by more than the exponential can be
/// trusted over. Out of line: the sample loops call it only when a junction lands above
/// vcrit.
__attribute__((noinline)) double junction_step_scale(const device_consts& d, double v0, double v1, double d0,
                                                     double d1) noexcept;

/// Damped Newton: whether to halve the last step instead of taking a new one, because the
/// residual norm rn at its end grew from rn_base (or is not finite) and is not yet below
/// tol; at most 30 halvings a step.
__attribute__((always_inline)) inline bool halve_step(bool may_damp, double rn, double rn_base, double tol,
                                                      int halvings) noexcept {
  return may_damp && !(rn <= rn_base) && !(rn <= tol) && halvings < 30;
}

/// Sub-stepping of a sample whose Newton did not converge: the change of p over the sample
/// is split into 2, 4, ..., 2^max_levels equal parts, each solved from the last
/// (continuation on the input; the equations of the last part are exactly those of the
/// sample, so the result is the same trapezoidal solution a converged direct solve gives).
/// The first level at which every part converges gives the sample (counted in
/// stats.substepped); when none does, the sample is held at the previous solution
/// (counted in stats.failed).
///
/// `Path` is the solver's view of one sample, on its own storage:
///   void restart();                 back to the last sample's solution and p
///   bool step_to(double frac, bool last, int& evals);
///                                   solve at p_last + (p - p_last) frac (exactly p when
///                                   last) from the current point, warm-started by dv/dp
///                                   there; on success the current point moves to it
///   void take();                    the sample's solution <- the current point
///   void hold();                    the sample's solution <- the last sample's
template <class Path>
void substep(Path& path, int max_levels, dk_stats& stats, int& evals) noexcept {
  for (int level = 1; level <= max_levels; ++level) {
    const int parts = 1 << level;
    path.restart();
    bool ok = true;
    for (int j = 1; j <= parts && ok; ++j) ok = path.step_to(double(j) / parts, j == parts, evals);
    if (ok) {
      path.take();
      ++stats.substepped;
      return;
    }
  }
  ++stats.failed;
  path.hold();
}

}  // namespace pinchoff::model::detail
