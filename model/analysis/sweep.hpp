#pragma once
// Drive sweeps: the periodic steady state of the stage for a sine at each drive level,
// simulated at the oversampled rate, and the harmonic profile of the voltage at the load.
//
// The record is one steady-state period of M samples holding K whole cycles (K = 3, or 2
// where the record is long: automatic_cycles; M chosen coprime with K), so every harmonic
// falls on a bin (no window, no leakage) and products folded from above the simulation's
// Nyquist frequency land between harmonic bins, where they are measured as aliasing. The frequency is snapped to K fs / M and the
// snapped value reported; M is the nearest such length at which the same harmonics lie
// within the bandwidth as at the frequency asked (record_samples below). Any M transforms
// in O(M log M) (dsp/fft.hpp), and M is bounded (max_record_samples).
//
// A chain is simulated whole, with the output at the load. Asked for (per_stage), each of
// its stages is also reported at its own output (net_stage::output: after its output
// coupling capacitor, or its output tap), read from that same steady-state period by node
// probes (model/engine/dk_probes.hpp): no more simulation, one more pass over the period.
#include <cstddef>
#include <string>
#include <vector>

#include "model/analysis/headroom.hpp"
#include "model/engine/dk_stats.hpp"
#include "model/circuit/stage.hpp"

namespace pinchoff::model {

/// Below this a harmonic (or the aliasing) re the fundamental is under the engine's numerical
/// floor: its Newton tolerance (1e-10 V on the port voltages) against output levels of tens
/// of millivolts and up. A level below it is no figure, only "below the floor", and every
/// command reports it so (cli/common.hpp).
inline constexpr double numerical_floor_dbc = -180.0;

/// The harmonics every command reports unless told otherwise (H2..H10), and THD counts at
/// least these: one default for sweep, compare and the rest.
inline constexpr int default_harmonics = 10;

struct sweep_settings {
  double frequency_hz{1000.0};
  std::vector<double> drives_vpk;   ///< generator open-circuit sine peaks, > 0
  int oversample{8};                ///< 1..64
  bool automatic_oversample{false}; ///< oversample chosen by automatic_oversampling()
  double base_rate_hz{48000.0};     ///< the audio rate the oversampling multiplies
  int harmonics{default_harmonics}; ///< N: H2..HN
  double bandwidth_hz{20000.0};     ///< harmonics above it are not counted (AES17)
  int cycles{0};                    ///< K, 1..64; 0: automatic_cycles()
  int threads{0};                   ///< 0: one per core; results do not depend on it
  /// A chain: also each stage's output and clean region (sweep_point::stages). Ignored for
  /// a single stage.
  bool per_stage{false};
  /// Also the mean shift of each stage's output tap (drain or source) under drive
  /// (sweep_point::tap_shift_v, stage_point::tap_shift_v), traced by node probes from the
  /// same period: what moves when an AC-coupled load's mean cannot.
  bool taps{false};
  /// Indices into drives_vpk whose steady-state record at the load is kept
  /// (sweep_point::record_v), for pictures of the waveform and the transfer curve.
  std::vector<int> keep_records;
};

/// The oversampling a sweep takes when none is asked (sweep_settings::automatic_oversample). What
/// the factor guards against is harmonics above the simulation's Nyquist limit folding back
/// into the band, and what folds is a harmonic's order: the first harmonic that can fold
/// into the band at factor k is of order (k * base_rate - bandwidth) / frequency. The factor
/// is the lowest of 1, 2, 4 and 8 at which that order is at least reference_fold_order (the
/// order at 8x 48 kHz and 1 kHz, with a 20 kHz band), and whose Nyquist limit is above the
/// band; 8 where none is. So 8 at about 1 kHz and above at 48 kHz, 1 at 20-70 Hz.
int automatic_oversampling(double frequency_hz, double base_rate_hz, double bandwidth_hz) noexcept;
inline constexpr double reference_fold_order = (8 * 48000.0 - 20000.0) / 1000.0;  // 364

/// The cycles a record holds when none are asked (sweep_settings::cycles = 0). With K
/// cycles and M coprime with K, a product folded across a multiple m of the simulation rate
/// lands between harmonic bins unless m is a multiple of K: the first one that can land on a
/// harmonic's bin is of order about K fs / f. Three cycles put it at 1152 at 1 kHz and 8x
/// 48 kHz (reference_bin_fold_order); two cycles are taken where they already put it that
/// high (below about 83 Hz at 48 kHz, 666 Hz at 8x), since the record, which is also the
/// steady state's period, is then a third shorter; otherwise three.
int automatic_cycles(double frequency_hz, double sample_rate_hz) noexcept;
inline constexpr double reference_bin_fold_order = 3 * 8 * 48000.0 / 1000.0;  // 1152
/// The cycles a record of these settings holds: sweep_settings::cycles, or automatic_cycles()
/// at the simulation rate when that is 0.
int record_cycles(const sweep_settings& s) noexcept;

/// Validates the settings against the simulation rate; throws setting_error naming the
/// field ("oversampling", "base_rate_hz", "frequency_hz", "harmonics", "bandwidth_hz",
/// "drives_vpk"): a frequency at or above the Nyquist limit of the audio rate, a record
/// longer than max_record_samples (named as "frequency_hz", with the lowest frequency the
/// rate allows), ...
void validate(const sweep_settings& s);

/// One stage of a chain at one drive, over the steady-state period the point analyses.
struct stage_point {
  double output_vpk{};        ///< fundamental at the stage's output, peak
  double thd_ratio{}, thd_percent{}, thd_db{};
  std::vector<double> harmonics_dbc;  ///< H2..HN, as at the load; NaN above the bandwidth
  double bias_shift_v{};      ///< the stage's mean VGS minus its rest value
  double tap_shift_v{};       ///< sweep_settings::taps: its output tap's mean voltage minus its rest value; else NaN
  /// The JFET stayed in its clean region (headroom.hpp: vds >= vgs - vp, vgs > vp,
  /// vgs <= 0) at every sample of the period.
  bool clean{true};
  /// Not clean: the limit crossed furthest (margins scaled as headroom.hpp scales them).
  swing_limit_kind limit{swing_limit_kind::none};
  /// The smallest margin to the clean region's limits over the period, scaled as the limits
  /// are (volts over max(1 V, |VP|)): vds - (vgs - vp), vgs - vp and -vgs; below 0 out of it.
  double margin{};
};

/// One stage of a chain over the whole sweep.
struct stage_sweep {
  std::string label;          ///< net_stage::label
  bool leaves_clean{false};   ///< some point of the sweep is not clean
  double first_unclean_drive_vpk{};  ///< the lowest drive of the sweep at which it is not
  /// The highest drive below that one at which it is clean; 0 when the lowest drive of the
  /// sweep is already not clean.
  double last_clean_drive_vpk{};
  /// Where it leaves the clean region, between the two: the drive at which the stage's
  /// margin (stage_point::margin) crosses 0, interpolated linearly in drive between them
  /// (first_unclean_drive_vpk when there is no clean point below it).
  double leaves_clean_drive_vpk{};
  swing_limit_kind limit{swing_limit_kind::none};  ///< the limit at that drive
};

struct sweep_point {
  double drive_vpk{};
  double output_vpk{};       ///< fundamental at the load, peak
  double gain_db{};          ///< 20 log10(output / drive)
  double thd_ratio{}, thd_percent{}, thd_db{};
  std::vector<double> harmonics_dbc;  ///< H2..HN; NaN above the bandwidth
  double alias_dbc{};        ///< non-harmonic energy within the bandwidth, re the fundamental
  double even_odd_ratio{};   ///< even-harmonic over odd-harmonic power (H2.. only)
  double dc_shift_v{};       ///< mean load voltage minus its rest value
  /// sweep_settings::taps: the mean voltage of the last stage's output tap (drain or
  /// source, what feeds the load) minus its rest value; else NaN.
  double tap_shift_v{};
  double bias_shift_v{};     ///< mean VGS minus its rest value (gate rectification, squash); a chain: its first JFET's
  // Solver figures.
  double state_change_v{};   ///< remaining period-to-period state change
  int shooting_iterations{};
  int periods_simulated{};
  int periods_tracked{};     ///< of them, those that tracked the monodromy (3-6 times a plain one's cost)
  bool converged{};
  bool used_settling{};
  dk_stats newton;
  /// A chain's stages in signal order (sweep_settings::per_stage); empty otherwise.
  std::vector<stage_point> stages;
  /// sweep_settings::keep_records: the steady-state record at the load (real volts,
  /// samples_per_record samples holding `cycles` cycles of the generator's
  /// drive_vpk * sin(2 pi cycles n / M)); empty otherwise.
  std::vector<double> record_v;
};

/// Drive and output where THD crosses a level, interpolated log-log between points.
struct thd_crossing {
  double thd_percent{};
  bool found{false};
  double drive_vpk{}, output_vpk{};
};

struct sweep_result {
  double frequency_hz{};      ///< as simulated (snapped)
  double requested_hz{};
  double sample_rate_hz{};    ///< base rate * oversample
  int oversample{};
  int samples_per_record{};   ///< M
  int cycles{};               ///< K
  std::vector<sweep_point> points;  ///< in the order of the drives given
  std::vector<thd_crossing> crossings;  ///< 1 %, 3 %, 10 %
  std::vector<stage_sweep> stages;  ///< as sweep_point::stages
  double rest_output_v{};     ///< the load's voltage at rest (real volts)
};

/// One period of a kept record (sweep_point::record_v), its samples folded onto one cycle
/// of the fundamental and put in phase order (the record is periodic in the fundamental's
/// period, and with M coprime with K its samples land at M distinct phases), at most
/// `max_points` of them, evenly taken.
struct period_trace {
  std::vector<double> phase;        ///< 0 <= phase < 1, of the generator's sine, ascending
  std::vector<double> generator_v;  ///< the generator's instantaneous voltage
  std::vector<double> output_v;     ///< the load's voltage minus its rest value
};
period_trace fold_period(const sweep_point& p, const sweep_result& r, std::size_t max_points = 2400);

/// Settings that passed validate(), with the rate and record they imply. Only plan_sweep
/// makes one, so a sweep run many times on one plan (a spread runs one per part) or whose
/// settings were checked before the stage was read is checked once.
class sweep_plan {
 public:
  const sweep_settings& settings() const noexcept { return settings_; }
  double sample_rate_hz() const noexcept { return sample_rate_hz_; }    ///< base rate * oversample
  int samples_per_record() const noexcept { return samples_per_record_; }  ///< M
  double frequency_hz() const noexcept { return frequency_hz_; }        ///< as simulated (snapped)

