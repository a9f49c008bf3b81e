#pragma once
// Nonlinear state-space ("DK") engine for a network: the nodal DK method (Yeh, Abel &
// Smith, IEEE TASLP 18(4), 2010; Holters & Zölzer, EUSIPCO 2015) on the modified nodal
// system of the network (Ho, Ruehli & Brennan, IEEE TCAS 22(6), 1975).
//
// Resistors, trapezoidal capacitor companions (G = 2C/T) and the two ideal sources are
// stamped into one constant MNA matrix S, inverted once. Each of the network's k JFETs
// enters through its three currents [igs(vgs), igd(vgs - vds), id(vgs, vds)] (an incidence
// matrix) and is controlled by its two port voltages [vgs, vds] (read through another);
// i (3k) and v (2k) stack them device after device. With u = [supply_v, generator_v]
// this gives, per sample n,
//
//   x_n = A x_{n-1} + B u_n + C i_n
//   v_n = D x_{n-1} + E u_n + F i_n,   i_n = f(v_n)
//   y_n = Do x_{n-1} + Eo u_n + Fo i_n
//
// and only the 2k port voltages are found by Newton. One JFET: closed-form 2x2 solves.
// More: the device Jacobian Jf is block diagonal (3x2 per JFET), and I - F Jf (2k x 2k) is
// factored by partial-pivoting LU (plain loops) each iteration, with the same acceptance bound, junction
// limiting (per JFET), sub-stepping and monodromy factor (model/dk_multi.cpp).
//
// State: for capacitor k, the trapezoidal history voltage q_k = v_k + i_k / G_k, with the
// capacitor's voltage v_k and current i_k (a -> b) at the same sample and G_k = 2 C_k / T.
// The companion of the next sample is then the conductance G_k in series with the voltage
// q_k (q_{k,n} = 2 v_{k,n} - q_{k,n-1}). At DC (no capacitor current) q_k equals the
// capacitor voltage, so the states are volts and start at the DC operating point.
//
// Everything inside is the n-channel network frame (model/network.hpp); the engine's
// inputs and outputs are real (bench) signs: network u = sign * real u, real y = sign * y.
#include <array>
#include <limits>
#include <span>
#include <vector>

#include <Eigen/Dense>

#include "model/engine/dk_device.hpp"
#include "model/circuit/network.hpp"
#include "model/circuit/operating_point.hpp"

namespace pinchoff::model {

/// The discretised network. Sizes, for ns states and k JFETs: A ns x ns, B ns x 2,
/// C ns x 3k; D 2k x ns, E 2k x 2, F 2k x 3k; Do 1 x ns, Eo 1 x 2, Fo 1 x 3k. Columns of
/// B/E/Eo: supply, generator (network volts); of C/F/Fo: igs, igd, id (A) of JFET 0, then
/// of JFET 1, ... Rows of D/E/F: vgs, vds of JFET 0, then of JFET 1, ...
struct dk_matrices {
  int states{0};
  int devices{1};
  double sample_rate_hz{0};
  Eigen::MatrixXd a, b, c;
  Eigen::MatrixXd d;
  Eigen::Matrix<double, Eigen::Dynamic, 2> e;
  Eigen::MatrixXd f;
  Eigen::RowVectorXd d_out;
  Eigen::RowVector2d e_out;
  Eigen::RowVectorXd f_out;
  double rcond{0};  ///< reciprocal condition estimate (1-norm) of the MNA matrix S
};

/// Builds the matrices for the network at `sample_rate_hz` (> 0). Throws internal_error when
/// S is singular or too ill-conditioned to trust (rcond < 1e-15).
dk_matrices discretise(const network& net, double sample_rate_hz);

/// States consistent with a DC network solution `x` (every capacitor current zero): q_k is
/// capacitor k's voltage. Size: number of capacitors.
Eigen::VectorXd dc_states(const network& net, const Eigen::VectorXd& x);

struct dk_options {
  int max_iterations{50};       ///< Newton evaluations per attempt (1..1000)
  /// Accepted when the bound on the remaining error of the port voltages after the last
  /// Newton step, and on the residual there, are both below tol_v (see dk_engine.cpp); where
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
};

struct dk_stats {
  long long samples{0};
  long long evaluations{0};      ///< device evaluations (Newton iterations), all attempts
  int max_evaluations{0};        ///< most in one sample
  long long substepped{0};       ///< samples that needed sub-steps and then converged
  long long failed{0};           ///< samples that did not converge even sub-stepped
  long long bound_misses{0};     ///< confirm mode: accepted points whose residual was too big
  double mean_evaluations() const noexcept { return samples ? double(evaluations) / double(samples) : 0.0; }
};

class dk_engine {
 public:
  /// Engine for `net` at the (oversampled) rate, starting at the DC operating point `op`.
  dk_engine(const network& net, const operating_point& op, double sample_rate_hz, const dk_options& opt = {});
  /// The same, solving the DC operating point first (throws as solve_operating_point does).
  dk_engine(const network& net, double sample_rate_hz, const dk_options& opt = {});

