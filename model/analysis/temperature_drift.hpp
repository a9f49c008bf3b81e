#pragma once
// Temperature drift of a stage's rest point: each JFET's figures moved from the stage's
// own temperature (where its IDSS and VP were given) to another, by these laws:
// - pinch-off: VP(T) = VP(T0) + dVP/dT (T - T0) in the n-channel frame, dVP/dT = -2.2 mV/K
//   by default, so |VP| grows as the part warms (the gate junction's built-in potential falls
//   about 2.2 mV/K, and VP = built-in potential - the channel's pinch-off voltage; P. Horowitz
//   & W. Hill, The Art of Electronics, 3rd ed., 2015, section 3.1 on JFET temperature
//   drift, and R. S. Muller, T. I. Kamins, Device Electronics for Integrated Circuits,
//   3rd ed., 2003, on the junction's built-in potential; from memory);
// - gain: beta(T) = beta(T0) (T / T0)^m with m = -1.5 by default, the channel's mobility
//   under lattice scattering (S. M. Sze, K. K. Ng, Physics of Semiconductor Devices, 3rd
//   ed., 2007, ch. 1; from memory); IDSS(T) = beta(T) VP(T)^2;
// - gate leakage (jfet_params::gate_leakage_a) doubles every 10 K (common practice);
// - the thermal voltage kT/q of the junctions and of the noise follows the stage's
//   temperature, as it always does. The junction's saturation current is held.
//
// The zero-temperature-coefficient point: in saturation ID = beta(T) (VGS - VP(T))^2, and
// at a fixed VGS dID/dT = beta (m / T) (VGS - VP)^2 - 2 beta (VGS - VP) dVP/dT, which is 0
// at VGS - VP = 2 T dVP/dT / m: 0.880 V at 300.15 K by the default laws, a drain current of
// I_ZTC = beta (2 T dVP/dT / m)^2 = IDSS (2 T dVP/dT / (m VP))^2. Above it the mobility
// wins (ID falls as the part warms), below it the pinch-off shift does (ID rises). The
// figure often quoted for silicon JFETs, VGS = VP + 0.63 V, is the same expression with a
// beta falling 0.7 %/K (from memory); the defaults' T^-1.5 falls 0.5 %/K at 300 K.
//
// A part's own coefficients (stage_parts::tempco, the stage file's `[jfet] vp_drift` and
// `beta_exponent`, or its class's) replace the defaults for that part, and an analysis's
// setting (temperature_law_setting: the command line's) replaces both, for every part.
#include <optional>
#include <string>
#include <vector>

#include "model/circuit/operating_point.hpp"
#include "model/circuit/stage.hpp"

namespace pinchoff::model {

struct temperature_law {
  double vp_drift_v_per_k{-2.2e-3};  ///< dVP/dT in the n-channel frame (a p-channel part's mirrors it)
  double beta_exponent{-1.5};        ///< m in beta ∝ T^m
  double leakage_doubling_k{10.0};   ///< gate leakage doubles every this many kelvin
};

/// Checks the law; throws setting_error("temperature_law", ...) for a drift of the wrong
/// sign or size (0 to -10 mV/K), an exponent outside -3..0, or a doubling step of 1 K or less.
void validate(const temperature_law& law);

/// What an analysis's settings give over every part's own coefficients: each one set wins
/// (n-channel frame, as temperature_law's).
struct temperature_law_setting {
  std::optional<double> vp_drift_v_per_k;
  std::optional<double> beta_exponent;
};

/// Where each coefficient of a part's law came from.
enum class coefficient_source { law_default, part, setting };
const char* source_name(coefficient_source s) noexcept;  ///< "default", "part", "setting"
struct part_law {
  temperature_law law;
  coefficient_source vp_drift_from{coefficient_source::law_default};
  coefficient_source beta_exponent_from{coefficient_source::law_default};
};

/// The law of one part: the setting's coefficients, else the part's own (its tempco, real
/// signs, mirrored into the n-channel frame for a p-channel part), else the defaults.
/// Throws setting_error("temperature_law") when the setting's values are out of range, and
/// setting_error(KEY) naming the part's key ("stage2.jfet.vp_drift") when its own are.
part_law law_of(const stage& st, int k, const temperature_law_setting& setting = {});

/// The stage at temperature_k: every JFET's VP, IDSS and gate leakage moved from the
/// stage's own temperature by its law (law_of), and the stage's temperature set.
stage at_temperature(const stage& st, double temperature_k, const temperature_law_setting& setting = {});

/// The zero-TC point of a part (real signs) at temperature_k (see the file comment).
struct zero_tc_point {
  double vov_v{};   ///< VGS - VP there, n-channel frame (> 0)
  double vgs_v{};   ///< real signs
  double id_a{};    ///< magnitude
  bool below_idss{true};  ///< reached with VGS on the reverse side of 0 (|VP| > vov)
};
zero_tc_point zero_tc(const jfet_params& p, polarity pol, double temperature_k, const temperature_law& law = {});

struct drift_point {
  double temperature_k{};
  bool solved{false};
  std::string failure;
  std::vector<terminal_point> stages;  ///< each stage's JFET, in signal order
  double gain_db{};                    ///< mid-band, generator to load
};

struct temperature_drift {
  double reference_k{};                ///< the stage's own temperature
  std::vector<part_law> laws;          ///< each stage's part's law, in signal order
  std::vector<drift_point> points;     ///< in the order given
  std::vector<zero_tc_point> zero_tc;  ///< each stage's part, at the reference temperature
  std::vector<terminal_point> rest;    ///< each stage's JFET at the reference temperature
};

/// The rest point at every temperature (K, 200 to 450 as a stage file takes).
temperature_drift analyse_temperature_drift(const stage& st, const std::vector<double>& temperatures_k,
                                            const temperature_law_setting& setting = {});

}  // namespace pinchoff::model
