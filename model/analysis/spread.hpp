#pragma once
// Monte Carlo over real parts: JFET IDSS and VP drawn within ranges (positively
// correlated, as in real batches), resistor tolerances and a supply range (a draining
// battery). Deterministic for a seed and independent of the thread count: every run draws
// from its own generator seeded from (seed, run index).
#include <cmath>
#include <cstdint>
#include <functional>
#include <map>
#include <optional>
#include <string>
#include <vector>

#include "base/units.hpp"
#include "model/circuit/operating_point.hpp"
#include "model/circuit/stage.hpp"
#include "model/analysis/tune.hpp"

namespace pinchoff::model {

struct part_figures;

enum class spread_distribution { uniform, normal };

/// The most Monte Carlo runs one spread takes. At 100,000 runs a yield is known to within
/// 0.16 % (one standard error, at most 1 / (2 sqrt N)), finer than any resistor tolerance
/// makes meaningful; each run costs about 0.5 ms of one core and 0.9 KB of memory (measured
/// on the bass-booster preset), so the bound keeps a spread under a minute and 100 MB.
inline constexpr int max_spread_runs = 100000;
/// The most threads a spread starts: each is a system thread, and beyond the cores they only
/// wait their turn (a thread per run of 100,000 runs exhausted the process's threads).

/// A measured part a spread takes in place of drawn ranges: the model's values (IDSS at
/// VDS = 0, real signs), made from a bench figure by parts_for_spread.
struct bag_part {
  std::string name;
  double idss_a{}, vp_v{};
  double lambda_per_v{NAN};  ///< the part's own, when fitted; NaN: the stage's
};

struct spread_settings {
  std::optional<base::value_range> idss_a;  ///< absent: the stage's value
  std::optional<base::value_range> vp_v;    ///< real signs, either order
  std::optional<base::value_range> supply_v;  ///< real signs; absent: the stage's value
  double correlation{0.0};       ///< between IDSS and |VP|, in [-1, 1]
  double resistor_tolerance{0.0};  ///< fraction: 0.05 for 5 %
  spread_distribution distribution{spread_distribution::uniform};
  int runs{2000};                ///< 1 to max_spread_runs
  std::uint64_t seed{1};
  int threads{0};                ///< 0: one per core; at most base::max_threads
  std::string class_name;        ///< the device class the ranges came from, if any
  /// Measured parts in place of the IDSS and VP ranges. Every part once (runs = the number
  /// of parts; run i takes part i, and in a chain stage k takes part (i + k) mod n), or, with
  /// parts_drawn, each run's parts drawn from the bag at random.
  std::vector<bag_part> parts;
  bool parts_drawn{false};
  std::string parts_source;      ///< the file the parts came from, for reports
};

/// The parts of a bag as a spread of `st` takes them: IDSS at VDS = 0 with the part's own
/// lambda when it was fitted (else the stage's). Throws setting_error of the field "parts"
/// for a part of the other polarity.
std::vector<bag_part> parts_for_spread(const std::vector<part_figures>& parts, const stage& st);

/// Checks ranges, correlation, tolerance and runs; throws setting_error naming the field
/// ("idss_a", "vp_v", "supply_v", "correlation", "resistor_tolerance", "runs", "parts").
void validate(const spread_settings& s, const stage& st);

/// One drawn part and supply: the stage with these values substituted. In a chain every JFET
/// is drawn on its own (the IDSS-VP correlation holds within each part).
struct spread_draw {
  double idss_a{}, vp_v{}, supply_v{};   ///< the first (or only) stage's part, and the supply
  double lambda_per_v{NAN};              ///< a measured part's own lambda; NaN: the stage's
  int bag_index{-1};                     ///< the measured part taken (settings.parts), or -1
  std::vector<double> resistor_factors;  ///< one per adjustable_resistor_keys(stage) entry
  struct part { double idss_a{}, vp_v{}; double lambda_per_v{NAN}; int bag_index{-1}; };
  std::vector<part> later;               ///< a chain's second and later parts
};

/// The i-th draw (pure function of the settings, the stage and i).
spread_draw draw_part(const spread_settings& s, const stage& st, int index);
stage apply_draw(const stage& st, const spread_draw& d);

/// What a run measures, by name ("vd", "gain", ...).
struct quantity_def {
  const char* name;      ///< "vd"
  const char* json_key;  ///< "vd_v"
  const char* unit;      ///< "V"
  bool per_stage;        ///< a JFET's own terminal quantity (id, vd, vs, vds, vgs); else the whole design's
};
const std::vector<quantity_def>& spread_quantities();

/// A quantity's name as a run's values hold it: "vd" for a single stage; in a chain
/// "stage2.vd" (stage k counted from 0) for a stage's own quantities, while gain, swing and
/// thd stay the chain's (generator to load) and keep their plain names.
std::string spread_quantity_name(const stage& st, int k, const quantity_def& q);
/// Every name a run of `st` measures, in report order: a chain's stages one after the other,
/// then the chain's gain, swing and thd.
std::vector<std::string> spread_quantity_names(const stage& st);

/// A quantity name split into its stage (counted from 0; -1 when none is named) and its
/// definition ("stage2.vd": 1 and vd). nullptr for a name that is none.
struct named_quantity {
  int stage{-1};
  const quantity_def* def{nullptr};
};
named_quantity split_quantity_name(std::string_view name);

/// A condition a good build meets: lo <= value <= hi (an open end is infinite).
struct requirement {
  std::string quantity;  ///< a spread_quantities() name, with "stageN." before a stage's own in a chain
  double lo{-INFINITY}, hi{INFINITY};
};

/// The requirements as the runs of `st` name them: a chain's stage quantity must name its
/// stage (which one is the builder's to say: the stages of a chain bias differently), a
/// single stage's may say stage1. Throws setting_error of the field "requirements" naming
/// the choices.
std::vector<requirement> resolve_requirements(const stage& st, const std::vector<requirement>& reqs);

struct spread_run {
  int index{};
  spread_draw draw;
  bool solved{false};
  std::string failure;           ///< why not solved
  std::map<std::string, double> values;  ///< by quantity name
  bool meets{false};             ///< solved, every JFET in saturation, and every requirement met
};

struct quantity_stats {
  double p5{}, p50{}, p95{}, min{}, max{};
  int count{};
};

struct spread_result {
  std::vector<spread_run> runs;
  std::map<std::string, quantity_stats> stats;  ///< by quantity name (spread_quantity_names)
  double yield{};        ///< fraction of runs that meet every requirement (every JFET in saturation)
  int unsolved{};
};

/// Extra per-run measurement (THD at a drive, from the engine) keyed by quantity name.
using run_extra = std::function<void(const stage& drawn, std::map<std::string, double>& values)>;

spread_result run_spread(const stage& st, const spread_settings& s, const std::vector<requirement>& reqs,
                         const run_extra& extra = {});

/// Percentile p (0..100) of sorted values by linear interpolation between order
/// statistics (Hyndman & Fan 1996, definition 7).
double percentile_sorted(const std::vector<double>& sorted, double p);

// --- Trimmer sizing over a spread ----------------------------------------------------

/// Common-practice trimmer values (ohm).
const std::vector<double>& standard_trimmers_ohm();

struct trim_result {
  std::string adjust;
  std::vector<double> exact_ohm;  ///< per run; NaN where no value reaches the target
  int reachable{};
  double r_min{}, r_max{}, r_p5{}, r_p95{};
  double fixed_ohm{};             ///< the series resistor in line with the trimmer
  double trimmer_ohm{};           ///< the trimmer's full value
  double coverage{};              ///< fraction of all runs the pair can bring to the target
};

/// The target must be a bias quantity or a gain (not center: a setting_error of the field "target").
trim_result size_trimmer(const stage& st, std::string_view adjust_key, const tune_target& target,
                         const spread_settings& s, base::eseries series);

/// One trimmer per pair over the same drawn batch: for every part, the resistors that put
/// every target in place together (solve_resistors: pairs that interact are solved jointly),
/// then per pair a fixed resistor and a trimmer as size_trimmer gives.
struct trim_set {
  std::vector<trim_result> trims;  ///< one per pair, in the order given
  int settled{};                   ///< parts whose pairs all reached their targets together
  int unsettled{};                 ///< parts whose joint solve did not settle in joint_max_rounds
  int most_rounds{};               ///< the most rounds any part's joint solve took
  double coverage_all{};           ///< fraction of all runs every pair's trimmer brings to its target
};
trim_set size_trimmers(const stage& st, const std::vector<tune_pair>& pairs, const spread_settings& s,
                       base::eseries series);

}  // namespace pinchoff::model
