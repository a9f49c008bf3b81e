#pragma once
// The physical ranges of a JFET's parameters, as a stage file or a device-class file may
// give them. Values outside are refused where they are read (with the range and the reason
// in the message), so the solvers only see parts they can solve. The bounds are wide: each
// lies one or more decades beyond what real parts show (common practice: datasheets of
// small-signal and power JFETs), so a refusal means a slip (a missing prefix, a wrong unit),
// never an unusual part. README "Stage file" lists them.
#include <string>

#include "base/units.hpp"

namespace pinchoff::model::ranges {

using base::value_bounds;

inline constexpr value_bounds idss{1e-6, 2.0, false,
                                   "small-signal JFETs have 0.1 to 100 mA, power parts up to an ampere or two"};
/// By magnitude; the sign follows the polarity.
inline constexpr value_bounds vp{0.01, 50.0, false, "real parts pinch off between about 0.2 and 10 V"};
/// beta = idss / vp^2; the idss it gives is checked against `idss` too.
inline constexpr value_bounds beta{1e-9, 1e3, false, "beta = IDSS/VP^2 of real parts lies between about 1e-5 and 1 A/V^2"};
inline constexpr value_bounds lambda{0.0, 1.0, true,
                                     "channel-length modulation of real parts is 0.001 to 0.05 /V (1 /V is an Early "
                                     "voltage of 1 V)"};
inline constexpr value_bounds is{1e-20, 1e-6, true, "gate junctions leak femto- to nanoamperes"};
inline constexpr value_bounds n{0.5, 5.0, false, "emission coefficients of real junctions lie between 1 and 2"};
inline constexpr value_bounds junction_cap{1e-14, 1e-8, true,
                                           "small-signal parts have 1 to 30 pF, power parts up to a few nanofarads"};
/// Noise: SPICE-style flicker coefficient and exponent (K |id|^a / f), and the gate leakage.
inline constexpr value_bounds flicker_coefficient{1e-25, 1e-10, true,
                                                  "flicker coefficients of real parts lie between about 1e-20 and 1e-14 "
                                                  "with an exponent near 1"};
inline constexpr value_bounds flicker_exponent{0.5, 2.5, false, "flicker exponents of real parts lie between 0.5 and 2"};
inline constexpr value_bounds gate_leakage{1e-16, 1e-6, true,
                                           "gate leakage of real parts is picoamperes at room temperature, nanoamperes hot"};
/// The VDS at which IDSS was measured (magnitude); 0 means the model's own IDSS, at VDS = 0.
inline constexpr value_bounds idss_vds{0.01, 100.0, true, "IDSS is measured at a few volts to a few tens of volts"};
/// Temperature coefficients, by magnitude (the reader checks the signs): the pinch-off
/// voltage's drift (|VP| grows as the part warms) and the exponent m of beta ∝ T^m (m <= 0).
/// The drift law (model/analysis/temperature_drift.hpp) holds the same ranges.
inline constexpr value_bounds vp_drift{0.0, 10e-3, false,
                                       "silicon JFETs drift about 2 mV/K, as the gate junction's built-in potential does"};
inline constexpr value_bounds beta_exponent{0.0, 3.0, false,
                                            "the channel's mobility falls as T^-1.5 to T^-2.5 in silicon"};
/// The two coefficients' checks, the one place the stage file, the device-class file and the
/// drift law (model/analysis/temperature_drift.cpp) all use: "" when the value lies in its
/// range, else the refusal's words after the key ("must be 0 to -10 mV/K ..., got ...: why").
/// n_frame_v_per_k: the drift in the n-channel frame; frame: how the value was given, said in
/// the message (a p-channel part's range and value are quoted in its real sign, positive).
enum class drift_frame { n_channel_part, p_channel_part, n_channel_sign };
std::string vp_drift_problem(double n_frame_v_per_k, drift_frame frame);
std::string beta_exponent_problem(double m);

inline constexpr value_bounds vds_max{0.1, 1e4, false, "ratings of real parts lie between a few volts and a kilovolt"};
inline constexpr value_bounds pd_max{1e-4, 1e4, false, "ratings of real parts lie between 100 mW and a few hundred watts"};
inline constexpr value_bounds igf_max{1e-9, 100.0, false, "ratings of real parts lie between 1 mA and an ampere or so"};

}  // namespace pinchoff::model::ranges
