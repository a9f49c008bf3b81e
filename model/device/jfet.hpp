#pragma once
// The n-channel JFET of the Shichman–Hodges square law (the SPICE2 level-1 JFET:
// Shichman & Hodges, IEEE JSSC 3(3), 1968; Massobrio & Antognetti, Semiconductor Device
// Modeling with SPICE). A p-channel part is handled by the caller as the mirror image
// (every voltage and current negated), so these functions see n-channel values only.
//
// Units: volts, amperes, siemens. beta = idss / vp^2 (A/V^2), vto = vp (V, < 0).
#include <optional>

namespace pinchoff::model {

struct jfet_params {
  double idss_a{};            ///< drain current at vgs = 0 in saturation, > 0
  double vp_v{};              ///< pinch-off voltage (vto), < 0 for the n-channel model
  double lambda_per_v{0.0};   ///< channel-length modulation, >= 0
  double is_a{1e-14};         ///< gate junction saturation current, >= 0
  double n{1.0};              ///< gate junction emission coefficient, > 0
  double cgs_f{0.0};          ///< gate-source capacitance (constant), >= 0
  double cgd_f{0.0};          ///< gate-drain capacitance (constant), >= 0
  // Noise only (the channel and junction equations above do not use them):
  double flicker_k{0.0};         ///< flicker noise current density K |id|^a / f (A^2/Hz at 1 Hz for a = 0), >= 0
  double flicker_exponent{1.0};  ///< a, the drain current's exponent in the flicker density
  /// Reverse gate leakage, magnitude (A): a constant current from the source into the gate
  /// beside the junction's own (in the DC point and the time domain), and its shot noise 2 q I.
  double gate_leakage_a{0.0};
};

/// Optional device ratings; a missing rating is not checked.
struct jfet_ratings {
  std::optional<double> vds_max_v;
  std::optional<double> pd_max_w;
  std::optional<double> igf_max_a;
};

/// A part's own temperature coefficients (`[jfet] vp_drift`, `beta_exponent`), in real
/// signs: a p-channel part's pinch-off drift is positive. A missing one takes the drift law's
/// default (model/analysis/temperature_drift.hpp), and an analysis's own setting overrides both.
struct jfet_tempco {
  std::optional<double> vp_drift_v_per_k;  ///< dVP/dT; |VP| grows as the part warms
  std::optional<double> beta_exponent;     ///< m in beta ∝ T^m, <= 0
};

inline double beta_of(const jfet_params& p) noexcept { return p.idss_a / (p.vp_v * p.vp_v); }

/// Channel current drain -> source and its partial derivatives.
struct channel_eval {
  double id_a;   ///< drain -> source
  double gm_s;   ///< d id / d vgs
  double gds_s;  ///< d id / d vds
};

/// Square-law channel current for any vds (vds < 0: inverse mode, drain and source
/// swapped). Continuous with continuous first derivatives at the triode/saturation edge.
channel_eval drain_current(const jfet_params& p, double vgs_v, double vds_v) noexcept;

/// Gate junction diode current (anode gate) and its conductance:
/// i = is (exp(v / (n vt)) - 1). Beyond a large forward voltage the exponential is
/// continued linearly so the value stays finite; the derivative stays consistent.
struct junction_eval {
  double i_a;
  double g_s;
};
junction_eval junction_current(const jfet_params& p, double v, double vt_v) noexcept;
/// The gate-source junction's current, gate -> source: the junction's, less the constant
/// reverse leakage `gate_leakage_a` (which leaves the conductance unchanged). The gate-drain
/// junction is junction_current() alone.
inline junction_eval gate_source_current(const jfet_params& p, double vgs_v, double vt_v) noexcept {
  junction_eval j = junction_current(p, vgs_v, vt_v);
  j.i_a -= p.gate_leakage_a;
  return j;
}

/// Thermal voltage k T / q with the exact SI constants (2019 redefinition).
double thermal_voltage(double temperature_k) noexcept;
inline constexpr double default_temperature_k = 300.15;

enum class jfet_region { cutoff, triode, saturation };
/// Region of the channel for the given (n-channel) terminal voltages; inverse mode is
/// classified on the swapped terminals.
jfet_region region_of(const jfet_params& p, double vgs_v, double vds_v) noexcept;
const char* region_name(jfet_region r) noexcept;

/// SPICE junction-voltage limiting (pnjlim; Nagel 1975, SPICE2 thesis, sec. 4.4):
/// returns the voltage to evaluate the junction at, given the proposed and the previous
/// one. `nvt` = n * vt, `vcrit` = nvt ln(nvt / (sqrt 2 is)).
double limit_junction(double v_new, double v_old, double nvt, double vcrit) noexcept;
double critical_voltage(const jfet_params& p, double vt_v) noexcept;

}  // namespace pinchoff::model
