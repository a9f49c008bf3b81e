#pragma once
// The DK engine's solver for a network of any number k of JFETs: 2k port voltages, 3k
// currents, the device Jacobian block diagonal, and I - F Jf (2k x 2k) factored each Newton
// iteration, by 2 x 2 blocks where that is safe, else by LU with partial pivoting
// (dk_general.cpp); from three JFETs each Newton step is tried torn first (stage by stage,
// the coupling between the stages inside the acceptance bound). The same acceptance bound,
// junction limiting, sub-stepping and DC start as the one-JFET solver (model/engine/
// dk_acceptance.hpp, dk_steps.hpp). Two JFETs on a processor with AVX2 + FMA take a sample
// loop of their own (process_pair: the four port voltages in one register, dv/dp kept in
// full), which hands what it does not settle in four Newton iterations to the general one;
// three to six JFETs the same layout widened (process_n: dv/dp formed in full from the
// channels and the conducting junctions, or by Gauss-Jordan elimination; the JFETs four to
// a register), whose own Newton hands over only after eight iterations; so torn steps are
// taken where it hands over, in the portable loop and with full_inverse off. It meets the dk_solver interface (dk_solver.hpp) and
// nothing else of the engine depends on its inside, so it can be replaced by any solver
// that meets that interface. Every size is fixed when it is built: a sample allocates
// nothing.
#include <array>
#include <cstddef>
#include <vector>

#include <Eigen/Dense>

#include "model/engine/dk_device.hpp"
#include "model/engine/dk_single.hpp"
#include "model/engine/dk_solver.hpp"

namespace pinchoff::model {

class general_solver : public dk_solver_base {
 public:
  general_solver(const network& net, const operating_point& op, dk_matrices m, const dk_options& opt);

  void process(const double* in, double* out, std::size_t n) noexcept;
  void track(Eigen::MatrixXd& sensitivity);
  void reset();
  void set_state(const Eigen::Ref<const Eigen::VectorXd>& x);
  Eigen::Vector2d ports_network_v(int device) const noexcept {
    return Eigen::Vector2d(g_.last().v.segment<2>(2 * device));
  }
  const char* sample_loop() const noexcept {
    return pair_ ? "AVX2+FMA, two-JFET" : full_ ? "AVX2+FMA, M in full" : wide_ && m_.devices >= 3 && m_.devices <= 6 ? "AVX2+FMA" : "portable";
  }

 private:
  struct port_set {
    Eigen::VectorXd v;   ///< 2k port voltages
    Eigen::VectorXd i;   ///< 3k device currents
    Eigen::MatrixXd jf;  ///< 3k x 2k, di/dv, block diagonal
    Eigen::MatrixXd lu;  ///< 2k x 2k: the LU factors of I - F Jf (dv/dp is its inverse)
    std::vector<int> piv;  ///< the factors' row interchanges (when not blocked)
    bool blocked{false};   ///< lu holds block factors in 2 x 2 blocks, no interchanges (dk_general.cpp)
    bool torn{false};      ///< lu holds I - F Jf with its diagonal blocks inverted (a torn step, dk_general.cpp)
    bool pending{false};   ///< lu holds I - F Jf itself, factors not formed yet (process_pair; ensure_factors)
    bool stale{false};     ///< lu holds nothing yet: I - F Jf formed from jf where it is read (process_n; ensure_factors)
    void resize(int k);
  };
  struct storage {
    std::vector<detail::device_consts> dev;
    std::vector<detail::port_currents> cur;     // per JFET, at the Newton iterate
    Eigen::MatrixXd f_abs;                      // |F|
    // [A - I, B, C; D A, D B, D C; Do, Eo, Fo], column-major, rows padded with zero rows to
    // `rows` (a multiple of 4), on 64-byte boundaries.
    detail::aligned_doubles w;
    detail::aligned_doubles pre, out;           // W's x and u columns times [x; u]; the product
    int rows{0};
    Eigen::VectorXd q, p, p_last, p_dc, dp;     // q: D times the states' offset from DC; p_dc: D x_dc + E u_dc
    double y_dc{0};                             // the output at the DC point, network frame
    Eigen::VectorXd v, r, d, base, step, rem, t, bound, pc, pj, guess;
    Eigen::VectorXd allowed, mag;               // the acceptance's rounding: per row, per current
    Eigen::VectorXd corr_q, corr_r;             // the correction (dk_general.cpp): remainders, their change bounds (3k)
    Eigen::VectorXd corr_e, corr_t;             // its step and the acceptance's rest of t (2k)
    // The accepted points of the last three samples and the one being solved, in a ring:
    // ring[head] the last, head - 1 and head - 2 the two before (the warm start's dv/dp from
    // their factors), head + 1 the trial. A sample moves head on; nothing is copied.
    port_set ring[4];
    int head{0};
    port_set dc, cur_pt, next_pt;
    port_set& last() noexcept { return ring[head]; }
    const port_set& last() const noexcept { return ring[head]; }
    port_set& back(int n) noexcept { return ring[(head - n) & 3]; }
    port_set& trial() noexcept { return ring[(head + 1) & 3]; }
    Eigen::VectorXd mdl;                        // the warm start's products
    // Two JFETs (process_pair): dv/dp = (I - F Jf)^-1 of each ring point in full, 4 x 4
    // column-major, 16 doubles a slot in the ring's order.
    // Three to six JFETs (process_n): the same in columns of P rows (2k rounded up to a
    // multiple of 4, the rows past 2k zero), P x 2k a slot.
    detail::aligned_doubles mring;
    // process_n: F and |F| in columns of P rows; p_dc, E's generator column, skip_t, the last
    // accepted point's v and its p, and q, P each.
    detail::aligned_doubles fpad, fapad, vpad;
    detail::aligned_doubles mw;     // process_n: the warm start's M (combine_warm)
    // process_n: the ring point was accepted after a rescue step (dk_options::rescue_steps):
    // its Jf and M are those of the iterate before, a step away (track() evaluates its own).
    bool ring_rescued[4]{};
    detail::aligned_doubles wq;     // process_n: W's q rows of the current columns, P rows a column
    detail::aligned_doubles lanes;  // process_n: the JFETs' constants in lanes (dk_general.cpp, lane_consts)
    // process_n, channel_m: F's entries from each channel current c to the JFETs' vgs and
    // vds rows in lanes (JFET j in lane j), L registers each: vgs rows of c, then vds rows,
    // c = 0..k-1; then the same of each JFET's own channel (c = j) in one pair of rows.
    detail::aligned_doubles fch;
    Eigen::VectorXd skip_t;                     // bound on what skipped junction exponentials leave out, per port row
    Eigen::VectorXd junction_vcrit, junction_small;  // per port row 2j, 2j + 1: JFET j's vcrit_v, and 0.01 n Vt
    // process_pair: the last sample's two warm starts, by the extrapolation of three Ms and
    // by the mean of the last two.
    double guess_extrapolated[4]{}, guess_mean[4]{};
    Eigen::VectorXd guess_knee;  // JFET j's gs (2j) and gd (2j + 1) junction knees for the guess (solve_general)
    Eigen::MatrixXd cj, md, mi;                 // track(): C Jf (ns x 2k), M D (2k x ns), M
    Eigen::MatrixXd track_lu;                   // track() after a torn point: I - F Jf's factors
    std::vector<int> track_piv;
  };

