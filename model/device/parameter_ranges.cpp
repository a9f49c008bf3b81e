#include "model/device/parameter_ranges.hpp"

#include "base/units.hpp"

namespace pinchoff::model::ranges {

std::string vp_drift_problem(double n_frame_v_per_k, drift_frame frame) {
  if (n_frame_v_per_k <= 0.0 && n_frame_v_per_k >= -vp_drift.hi) return {};
  const bool p_frame = frame == drift_frame::p_channel_part;
  const char* words = frame == drift_frame::n_channel_part   ? "for an n-channel part"
                      : frame == drift_frame::p_channel_part ? "for a p-channel part"
                                                             : "(n-channel sign)";
  // Written in the frame the value was given in: a p-channel part's drift is positive.
  return std::string("must be ") + (p_frame ? "0 to +10 mV/K" : "0 to -10 mV/K") + " " + words + ", got " +
         base::format_si(p_frame ? -n_frame_v_per_k : n_frame_v_per_k, "V/K", 3) +
         ": the pinch-off voltage grows in magnitude as the part warms, about 2 mV/K in silicon";
}

std::string beta_exponent_problem(double m) {
  if (m <= 0.0 && m >= -beta_exponent.hi) return {};
  return "must be -3 to 0, got " + base::format_number(m, 3) + " (m in beta ∝ T^m): beta falls as the part warms, as " +
         std::string(beta_exponent.why);
}

}  // namespace pinchoff::model::ranges