  /// One sample: generator open-circuit voltage in (real volts, finite), voltage across
  /// the load out (real volts). Allocates nothing.
  double process(double generator_v) noexcept;
  /// A block; in and out may be the same span; sizes must match. Allocates nothing.
  void process(std::span<const double> in, std::span<double> out) noexcept;

  /// The same as process(), and `sensitivity` <- (d x_n / d x_{n-1}) * sensitivity, the
  /// per-sample factor of the monodromy matrix (Aprille & Trick 1972) at the converged
  /// point: A + C Jf (I - F Jf)^-1 D. `sensitivity` is ns x ns. Allocates nothing.
  double process_tracked(double generator_v, Eigen::MatrixXd& sensitivity);

  /// Back to the DC operating point, statistics cleared.
  void reset();

  int states() const noexcept { return m_.states; }
  /// Number of JFETs.
  int devices() const noexcept { return m_.devices; }
  /// The state vector (network frame, volts; see the file comment).
  Eigen::VectorXd state() const;
  /// Sets the states (size ns); the warm-start history is kept.
  void set_state(const Eigen::Ref<const Eigen::VectorXd>& x);
  const Eigen::VectorXd& dc_state() const noexcept { return x_dc_; }

  /// Port voltages (vgs, vds) of JFET `device` (0..devices()-1) at the last sample, real signs.
  Eigen::Vector2d ports_v(int device = 0) const noexcept { return sign_ * ports_network_v(device); }
  /// Network frame (n-channel mirror), as used inside.
  Eigen::Vector2d ports_network_v(int device = 0) const noexcept {
    return m_.devices == 1 ? ls_.last.v : Eigen::Vector2d(g_.last.v.segment<2>(2 * device));
  }
  /// Output (real volts) the DC state gives with the generator at 0 V.
  double dc_output_v() const noexcept { return y_dc_; }

  const dk_stats& stats() const noexcept { return stats_; }
  /// Which compiled sample loop runs (dk_engine.cpp): "AVX2+FMA" or "portable" (the
  /// general path, more than one JFET, is portable).
  const char* sample_loop() const noexcept;
  void clear_stats() noexcept { stats_ = {}; }
  const dk_matrices& matrices() const noexcept { return m_; }
  const dk_options& options() const noexcept { return opt_; }
  double sample_rate_hz() const noexcept { return m_.sample_rate_hz; }

 private:
  // A converged (or last) point of the port equations.
  // (Members left uninitialised: a temporary of the sample loop.)
  struct port_point {
    Eigen::Vector2d v;
    Eigen::Vector3d i;
    Eigen::Vector4d g;               ///< ggs, ggd, gm, gds: the conductances behind Jf
    Eigen::Matrix2d m;               ///< dv/dp = (I - F Jf)^-1
    /// di/dv: [[ggs, 0], [ggd, -ggd], [gm, gds]].
    Eigen::Matrix<double, 3, 2> jf() const {
      Eigen::Matrix<double, 3, 2> j;
      j << g[0], 0.0, g[1], -g[1], g[2], g[3];
      return j;
    }
  };


  // What the one-JFET sample loop carries from one sample to the next; a block works on a
  // copy in locals (kept in registers, no round trip through the engine's memory a sample).
  struct loop_state {
    port_point last;                                 // the last sample's solution
    Eigen::Vector2d q{Eigen::Vector2d::Zero()};      // D x_{n-1}
    Eigen::Vector2d p_last{Eigen::Vector2d::Zero()};
    // dv/dp at the two samples before the last, for the warm start (dk_engine.cpp, step_t).
    Eigen::Matrix2d m_prev{Eigen::Matrix2d::Zero()};
    Eigen::Matrix2d m_prev2{Eigen::Matrix2d::Zero()};
  };

  // The general path for more than one JFET (model/dk_multi.cpp). Every size is fixed when
  // the engine is built, so the sample loop allocates nothing.
  struct port_set {
    Eigen::VectorXd v;   ///< 2k port voltages
    Eigen::VectorXd i;   ///< 3k device currents
    Eigen::MatrixXd jf;  ///< 3k x 2k, di/dv, block diagonal
    Eigen::MatrixXd m;   ///< 2k x 2k, dv/dp = (I - F Jf)^-1
    void resize(int k);
  };
  struct general_path {
    std::vector<detail::device_consts> dev;
    std::vector<detail::port_currents> cur;     // per JFET, at the Newton iterate
    Eigen::MatrixXd f_abs;                      // |F|
    Eigen::MatrixXd w;                          // [A - I, B, C; D A, D B, D C; Do, Eo, Fo]
    Eigen::VectorXd pre, out;                   // W's x and u columns times [x; u]; the product
    Eigen::VectorXd q, p, p_last, p_dc, dp;
    Eigen::VectorXd v, r, d, base, step, rem, t, bound, pc, pj, guess;
    Eigen::VectorXd allowed, mag;               // the acceptance's rounding: per row, per current
    Eigen::MatrixXd j;                          // I - F Jf, then its LU factors
    std::vector<int> piv;                       // the LU's row interchanges
    port_set last, dc, trial, cur_pt, next_pt;
    Eigen::MatrixXd m_prev, m_prev2;            // dv/dp at the two samples before the last (warm start)
    Eigen::VectorXd mdl;                        // the warm start's products
    Eigen::MatrixXd cj, md;                     // process_tracked: C Jf (ns x 2k), M D (2k x ns)
  };

