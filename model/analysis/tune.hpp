#pragma once
// Solving for one resistor that puts the operating point where the builder wants it.
#include <cmath>
#include <string>
#include <string_view>
#include <vector>

#include "base/eseries.hpp"
#include "model/analysis/headroom.hpp"
#include "model/circuit/operating_point.hpp"
#include "model/circuit/stage.hpp"

namespace pinchoff::model {

enum class target_kind { vd, id, vds, vs, center, gain };

/// A target: a terminal quantity (vd, vds, vs in volts, id in amperes, real signs) to hit,
/// center (the bias with the largest symmetric clean output swing; value unused), or gain
/// (the design's mid-band gain from the generator to the load, in dB; usually set by the
/// drain resistor or the unbypassed source resistor).
struct tune_target {
  target_kind kind{target_kind::vd};
  double value{};
  int stage{-1};  ///< whose terminals, counted from 0; -1: the adjusted resistor's stage (the only one of a single stage)
};
/// "vd = 4.50 V", "center (largest symmetric clean swing)": for reports.
std::string target_text(const tune_target& t);

struct tune_point {
  double value_ohm{};
  terminal_point at;          ///< of the target's stage
  headroom_figures headroom;
  double gain_db{NAN};        ///< the design's mid-band gain, generator to load (NaN while searching a bias target)
};

struct tune_candidate {
  std::string series;  ///< "E24", or "exact"
  tune_point point;
};

struct tune_result {
  std::string adjust;       ///< the stage-file key that was adjusted
  double exact_ohm{};
  tune_point exact;
  std::vector<tune_candidate> candidates;  ///< nearest series values below and above
};

/// Lowest and highest resistance the search covers.
inline constexpr double tune_min_ohm = 1.0;
inline constexpr double tune_max_ohm = 100e6;

/// Solves for the resistor `adjust_key` (one of adjustable_resistor_keys(); any other is a
/// setting_error of the field "adjust_key"). Throws input_error saying what range is
/// reachable when no value hits the target.
tune_result tune_resistor(const stage& s, std::string_view adjust_key, const tune_target& target, base::eseries series);

/// The exact value alone (no series candidates): what tune_resistor solves first.
double solve_resistor(const stage& s, std::string_view adjust_key, const tune_target& target);

/// The operating point (of stage `at_stage`) and headroom of the stage with one resistor replaced.
tune_point evaluate_with(const stage& s, std::string_view adjust_key, double value_ohm, int at_stage = 0);

/// One resistor to solve for and the bias target it sets.
struct tune_pair {
  std::string adjust;   ///< an adjustable_resistor_keys() entry
  tune_target target;
};

/// Several pairs solved together: every resistor at the value that puts every target in
/// place at once.
struct joint_solution {
  std::vector<double> ohm;  ///< one per pair, in the order given
  int rounds{};             ///< rounds of one-at-a-time solves taken (Newton steps when all_at_once)
  bool settled{false};      ///< every target within joint_tolerance of its value
  bool all_at_once{false};  ///< solved by the all-at-once Newton (solve_resistors says when)
};

/// When a joint solve has settled: each target quantity within 1e-6 of its value, relative,
/// plus 1 µV (voltages) or 1 nA (currents), with every resistor at its solved value.
double joint_tolerance(const tune_target& t) noexcept;
/// The most rounds a joint solve takes before it gives up (settled = false).
inline constexpr int joint_max_rounds = 30;

/// Checks pairs for a joint solve: each resistor once, each target (stage and quantity) once,
/// and bias targets only when there are several (center is a search of its own). Throws
/// setting_error of the field "adjust_key" or "target".
void validate_pairs(const stage& s, const std::vector<tune_pair>& pairs);

/// Solves the pairs together. Pairs interact where one resistor moves another stage's bias
/// (a shared supply or rail resistance, a DC-coupled stage, gate current), so they are solved
/// one at a time in rounds (block Gauss-Seidel), each with the others held at their latest
/// values, until every target is within joint_tolerance with all values in place; pairs that
/// do not interact settle in the first round. Each solve looks first near the value in place
/// (the design's, then the last round's: the root nearest it), and takes solve_resistor's
/// full search where that finds none. Where a resistor cannot reach its target with the
/// others where they are, or the rounds do not settle, every value is solved at once by a
/// damped Newton iteration on log R (all_at_once). One pair is solve_resistor itself. Throws
/// input_error when a pair is out of reach both ways (as solve_resistor does).
joint_solution solve_resistors(const stage& s, const std::vector<tune_pair>& pairs);

/// Standard values around a joint solution: every combination of each resistor's nearest
/// series values below and above its exact value, evaluated with all of them in place, the
/// closest to the targets first (by the sum of squared relative errors; a gain's error
/// taken as a voltage ratio).
struct joint_candidate {
  std::vector<double> ohm;                ///< one per pair
  std::vector<terminal_point> at;         ///< the operating point of each pair's target stage
  std::vector<double> achieved;           ///< each pair's target quantity with these values
  double gain_db{};                       ///< the design's mid-band gain
  double error{};                         ///< the sum of squared relative errors
};
std::vector<joint_candidate> joint_candidates(const stage& s, const std::vector<tune_pair>& pairs,
                                              const joint_solution& sol, base::eseries series);

/// The design's mid-band gain (generator to load) in dB with the stage as it is.
double midband_gain_db(const stage& s);

/// The stage a target's terminals belong to: its own `stage`, else the adjusted key's
/// ("stage2.drain.resistor": 1), else 0 for a single stage. A chain's shared key with no
/// stage named is a setting_error of the field "target".
int target_stage(const stage& s, std::string_view adjust_key, const tune_target& target);

}  // namespace pinchoff::model
