#pragma once
// The DK engine's solver for a network of one JFET: the port equations v = p + F i(v) are
// two, solved by Newton with closed-form 2x2 solves, in a sample loop compiled once per
// state count (1..8, or any at run time) and kernel set (portable, or AVX2 + FMA as a
// whole). Its hot path and why it is laid out so: dk_single.cpp.
#include <algorithm>
#include <array>
#include <cstddef>
#include <cstdlib>
#include <limits>
#include <memory>
#include <new>

#include <Eigen/Dense>

#include "model/engine/dk_device.hpp"
#include "model/engine/dk_solver.hpp"

namespace pinchoff::model {

namespace detail {

/// n doubles starting on a 64-byte boundary (a cache line), so that no packet load of the
/// sample loop straddles two lines whatever the heap gives (with Eigen's 16-byte
/// alignment, whether W's 32-byte columns split lines changed from one engine to the next).
class aligned_doubles {
 public:
  aligned_doubles() = default;
  explicit aligned_doubles(std::size_t n) : n_(n), p_(allocate(n)) {}
  aligned_doubles(const aligned_doubles& o) : aligned_doubles(o.n_) { std::copy_n(o.p_.get(), n_, p_.get()); }
  aligned_doubles& operator=(const aligned_doubles& o) {
    if (this != &o) *this = aligned_doubles(o);
    return *this;
  }
  aligned_doubles(aligned_doubles&&) noexcept = default;
  aligned_doubles& operator=(aligned_doubles&&) noexcept = default;
  double* data() noexcept { return p_.get(); }
  const double* data() const noexcept { return p_.get(); }
  std::size_t size() const noexcept { return n_; }

 private:
  struct release {
    void operator()(double* p) const noexcept { std::free(p); }
  };
  static double* allocate(std::size_t n) {
    if (n == 0) return nullptr;
    void* p = std::aligned_alloc(64, (n * sizeof(double) + 63) / 64 * 64);
    if (!p) throw std::bad_alloc();
    return static_cast<double*>(p);
  }
  std::size_t n_{0};
  std::unique_ptr<double[], release> p_;
};

}  // namespace detail

class single_solver : public dk_solver_base {
 public:
  single_solver(const network& net, const operating_point& op, dk_matrices m, const dk_options& opt);

  void process(const double* in, double* out, std::size_t n) noexcept;
  void track(Eigen::MatrixXd& sensitivity);
  void reset();
  void set_state(const Eigen::Ref<const Eigen::VectorXd>& x);
  Eigen::Vector2d ports_network_v(int) const noexcept { return ls_.last.v; }
  const char* sample_loop() const noexcept { return wide_ ? "AVX2+FMA" : "portable"; }

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

  // What the sample loop carries from one sample to the next; a block works on a copy in
  // locals (kept in registers, no round trip through the solver's memory a sample).
  struct loop_state {
    port_point last;                                 // the last sample's solution
    Eigen::Vector2d q{Eigen::Vector2d::Zero()};      // D x_{n-1}
    Eigen::Vector2d p_last{Eigen::Vector2d::Zero()};
    // dv/dp at the two samples before the last, for the warm start (dk_single.cpp, step_t).
    Eigen::Matrix2d m_prev{Eigen::Matrix2d::Zero()};
    Eigen::Matrix2d m_prev2{Eigen::Matrix2d::Zero()};
  };

  template <int NS, bool Wide>
  int step_t(loop_state& s, double* xin, double* pre, double* outv, double generator_v, double& y) noexcept;
  template <int NS, bool Wide>
  void block_t(const double* in, double* out, std::size_t n) noexcept;
  template <int NS>
  void block_portable(const double* in, double* out, std::size_t n) noexcept;
  template <int NS>
  void block_wide(const double* in, double* out, std::size_t n) noexcept;
  static void store_point(port_point& out, const Eigen::Array2d& v, double igs, double igd, double id,
                          const detail::port_currents& c, const Eigen::Array2d& mc0, const Eigen::Array2d& mc1) noexcept;
  // The Newton: its state between iterations, one iteration (inlined into the sample loop
  // for the first two), the rest out of line, and the whole from a guess.
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

  detail::device_consts dev_{};
  bool wide_{false};                // AVX2 + FMA update kernels (see dk_single.cpp)
  Eigen::Matrix<double, 2, 3> f1_;  // F and E at fixed size
  Eigen::Matrix2d e1_;
  Eigen::Matrix<double, 2, 3> f_abs_;
  Eigen::Array2d skip_t_{Eigen::Array2d::Zero()};  // bound on what skipped junction exponentials leave out, per port row
  // Stacked update: [x_n - x_{n-1}; D x_n; y_n] = W [x_{n-1}; u_n; i_n], ns + 3 rows, ns + 5
  // cols, every x, u, i and y taken as its offset from the DC point.
  detail::aligned_doubles w_;       // column-major, rows padded to whole packets (zero rows)
  Eigen::VectorXd out_;             // the product
  Eigen::VectorXd pre_;             // W's x and u columns times [x; u]
  detail::aligned_doubles w_const_;  // a constant term of the update: 0 (the inputs are offsets from DC)
  loop_state ls_;
  // Warm start: weights of dv/dp at the last three samples (Adams-Bashforth of order
  // predictor_order; detail::warm_start_weights).
  std::array<double, 3> warm_{};
  port_point dc_point_;
  Eigen::Vector2d p_dc_{Eigen::Vector2d::Zero()};  // D x_dc + E u_dc
  double y_dc_net_{0};                             // the output at the DC point, network frame
  // Scratch for track().
  Eigen::Matrix<double, Eigen::Dynamic, 2> cj_;
  Eigen::Matrix<double, 2, Eigen::Dynamic> md_;
};

}  // namespace pinchoff::model
