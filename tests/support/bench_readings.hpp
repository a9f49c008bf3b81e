#pragma once
// Bench readings made from closed forms, for the tests of the fit and of bags of parts.
namespace pinchoff::testing {

/// Shockley's square law with channel-length modulation (level-1 saturation; Massobrio &
/// Antognetti, Semiconductor Device Modeling with SPICE, 2nd ed., 1993): the drain current
/// at vgs and vds, 0 past pinch-off.
inline double shockley(double idss, double vp, double lambda, double vgs, double vds) {
  const double u = 1.0 - vgs / vp;
  return u > 0.0 ? idss * u * u * (1.0 + lambda * vds) : 0.0;
}

/// A self-bias jig with the gate grounded: id = idss (1 - id rs / |vp|)^2 (Boylestad &
/// Nashelsky, Electronic Devices and Circuit Theory, ch. 7), solved by bisection as an
/// oracle independent of the fit's closed-form root.
inline double self_bias_current(double idss, double vp, double rs) {
  double lo = 0.0, hi = idss;
  for (int i = 0; i < 200; ++i) {
    const double mid = 0.5 * (lo + hi);
    (shockley(idss, vp, 0.0, -mid * rs, 0.0) - mid > 0 ? lo : hi) = mid;
  }
  return 0.5 * (lo + hi);
}

}  // namespace pinchoff::testing