  void init(const network& net, const operating_point& op);
  template <int NS, bool Wide>
  int step_t(loop_state& s, double* xin, double* pre, double* outv, double generator_v, double& y) noexcept;
  template <int NS, bool Wide>
  void block_t(const double* in, double* out, std::size_t n) noexcept;
  template <int NS>
  void block_portable(const double* in, double* out, std::size_t n) noexcept;
  template <int NS>
  void block_wide(const double* in, double* out, std::size_t n) noexcept;
  void run_block(const double* in, double* out, std::size_t n) noexcept;
  static void store_point(port_point& out, const Eigen::Array2d& v, double igs, double igd, double id,
                          const detail::port_currents& c, const Eigen::Array2d& mc0, const Eigen::Array2d& mc1) noexcept;
  double junction_step_scale(double v0, double v1, double d0, double d1) const noexcept;
  void init_general(const network& net, const operating_point& op);
  void reset_general();
  double process_general(double generator_v) noexcept;
  void point_general(const Eigen::VectorXd& v, port_set& out) noexcept;
  // K JFETs at compile time (fixed-size views of the storage), or K = 0: any number.
  template <int K>
  double process_k(double generator_v) noexcept;
  template <int K>
  bool solve_general(const Eigen::VectorXd& p, const Eigen::VectorXd& guess, port_set& out, int& evals) noexcept;
  template <int K>
  void substep_general(const Eigen::VectorXd& p, port_set& out, int& evals) noexcept;
  // The one-JFET Newton: its state between iterations, one iteration (inlined into the
  // sample loop for the first), the rest out of line, and the whole from a guess.
  struct newton_state {
    explicit newton_state(const Eigen::Vector2d& guess) : v(guess.array()), base(v) {}
    Eigen::Array2d v, base;
    Eigen::Array2d step{Eigen::Array2d::Zero()};
    double rn_base{std::numeric_limits<double>::infinity()};
    bool may_damp{false};
    int halvings{0};
  };
  enum class newton_outcome { accepted, failed, go_on };
  newton_outcome newton_iteration(newton_state& st, const Eigen::Vector2d& p, port_point& out, int& evals) noexcept;
  bool newton_rest(newton_state& st, const Eigen::Vector2d& p, port_point& out, int& evals, int done) noexcept;
  bool solve_ports(const Eigen::Vector2d& p, const Eigen::Vector2d& guess, port_point& out, int& evals) noexcept;
  port_point rest_of_sample(newton_state st, int done, bool failed, Eigen::Vector2d p, port_point last,
                            Eigen::Vector2d p_last, int& evals) noexcept;
  void substep(const Eigen::Vector2d& p, const port_point& from, const Eigen::Vector2d& p_from, port_point& out,
               int& evals) noexcept;
  port_point point_at(const Eigen::Vector2d& v) const noexcept;

  dk_matrices m_;
  dk_options opt_;
  detail::device_consts dev_{};
  double sign_{1.0};
  double supply_v_{0};              // network frame
  bool wide_{false};                // AVX2 + FMA update kernels (see dk_engine.cpp)
  Eigen::Matrix<double, 2, 3> f1_;  // one JFET: F and E at fixed size
  Eigen::Matrix2d e1_;
  Eigen::Matrix<double, 2, 3> f_abs_;
  Eigen::Array2d skip_t_{Eigen::Array2d::Zero()};  // bound on what skipped junction exponentials leave out, per port row
  // Stacked update: [x_n - x_{n-1}; D x_n; y_n] = W [x_{n-1}; u_n; i_n], ns + 3 rows, ns + 5 cols.
  Eigen::MatrixXd w_;  // rows padded to whole packets (zero rows)
  Eigen::VectorXd in_, out_;        // [x; u; i] and the product
  Eigen::VectorXd pre_;             // W's x and u columns times [x; u]
  Eigen::VectorXd w_const_;         // W's supply column times the supply (constant)
  loop_state ls_;
  // Warm start: weights of dv/dp at the last three samples (Adams-Bashforth of order
  // predictor_order; dk_engine.cpp, step_t).
  std::array<double, 3> warm_{};
  Eigen::VectorXd x_dc_;
  port_point dc_point_;
  Eigen::Vector2d p_dc_{Eigen::Vector2d::Zero()};
  double y_dc_{0};
  dk_stats stats_;
  // Scratch for process_tracked.
  Eigen::MatrixXd phi_, tmp_;
  Eigen::Matrix<double, Eigen::Dynamic, 2> cj_;
  Eigen::Matrix<double, 2, Eigen::Dynamic> md_;
  general_path g_;                  // more than one JFET only
};

}  // namespace pinchoff::model