 private:
  friend sweep_plan plan_sweep(const sweep_settings& s);
  sweep_plan() = default;
  sweep_settings settings_;
  double sample_rate_hz_{};
  int samples_per_record_{};
  double frequency_hz_{};
};

/// validate(s), then the record: throws setting_error as validate does.
sweep_plan plan_sweep(const sweep_settings& s);

sweep_result run_sweep(const stage& st, const sweep_plan& plan);
/// run_sweep(st, plan_sweep(s)).
sweep_result run_sweep(const stage& st, const sweep_settings& s);

/// Record length M for K cycles of f at fs: round(K fs / f) moved to the nearest value
/// coprime with K.
int record_samples(double frequency_hz, double sample_rate_hz, int cycles);

/// The sweep's record: the nearest M coprime with K whose snapped frequency K fs / M counts
/// the same harmonics (H2..HN within the bandwidth, on bins below Nyquist) as f itself, so
/// the snap never moves a harmonic across the band edge (5 kHz at 384 kHz: M = 232,
/// 4965.5 Hz, keeps H4 at 19.86 kHz inside 20 kHz, where the nearest M = 230 would put it
/// at 20.03 kHz, outside).
int record_samples(double frequency_hz, double sample_rate_hz, int cycles, int harmonics, double bandwidth_hz);

/// The longest record a sweep point holds: 2^21 samples (0.37 Hz at 384 kHz with K = 2,
/// 20 Hz up to a 21 MHz simulation rate). A point keeps the drive, the output, the spectrum
/// and the transform's work, at most about 120 bytes a sample (0.25 GB at the limit), and
/// the points share a transform plan of about 100 bytes a sample.
inline constexpr int max_record_samples = 1 << 21;
/// Points of one sweep (or designs of one comparison) run at once only as many as fit in
/// this much working memory.
inline constexpr std::size_t sweep_working_bytes = std::size_t{1} << 30;
/// The memory one point holds while it runs, for a record of that many samples, with
/// `stages_probed` stages of a chain reported (sweep_settings::per_stage; 0: none).
std::size_t sweep_point_bytes(int samples_per_record, int stages_probed = 0);
/// Threads for points at once: `threads` (0: one per core), fewer when their records would
/// not fit sweep_working_bytes together (at least 1).
int concurrent_points(int threads, int samples_per_record, int stages_probed = 0);

}  // namespace pinchoff::model
