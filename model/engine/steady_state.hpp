#pragma once
// Periodic steady state of a stage driven by a sine, by shooting (Aprille & Trick, "Steady-
// state analysis of nonlinear circuits with periodic inputs", Proc. IEEE 60(1), 1972;
// Kundert, White & Sangiovanni-Vincentelli, Steady-State Methods for Simulating Analog
// and Microwave Circuits, 1990): Newton on the start state x0 of one period so that the
// period map returns it, phi(x0) = x0, with the monodromy M = d phi / d x0 accumulated
// sample by sample from the DK engine's converged Newton (dk_engine::process_tracked).
// Coupling time constants of seconds then cost a few periods, not seconds of settling.
// When shooting does not converge, plain settling periods follow from its best start.
#include <vector>

#include "model/engine/dk_engine.hpp"
#include "model/circuit/network.hpp"
#include "model/circuit/operating_point.hpp"

namespace pinchoff::model {

struct steady_state_options {
  int periods_out{1};               ///< steady-state periods returned, >= 1
  /// Sine cycles in one period of samples_per_period samples (>= 1). With more than one
  /// cycle, and cycles and samples coprime, folded (aliased) products fall between the
  /// harmonic bins of the record instead of on them.
  int cycles{1};
  int max_shooting_iterations{12};  ///< Newton updates of the start state
  /// Converged when the estimated distance of the start state to the periodic solution,
  /// |(M - I)^-1 (phi(x0) - x0)|, is below this (volts; states are volts, see dk_engine).
  double tol_v{1e-10};
  int max_settle_periods{20000};    ///< fallback: plain periods at most
  /// fallback: samples at most over its periods, so that a long record (a two-tone one of
  /// 6400 samples) cannot run 20000 periods: about 2 s on one JFET at 384 kHz.
  long long max_settle_samples{20'000'000};
  /// Reuse the monodromy of the last tracked period while Newton converges fast (chord
  /// steps, a plain period's cost each); false tracks it over every shooting period.
  bool reuse_monodromy{true};
  /// Also return every JFET's port voltages at every sample of the returned periods and the
  /// state before them (steady_state_result::ports_network_v, start_state), from which the
  /// voltage of any node follows (model/engine/dk_probes.hpp). Recorded as each period runs,
  /// since which period is returned is known only after it.
  bool record_ports{false};
  /// Where shooting starts (network-frame states; empty: the DC state). A sweep starts each
  /// drive from the periodic state of the drive before it.
  Eigen::VectorXd start_from;
  /// A monodromy to start from (ns x ns; empty: none): the last one tracked for a nearby
  /// drive (steady_state_result::monodromy). Shooting then begins with chord steps on it
  /// instead of tracking a period; a step that does not contract fast enough tracks as
  /// usual, so it changes only how many periods are tracked, never the acceptance.
  Eigen::MatrixXd start_monodromy;
  dk_options engine;
};

struct steady_state_result {
  double frequency_hz{0};           ///< sample_rate * cycles / samples_per_period
  int samples_per_period{0};
  std::vector<double> output_v;     ///< periods_out * samples_per_period samples at the load, real volts
  double mean_vgs_v{0}, mean_vds_v{0};  ///< port voltages averaged over the returned periods, real signs
  double mean_output_v{0};          ///< mean of output_v
  /// Remaining period-to-period state change max |phi(x0) - x0| of the returned start state (V).
  double state_change_v{0};
  double distance_v{0};             ///< the Newton estimate of its distance to the periodic solution (V)
  int shooting_iterations{0};       ///< Newton updates made
  int periods_simulated{0};         ///< every period run, shooting, settling and output
  int periods_tracked{0};           ///< of them, those that tracked the monodromy
  bool converged{false};
  bool used_settling{false};        ///< shooting did not converge; settling periods were run
  dk_stats engine;                  ///< Newton statistics over all periods
  /// With record_ports: the state before the first returned sample (network frame), and
  /// the port voltages (vgs, vds) of JFET 0, then JFET 1, ... after each returned sample,
  /// sample after sample (2 * devices values a sample, network frame); empty otherwise.
  Eigen::VectorXd start_state;
  std::vector<double> ports_network_v;
  /// The start state of the returned periods (network frame), always filled.
  Eigen::VectorXd periodic_state;
  /// The monodromy the last Newton correction used (tracked here, or the start_monodromy
  /// given); empty when none was.
  Eigen::MatrixXd monodromy;
};

/// Steady state for the generator sine amplitude_v * sin(2 pi cycles n / samples_per_period)
/// (real volts peak, n counted from the start of each period) at the engine's rate.
/// Starts from the engine's DC state; the engine is left at the end of the returned periods.
/// samples_per_period >= 4.
steady_state_result periodic_steady_state(dk_engine& engine, double amplitude_v, int samples_per_period,
                                          const steady_state_options& opt = {});

/// Steady state for any periodic generator drive given as one period of samples (real
/// volts); `opt.cycles` is not used, and frequency_hz is the period's repetition rate.
steady_state_result periodic_steady_state(dk_engine& engine, const std::vector<double>& drive,
                                          const steady_state_options& opt = {});

/// The same with an engine built for the network at `sample_rate_hz`.
steady_state_result periodic_steady_state(const network& net, const operating_point& op, double sample_rate_hz,
                                          double amplitude_v, int samples_per_period,
                                          const steady_state_options& opt = {});

}  // namespace pinchoff::model