  void point_general(const Eigen::VectorXd& v, port_set& out) noexcept;
  void ensure_factors(port_set& pt) noexcept;
  // K JFETs at compile time (fixed-size views of the storage), or K = 0: any number.
  template <int K>
  void block_k(const double* in, double* out, std::size_t n) noexcept;
  template <int K>
  void block_wide(const double* in, double* out, std::size_t n) noexcept;
  template <int K>
  double process_k(double generator_v) noexcept;
  // v (2k port voltages) limited where a junction would rise past its knee from `from`.
  void limit_guess(double* v, const double* from) const noexcept;
  // from: the point `guess` was extrapolated from (its junctions limit the guess), or null.
  template <int K>
  bool solve_general(const Eigen::VectorXd& p, const Eigen::VectorXd& guess, const double* from, port_set& out,
                     int& evals) noexcept;
  template <int K>
  void substep_general(const Eigen::VectorXd& p, port_set& out, int& evals) noexcept;
  // Two JFETs with AVX2 + FMA: the sample with the four port voltages in one register and
  // dv/dp kept in full (dk_general.cpp, process_pair); what it does not settle in two
  // Newton iterations goes to solve_general<2>.
  double process_pair(double generator_v) noexcept;
  double start_wide_sample(double generator_v) noexcept;
  void block_pair(const double* in, double* out, std::size_t n) noexcept;
  void pair_m_of(int slot) noexcept;
  void pair_rest(int& evals, bool attempt_failed) noexcept;
  // Three to six JFETs with AVX2 + FMA: the same layout in ceil(2k / 4) registers a column,
  // M = (I - F Jf)^-1 formed in full (dk_general.cpp, process_n).
  template <int K>
  double process_n(double generator_v) noexcept;
  template <int K>
  void block_n(const double* in, double* out, std::size_t n) noexcept;
  template <int K>
  void wide_rest(int& evals, bool attempt_failed) noexcept;
  void ring_m_of(int slot) noexcept;
  __attribute__((noinline)) bool pivoted_m(double* mt, const double* derivatives, int stride) noexcept;
  template <int N>
  void combine_warm(int n_rt) noexcept;

  // Warm start: weights of dv/dp at the last three samples (detail::warm_start_weights).
  std::array<double, 3> warm_{};
  bool wide_{false};  // the state update's AVX2 + FMA kernel (dk_general.cpp)
  bool pair_{false};  // two JFETs: process_pair (dk_general.cpp)
  bool full_{false};  // three to six JFETs: process_n (dk_general.cpp)
  int torn_holdoff_{0};   // samples left to solve from the factors after a torn step fell back (dk_general.cpp)
  int torn_predict_{1};   // sweeps of the warm start's prediction from a torn point (dk_general.cpp)
  storage g_;
};

}  // namespace pinchoff::model
