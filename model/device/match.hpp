#pragma once
// Grouping measured parts into matched sets (pairs, or larger sets) for circuits that
// need their JFETs alike: a differential pair, the two channels of a stereo stage, a
// push-pull pair.
//
// Two ways to call parts alike:
// - in IDSS and VP together: matching on one parameter alone is not enough, since two
//   parts with the same IDSS and different VP bias differently in every circuit (common
//   practice); a set's spread is the larger of its IDSS spread (ln(max/min), i.e. relative)
//   over the IDSS scale and its VP spread over the VP scale;
// - in VGS at a given drain current: what a pair that runs at that current shares, worked
//   out from each part's square law, vgs = vp (1 - sqrt(id / idss)).
//
// The grouping is greedy by minimum spread: the tightest set the parts allow is taken
// first, then the tightest of the parts left, and so on. A builder matching for a pair
// wants the best sets as good as the bag allows, and the odd parts left over; an exact
// grouping of least total spread would make the best set worse to improve the worst.
// For pairs each step is exact (every pair of the parts left is scored); for sets of three
// or more each candidate is a part with its nearest neighbours among the parts left (by
// the same score), which finds the tightest set whenever it is that of some part's
// nearest neighbours, as it is in a bag of well separated groups.
#include <optional>
#include <string>
#include <vector>

#include "model/device/fit.hpp"

namespace pinchoff::model {

enum class match_basis { idss_and_vp, vgs_at_current };

struct match_settings {
  int set_size{2};                                ///< 2 to max_set_size
  match_basis basis{match_basis::idss_and_vp};
  double current_a{1e-3};                         ///< vgs_at_current: the drain current (magnitude)
  /// The most a set may spread (sets beyond are not formed; their parts are left over).
  /// Absent: every part is grouped, and the ranking uses the default scales below.
  std::optional<double> idss_tolerance_ratio;     ///< relative, ln(max/min) (0.02 for 2 %)
  std::optional<double> vp_tolerance_v;
  std::optional<double> vgs_tolerance_v;
};

/// The ranking's scales without a tolerance: 1 % of IDSS weighs as 10 mV of VP (a pair
/// within 1 % and 10 mV is a close pair, common practice), and VGS in millivolts.
inline constexpr double default_idss_scale = 0.01;
inline constexpr double default_vp_scale_v = 0.01;
inline constexpr double default_vgs_scale_v = 0.001;
inline constexpr int max_set_size = 16;
/// The most parts one match takes: the grouping costs about parts^3 / set size steps.
inline constexpr int max_match_parts = 2000;

struct matched_set {
  std::vector<int> parts;        ///< indices into the parts given, in the order given
  double idss_spread_a{};        ///< max - min IDSS of the set (magnitudes, A)
  double vp_spread_v{};          ///< max - min VP (V)
  double vgs_spread_v{};         ///< max - min VGS at the current (vgs_at_current; else NaN)
  double score{};                ///< the spread in the ranking's scales (<= 1 within a tolerance)
};

struct match_result {
  std::vector<matched_set> sets;        ///< best (smallest score) first
  std::vector<int> left_over;           ///< in the order given
  std::vector<double> vgs_v;            ///< each part's VGS at the current (vgs_at_current; else empty); NaN: cannot carry it
};

/// Groups the parts. Throws setting_error of the field "set_size", "current" or
/// "tolerance" for a setting out of range, and input_error for parts of both polarities or
/// more than max_match_parts parts. A part that cannot carry the current (its IDSS is
/// below it) is left over.
match_result match_parts(const std::vector<part_figures>& parts, const match_settings& settings);

/// The VGS (real signs) of a part at drain current `current_a` (magnitude), from its
/// square law; NaN when the current is above its IDSS.
double vgs_at_current(const part_figures& p, double current_a) noexcept;

}  // namespace pinchoff::model
