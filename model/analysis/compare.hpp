#pragma once
// Side-by-side figures of several candidate stages at one test frequency: the bias, the
// mid-band gain, the clean swing, and the harmonic profile of the periodic steady state,
// either at one drive for every design or, per design, at the drive that gives one
// fundamental output level at the load (equal loudness at the output).
//
// Every harmonic figure is a run_sweep point (model/analysis/sweep.hpp), so `compare` and `sweep`
// agree exactly at the same drive, frequency and settings. The drive searches below are
// root finds on run_sweep points in log drive (Illinois-modified regula falsi: Dowell &
// Jarratt 1971), with the bracket grown by doubling.
#include <optional>
#include <span>
#include <string>
#include <vector>

#include "model/circuit/operating_point.hpp"
#include "model/circuit/stage.hpp"
#include "model/analysis/sweep.hpp"

namespace pinchoff::model {

enum class compare_mode {
  at_drive,   ///< every design driven at level_vpk (generator, open circuit)
  at_output,  ///< each design driven so that its fundamental at the load is level_vpk
};

struct compare_settings {
  compare_mode mode{compare_mode::at_output};
  double level_vpk{0.34641016151377546}; ///< > 0; default -10 dBu = sqrt(0.12) V peak
  /// at_drive only: a sound pressure level (dB SPL) instead of level_vpk. Each design is then
  /// driven at its own capsule's open-circuit voltage for it; every design needs a capsule.
  std::optional<double> drive_db_spl;
  double frequency_hz{1000.0};           ///< snapped as in run_sweep
  int harmonics{default_harmonics};      ///< N: H2..HN reported, 2..100
  int oversample{8};  ///< 1..64
  bool automatic_oversample{false};  ///< oversample chosen by automatic_oversampling() (sweep.hpp)
  double base_rate_hz{48000.0};
  double bandwidth_hz{20000.0};
  double max_drive_vpk{20.0};            ///< the drive searches give up above it
  double max_thd_percent{50.0};          ///< at_output: an output reached only beyond it is not reached
  double output_tolerance_db{0.001};     ///< at_output: |output - target| at most this
  double thd_tolerance{1e-4};            ///< 1 % THD search: relative error of the THD
  double thd_search_from_vpk{1e-3};      ///< the 1 % THD search starts here and doubles
  int threads{0};                        ///< for the steady-state points; results do not depend on it
};

/// Validates the settings; throws setting_error naming the field: "drive_level_vpk" or
/// "output_level_vpk" (the level, by mode), "harmonics", and those of validate(sweep_settings)
/// for the frequency, oversampling and rate.
void validate(const compare_settings& s);

/// The outcome of a search for a drive (a value: not finding one is an expected result).
struct drive_search {
  bool found{false};
  double drive_vpk{};       ///< the drive found, or the last one tried
  sweep_point point;        ///< the steady state at drive_vpk
  int evaluations{};        ///< steady states computed
  std::string reason;       ///< why not found (empty when found)
};

/// The sweep settings compare uses for one point: THD counts H2..max(N, 10) (the
/// project's N = 10 convention, or more when more harmonics are asked for).
sweep_settings point_settings(const compare_settings& s, double drive_vpk);

/// Drive whose fundamental at the load is `target_vpk` within s.output_tolerance_db. Not
/// found when the output stays below the target up to s.max_drive_vpk, or the THD at
/// (or on the way to) the target exceeds s.max_thd_percent.
drive_search find_drive_for_output(const stage& st, const compare_settings& s, double target_vpk);

/// Lowest drive at which THD reaches `thd_percent` (within s.thd_tolerance, relative),
/// scanning up from s.thd_search_from_vpk in octaves, then refining in the bracket. Not
/// found when the THD stays below up to s.max_drive_vpk, or is already above at the start.
drive_search find_drive_for_thd(const stage& st, const compare_settings& s, double thd_percent);

struct design_figures {
  terminal_point at;                 ///< DC operating point, real signs (a chain: its first JFET's)
  /// A chain: each stage's label and its JFET's DC operating point, in signal order; empty
  /// for a single stage.
  std::vector<std::string> stage_labels;
  std::vector<terminal_point> stages_at;
  double gain_midband{};             ///< V/V, signed (small signal, coupling caps shorted)
  double gain_midband_db{};
  double clean_swing_vpk{};          ///< headroom: largest clean symmetric swing at the load
  /// The comparison's output (point.output_vpk) is above clean_swing_vpk: its figures are those
  /// of a stage already out of its clean region (a warning in compare_result::warnings says so).
  bool beyond_clean_swing{false};
  double clean_drive_vpk{};          ///< ... and the drive peak that gives it
  bool reached{true};                ///< at_output: the target was reached within the limits
  std::string unreached_reason;
  int drive_evaluations{};           ///< steady states spent finding the drive (at_output)
  sweep_point point;                 ///< the harmonic profile at the drive used
  drive_search thd_1_percent;        ///< drive and output (point.output_vpk) at 1 % THD
  /// A capsule source: the drive at 0.5 % THD too, for the maximum SPL (a microphone's rating
  /// at 0.5 % and 1 % THD); empty for any other source.
  std::optional<drive_search> thd_half_percent;
};

struct compare_result {
  double frequency_hz{};             ///< as simulated (snapped)
  double requested_hz{};
  double sample_rate_hz{};
  int oversample{};
  int harmonics{};                   ///< N shown (H2..HN)
  int thd_harmonics{};               ///< THD counts H2..this
  compare_mode mode{};
  double level_vpk{};
  std::optional<double> drive_db_spl;   ///< as in the settings
  std::vector<design_figures> designs;  ///< in the order given
  std::vector<std::string> warnings;    ///< solver trouble, per design ("design 2: ...")
};

/// Figures for every stage; each point's harmonics_dbc holds H2..H(thd_harmonics), of
/// which the first harmonics - 1 are the ones asked for. A design that cannot reach the
/// output target has reached = false and its reason; its point is the last one tried.
/// Settings that passed validate(). Only plan_compare makes one, so settings checked before
/// the stage files are read are not checked again.
class compare_plan {
 public:
  const compare_settings& settings() const noexcept { return settings_; }

 private:
  friend compare_plan plan_compare(const compare_settings& s);
  compare_plan() = default;
  compare_settings settings_;
};

/// A capsule stage's maximum sound pressure levels at s.frequency_hz: the lowest levels at which
/// THD reaches 0.5 % and 1 % as the pressure rises (find_drive_for_thd), in dB SPL.
struct max_spl_figures {
  drive_search half_percent, one_percent;
  double half_percent_db_spl{}, one_percent_db_spl{};  ///< meaningful where found
};
/// Throws internal_error when the stage has no capsule.
max_spl_figures find_max_spl(const stage& st, const compare_settings& s);

/// validate(s): throws setting_error as validate does.
compare_plan plan_compare(const compare_settings& s);

/// With settings.drive_db_spl, a design without a capsule, or whose capsule's voltage at that
/// level is above max_drive_vpk, throws setting_error("drive_level_vpk") before anything runs.
compare_result compare_designs(std::span<const stage> stages, const compare_plan& plan);
/// compare_designs(stages, plan_compare(s)).
compare_result compare_designs(std::span<const stage> stages, const compare_settings& s);

}  // namespace pinchoff::model
