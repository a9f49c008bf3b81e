#pragma once
// The DK engine's options and its Newton statistics: what a caller sets and reads without
// the engine itself (model/engine/dk_engine.hpp).

namespace pinchoff::model {

struct dk_options {
  int max_iterations{50};       ///< Newton evaluations per attempt (1..1000)
  /// Accepted when the bound on the remaining error of the port voltages after the last
  /// Newton step, and on the residual there, are both below tol_v (see dk_single.cpp); where
  /// the port equations cannot be resolved that finely in double precision (megohm
  /// transimpedances carrying tens of mA), below tol_v plus their rounding, at most 1e-8 V.
  double tol_v{1e-10};
  int max_substep_levels{6};    ///< failed samples are retried in 2, 4, ..., 2^levels sub-steps
  /// Order of the warm start, 0..3: 0 the last solution; 1..3, the last solution moved
  /// along the new p's step by dv/dp at the last 1..3 samples (Adams-Bashforth of that
  /// order).
  int predictor_order{3};
  /// Also evaluate the device at every accepted point and require the actual residual to
  /// be below tol_v (slower; checks the error bound, see dk_stats::bound_misses).
  bool confirm{false};
  /// Use the sample loop compiled for AVX2 + FMA (state update and Newton solve) where the
  /// processor has them (x86-64). It rounds differently from the portable loop (last bits
  /// of the samples); a processor always takes the same loop, so results repeat. false:
  /// the portable loop.
  bool wide_kernels{true};
  /// More than one JFET: factor I - F Jf by 2 x 2 blocks, one per JFET, where that is safe
  /// (model/engine/dk_general.cpp, block_factor_n), else with partial pivoting. false: with
  /// partial pivoting always. Both are held to the same acceptance bound.
  bool block_factors{true};
  /// Three to six JFETs: solve each Newton step stage by stage (block Gauss-Seidel sweeps
  /// over each JFET's own 2 x 2 block, the coupling between the stages left in the linear
  /// residual and added to the acceptance bound; model/engine/dk_general.cpp), where that
  /// contracts, else from the factors as above. false (or block_factors false): from the
  /// factors always.
  bool torn_solve{true};
  /// Three to six JFETs on a processor with AVX2 + FMA (and block_factors): the sample loop
  /// that keeps M = (I - F Jf)^-1 in full, as two JFETs have (model/engine/dk_general.cpp,
  /// process_n), handing what it does not settle to the loop above. false: that loop.
  bool full_inverse{true};
  /// In that loop, where a Newton step misses the acceptance: one more step with the same
  /// M from the currents' remainders (no device evaluation; model/engine/dk_general.cpp,
  /// remainder_step), accepted where its own bound holds; else the next Newton iteration.
  bool rescue_steps{true};
  /// In that loop: M from the channels, M = I + Fc (I - G Fc)^-1 G with Fc F's k channel
  /// columns and G their gm and gds (a k x k inverse, the Woodbury identity;
  /// model/engine/dk_general.cpp, channel_m), each conducting gate junction added by a
  /// rank-one update (up to k / 2 of them, junction_update) and the slightly conducting ones
  /// left to the acceptance's remainders, instead of eliminating the 2k x 2k I - F Jf. The
  /// same matrix up to rounding. false: the elimination always.
  bool channel_inverse{true};
  /// The weight of the torn step's coupling (torn_solve) in the acceptance bound: 1. Anything else makes the bound
  /// unsound; it exists so that a test can show the coupling is needed (0..1).
  double coupling_weight{1.0};
  /// Two JFETs: correct an accepted point for its junctions' remainders (one more step
  /// with the same matrix, no device evaluation; model/engine/dk_acceptance.hpp,
  /// correction_floor), so that a state charged by gate conduction does not drift by their
  /// sum over many samples. false exists so that a test can show the correction is needed.
  bool correct_junctions{true};
};

struct dk_stats {
  long long samples{0};
  long long evaluations{0};      ///< device evaluations (Newton iterations), all attempts
  int max_evaluations{0};        ///< most in one sample
  long long substepped{0};       ///< samples that needed sub-steps and then converged
  long long failed{0};           ///< samples that did not converge even sub-stepped
  long long bound_misses{0};     ///< confirm mode: accepted points whose residual was too big
  long long pivoted{0};          ///< more than one JFET: Newton steps factored with pivoting, not by blocks
  long long torn_full{0};        ///< torn Newton steps that were computed from the factors after all
  long long rescued{0};          ///< three to six JFETs: samples accepted after a step with the same M (rescue_steps)
  long long channel_steps{0};    ///< three to six JFETs: Newton steps whose M came from the channels (channel_inverse)
  long long junction_updates{0}; ///< of those, the rank-one updates of M for a conducting gate junction
  double mean_evaluations() const noexcept { return samples ? double(evaluations) / double(samples) : 0.0; }

  /// The statistics of two runs together: the counts summed, the most in one sample the
  /// larger of the two.
  dk_stats& operator+=(const dk_stats& o) noexcept {
    samples += o.samples;
    evaluations += o.evaluations;
    max_evaluations = max_evaluations > o.max_evaluations ? max_evaluations : o.max_evaluations;
    substepped += o.substepped;
    failed += o.failed;
    bound_misses += o.bound_misses;
    pivoted += o.pivoted;
    torn_full += o.torn_full;
    rescued += o.rescued;
    channel_steps += o.channel_steps;
    junction_updates += o.junction_updates;
    return *this;
  }
};

}  // namespace pinchoff::model
