// The DK engine's general solver (model/engine/dk_general.hpp), used for a network of more
// than one JFET (one JFET takes the closed-form 2x2 solver of dk_single.cpp). The same
// equations and the same acceptance argument with k devices: 2k port voltages v, 3k
// currents i, the device Jacobian Jf block diagonal (one 3x2 block per JFET), and I - F Jf
// (2k x 2k) factored on every Newton iteration: by 2 x 2 blocks, one per JFET, without
// pivoting where that is safe (block_factor_n; a chain's I - F Jf is nearly block lower
// triangular), else by LU with partial pivoting (Golub & Van Loan, Matrix Computations,
// Alg. 3.4.1). From three JFETs a Newton step is first taken torn, stage by stage: block
// Gauss-Seidel sweeps over each JFET's own 2 x 2 block of I - F Jf (no factorisation), the
// coupling they leave in the linear residual added to the acceptance bound, and the bound
// on the distance to the solution from the blocks (torn_abs_bound_n); where the sweeps do
// not contract fast enough or the blocks cannot bound it, the step is factored as above
// (solve_general). The factorisation, the solves and the small
// products are plain loops: at these sizes (4 x 4 for two JFETs) Eigen's dynamic-size
// kernels cost several times the arithmetic. Every vector and matrix is sized when the
// solver is built, so a sample allocates nothing.
#include <algorithm>
#include <cmath>
#include <limits>
#include <utility>
#include <vector>

#include "base/error.hpp"
#include "model/engine/dk_acceptance.hpp"
#include "model/engine/dk_general.hpp"
#include "model/engine/dk_steps.hpp"

// PINCHOFF_DK_PAIR: the two-JFET sample loop (process_pair, AVX2 + FMA), in both trees.
// PINCHOFF_PORTABLE_ONLY (set by the build for the sanitizer tree): of the loops for any
// number of JFETs, the portable ones only.
#if defined(__x86_64__) && (defined(__GNUC__) || defined(__clang__))
#include <immintrin.h>
#define PINCHOFF_DK_PAIR 1
#else
#define PINCHOFF_DK_PAIR 0
#endif
#if PINCHOFF_DK_PAIR && !defined(PINCHOFF_PORTABLE_ONLY)
#define PINCHOFF_DK_GENERAL_WIDE 1
#else
#define PINCHOFF_DK_GENERAL_WIDE 0
#endif

// The sample loops' attribute: everything but the rare paths inlined into them (dk_single.cpp
// says why flattening), except in the sanitizer tree (PINCHOFF_NO_FLATTEN).
#if defined(PINCHOFF_NO_FLATTEN)
#define PINCHOFF_DK_FLATTEN
#else
#define PINCHOFF_DK_FLATTEN flatten,
#endif

namespace pinchoff::model {
namespace {

// The torn step is taken from three to six JFETs (at compile-time sizes 3-6; at run-time
// size in sanitizer builds, below): at two, the block factorisation it replaces is a single
// 2 x 2 Schur complement, and the sweeps, the bound and the warm start's sweeps cost more
// than it (callgrind: 1,987 against 1,912 instructions a sample at 1 V;
// docs/engine-decisions.md).
constexpr int torn_min_devices = 3;
// The most JFETs a chain holds (stage file), so the most ports a torn step's stack arrays
// need at run-time size.
constexpr int torn_max_devices = 6;
constexpr int torn_max_ports = 2 * torn_max_devices;
// Sanitizer builds (PINCHOFF_RUNTIME_SIZES) take the torn step at run-time size too: one
// sample loop for every number of JFETs instead of one per compile-time size, the same
// Newton code (the fixed-size loops run in the Release suite).
#if defined(PINCHOFF_RUNTIME_SIZES)
constexpr bool torn_at_runtime_size = true;
#else
constexpr bool torn_at_runtime_size = false;
#endif
// The most block Gauss-Seidel sweeps of one torn Newton step (solve_general).
constexpr int torn_max_sweeps = 6;
// A sweep that shrinks the change of the step by less than this (the coupling between the
// stages strong: DC-coupled followers, gate conduction) ends the torn step: J is factored.
constexpr double torn_slow_ratio = 0.02;
// After a torn step that ended so, this many samples are solved from the factors straight
// away (the coupling that made it end does not change from one sample to the next).
constexpr int torn_holdoff_samples = 32;
// A step not yet small enough for the acceptance is swept until the coupling is below
// this share of the residual (an inexact Newton step, Dembo, Eisenstat & Steihaug 1982:
// its forcing term), so that the Newton converges as with the exact step.
constexpr double torn_forcing = 1e-6;
// The share of tol_v the coupling may take before the acceptance is tried on a torn step.
constexpr double torn_coupling_share = 0.1;
// Two JFETs: the Newton iterations process_pair makes itself before solve_general<2> takes
// over (at 1 and 10 V on the bench's chain, 2.5 and 4.4 % of the samples needed a third).
constexpr int pair_inline_iterations = 4;
// Three to six JFETs: the same for process_n (callgrind, the bench's chains at 1 and 10 V:
// 8 took 0.7-2 % fewer instructions a sample than 4).
constexpr int wide_inline_iterations = 8;
// Three to six JFETs (process_n): where a Newton step misses the acceptance
// (dk_options::rescue_steps), a rescue step is tried only if the step's residual bound t is
// at most this many times tol_v. On the bench's chains of three stages at 1 and 10 V every
// rescue that held had t below 1e4 tol_v, and half of those that failed had it above.
constexpr double rescue_reach = 1e4;
// process_n: a gate junction whose conductance puts at most this into any entry of F Jf
// (g times |F|'s largest entry in its current's column) is left out of the Newton step's M
// (channel_m); its linear change g d then goes into the acceptance's remainders (and g e
// into a rescue's), so the bound is as strict as with the junction in M. The residual it
// leaves after the step is at most 1e-8 |d| a junction. Measured on the bench's chains: the
// same Newton evaluations with 1e-12, 1e-10, 1e-8 and 1e-6; M from the channels on 54, 56
// and 60 % of the steps at 1 V for the last three, and on a DC-coupled follower's chain at
// 10 V on 91 % with 1e-8 against 20 % with 1e-12 (its follower's gate junction sits
// between the two).
constexpr double slight_junction = 1e-8;
// process_n: M from the channels (channel_m) is updated for up to k / 2 significant
// junctions, one rank-one update each (junction_update); more, and I - F Jf is eliminated.
// An update costs about what one pivot block of that elimination does (k of them). Measured
// (A/B, the bench's chains at 1 and 10 V): one update at most was best at three JFETs, two
// to four alike at four and five, two or four better than one at six.
constexpr int max_junction_updates(int k) noexcept { return k / 2; }
// The most JFETs process_n takes (a stage file's most). At six it was as dear as the torn
// loop while every step eliminated I - F Jf (O(k^3), three packets a column); with M from
// the channels (channel_m) it takes 0.64-0.89 of the torn loop's time at 0.01-10 V
// (docs/engine-decisions.md).
constexpr int full_max_devices = 6;

// The rows of the JFETs' constants in lanes, four JFETs a row (process_n, below).
struct lane_consts {
  enum : int { beta, vto, lambda, is, leak, inv_nvt, skip_arg, vcrit, small, k_junction, slight_gs, slight_gd, knee_gs,
                knee_gd, count };
};

// A column of N doubles (N even, fixed) as packets of four and a tail of two, in GCC's
// generic vectors: in the AVX2 + FMA loop they are ymm registers and the products fuse
// (-ffp-contract=fast, GNU C++), in the portable loop pairs of SSE2 registers. The loads and
// stores are unaligned (a chain's matrices have N rows, not always a multiple of four).
// The small matrix loops below are written with them where the compiler's own vectorising
// of the scalar loops, inside the flattened sample loop, came and went with the code around
// it (callgrind: the same loop 2-5x its instructions after an unrelated change).
// (Packets passed by value between always-inline helpers: GCC's note that a 32-byte vector
// argument's ABI differs without AVX concerns calls that are never made out of line.)
#pragma GCC diagnostic ignored "-Wpsabi"
using vd4 = double __attribute__((vector_size(32)));
using vd2 = double __attribute__((vector_size(16)));
using vl4 = long long __attribute__((vector_size(32)));
using vl2 = long long __attribute__((vector_size(16)));
[[maybe_unused]] __attribute__((always_inline)) inline vd4 vabs(const vd4& x) noexcept {
  return reinterpret_cast<vd4>(reinterpret_cast<vl4>(x) & 0x7fffffffffffffffLL);
}
[[maybe_unused]] __attribute__((always_inline)) inline vd2 vabs(const vd2& x) noexcept {
  return reinterpret_cast<vd2>(reinterpret_cast<vl2>(x) & 0x7fffffffffffffffLL);
}
// Lane by lane max(x, y) and min(x, y) (y where x is NaN, as std::max(y, x) would give).
template <class V>
__attribute__((always_inline)) inline V vmax(const V& x, const V& y) noexcept {
  return x > y ? x : y;
}
template <class V>
__attribute__((always_inline)) inline V vmin(const V& x, const V& y) noexcept {
  return x < y ? x : y;
}
template <int N>
struct vcol {
  static_assert(N > 0 && N % 2 == 0, "vcol: N even and fixed");
  static constexpr int Q = N / 4, H = N % 4 / 2;
  vd4 q[Q > 0 ? Q : 1];
  vd2 h;
  __attribute__((always_inline)) static vcol zero() noexcept {
    vcol c;
    for (int i = 0; i < (Q > 0 ? Q : 1); ++i) c.q[i] = vd4{0.0, 0.0, 0.0, 0.0};
    c.h = vd2{0.0, 0.0};
    return c;
  }
  __attribute__((always_inline)) static vcol fill(double x) noexcept {
    vcol c;
    for (int i = 0; i < (Q > 0 ? Q : 1); ++i) c.q[i] = vd4{x, x, x, x};
    c.h = vd2{x, x};
    return c;
  }
  __attribute__((always_inline)) static vcol load(const double* p) noexcept {
    vcol c = zero();
#pragma GCC unroll 4
    for (int i = 0; i < Q; ++i) __builtin_memcpy(&c.q[i], p + 4 * i, sizeof(vd4));
    if constexpr (H > 0) __builtin_memcpy(&c.h, p + 4 * Q, sizeof(vd2));
    return c;
  }
  __attribute__((always_inline)) void store(double* p) const noexcept {
#pragma GCC unroll 4
    for (int i = 0; i < Q; ++i) __builtin_memcpy(p + 4 * i, &q[i], sizeof(vd4));
    if constexpr (H > 0) __builtin_memcpy(p + 4 * Q, &h, sizeof(vd2));
  }
  // this += s * the column at p
  __attribute__((always_inline)) void add(const double* p, double s) noexcept {
#pragma GCC unroll 4
    for (int i = 0; i < Q; ++i) {
      vd4 x;
      __builtin_memcpy(&x, p + 4 * i, sizeof(vd4));
      q[i] += x * s;
    }
    if constexpr (H > 0) {
      vd2 x;
      __builtin_memcpy(&x, p + 4 * Q, sizeof(vd2));
      h += x * s;
    }
  }
  // Each JFET's junction voltages (gs, gd) from its port voltages (gs, ds) in rows 2j, 2j + 1.
  __attribute__((always_inline)) vcol junctions() const noexcept {
    vcol c = zero();
    const vl4 odd4{0, -1, 0, -1};
#pragma GCC unroll 4
    for (int i = 0; i < Q; ++i)
      c.q[i] = __builtin_shufflevector(q[i], q[i], 0, 0, 2, 2) - reinterpret_cast<vd4>(reinterpret_cast<vl4>(q[i]) & odd4);
    if constexpr (H > 0) c.h = __builtin_shufflevector(h, h, 0, 0) - reinterpret_cast<vd2>(reinterpret_cast<vl2>(h) & vl2{0, -1});
    return c;
  }
  // Whether any row is above (or, all_at_most, every row at most, in magnitude) the column at p.
  __attribute__((always_inline)) bool any_above(const double* p) const noexcept {
    const vcol lim = load(p);
    vl4 m4{0, 0, 0, 0};
#pragma GCC unroll 4
    for (int i = 0; i < Q; ++i) m4 |= q[i] > lim.q[i];
    vl2 m2{m4[0] | m4[2], m4[1] | m4[3]};
    if constexpr (H > 0) m2 |= h > lim.h;
    return (m2[0] | m2[1]) != 0;
  }
  __attribute__((always_inline)) bool all_at_most(const double* p) const noexcept {
    constexpr long long magnitude = 0x7fffffffffffffffLL;
    const vcol lim = load(p);
    vl4 m4{-1, -1, -1, -1};
#pragma GCC unroll 4
    for (int i = 0; i < Q; ++i) m4 &= reinterpret_cast<vd4>(reinterpret_cast<vl4>(q[i]) & magnitude) <= lim.q[i];
    vl2 m2{m4[0] & m4[2], m4[1] & m4[3]};
    if constexpr (H > 0) m2 &= reinterpret_cast<vd2>(reinterpret_cast<vl2>(h) & magnitude) <= lim.h;
    return (m2[0] & m2[1]) != 0;
  }
  __attribute__((always_inline)) double get(int r) const noexcept { return r < 4 * Q ? q[r / 4][r % 4] : h[r - 4 * Q]; }
  __attribute__((always_inline)) void set(int r, double x) noexcept {
    if (r < 4 * Q)
      q[r / 4][r % 4] = x;
    else
      h[r - 4 * Q] = x;
  }
  // fn(this, o) lane by lane (fn takes either packet type).
  template <class Fn>
  __attribute__((always_inline)) vcol zip(const vcol& o, Fn fn) const noexcept {
    vcol c = zero();
#pragma GCC unroll 4
    for (int i = 0; i < Q; ++i) c.q[i] = fn(q[i], o.q[i]);
    if constexpr (H > 0) c.h = fn(h, o.h);
    return c;
  }
  // The largest magnitude; NaN where any row is NaN.
  __attribute__((always_inline)) double abs_max() const noexcept {
    double most = 0.0;
    bool nan = false;
    for (int i = 0; i < Q; ++i)
      for (int l = 0; l < 4; ++l) {
        most = std::max(most, std::fabs(q[i][l]));
        nan = nan || q[i][l] != q[i][l];
      }
    if constexpr (H > 0)
      for (int l = 0; l < 2; ++l) {
        most = std::max(most, std::fabs(h[l]));
        nan = nan || h[l] != h[l];
      }
    return nan ? std::numeric_limits<double>::quiet_NaN() : most;
  }
  // this += the column at p
  __attribute__((always_inline)) vcol plus(const double* p) const noexcept {
    vcol c = load(p);
#pragma GCC unroll 4
    for (int i = 0; i < Q; ++i) c.q[i] += q[i];
    if constexpr (H > 0) c.h += h;
    return c;
  }
  // this += s * |the column at p|, on the rows lo <= r < hi only (lo, hi known at compile
  // time once unrolled: the masks fold to constants).
  __attribute__((always_inline)) void add_abs(const double* p, double s, int lo, int hi) noexcept {
    constexpr long long magnitude = 0x7fffffffffffffffLL;
#pragma GCC unroll 4
    for (int i = 0; i < Q; ++i) {
      vd4 x;
      __builtin_memcpy(&x, p + 4 * i, sizeof(vd4));
      const vl4 r = vl4{0, 1, 2, 3} + 4 * i;
      const vl4 keep = (r >= lo) & (r < hi) & magnitude;
      q[i] += reinterpret_cast<vd4>(reinterpret_cast<vl4>(x) & keep) * s;
    }
    if constexpr (H > 0) {
      vd2 x;
      __builtin_memcpy(&x, p + 4 * Q, sizeof(vd2));
      const vl2 r = vl2{0, 1} + 4 * Q;
      const vl2 keep = (r >= lo) & (r < hi) & magnitude;
      h += reinterpret_cast<vd2>(reinterpret_cast<vl2>(x) & keep) * s;
    }
  }
};

// out = a + s b over n entries, in packets of four (out may be a).
__attribute__((always_inline)) inline void vec_add_scaled(double* out, const double* a, const double* b, int n,
                                                          double s) noexcept {
  int r = 0;
  for (; r + 4 <= n; r += 4) {
    vd4 x, y;
    __builtin_memcpy(&x, a + r, sizeof(vd4));
    __builtin_memcpy(&y, b + r, sizeof(vd4));
    x += y * s;
    __builtin_memcpy(out + r, &x, sizeof(vd4));
  }
  for (; r < n; ++r) out[r] = a[r] + b[r] * s;
}

// Compile-time sizes for K JFETs (K = 0: dynamic).
constexpr int ports_of(int k) noexcept { return k > 0 ? 2 * k : Eigen::Dynamic; }
constexpr int currents_of(int k) noexcept { return k > 0 ? 3 * k : Eigen::Dynamic; }
// The LU's compile-time size (0: at run time).
constexpr int lu_size_of(int k) noexcept { return k > 0 ? 2 * k : 0; }

// JFET j's 3x2 block of the block-diagonal Jf: rows igs, igd, id; columns vgs, vds.
void put_block_of(Eigen::MatrixXd& jf, int j, double ggs, double ggd, double gm, double gds) noexcept {
  const Eigen::Index r = 3 * j, k = 2 * j;
  jf(r, k) = ggs;
  jf(r, k + 1) = 0.0;
  jf(r + 1, k) = ggd;
  jf(r + 1, k + 1) = -ggd;
  jf(r + 2, k) = gm;
  jf(r + 2, k + 1) = gds;
}
void put_block(Eigen::MatrixXd& jf, int j, const detail::port_currents& c) noexcept {
  put_block_of(jf, j, c.ggs_s, c.ggd_s, c.gm_s, c.gds_s);
}


// I - F Jf from the per-JFET derivatives, column pair by column pair (Jf is block diagonal,
// so each column of F Jf combines three columns of F).
void one_minus_f_jf(const Eigen::MatrixXd& f, const std::vector<detail::port_currents>& cur, Eigen::MatrixXd& j) noexcept {
  for (int d = 0; d < static_cast<int>(cur.size()); ++d) {
    const detail::port_currents& c = cur[static_cast<std::size_t>(d)];
    j.col(2 * d) = -(f.col(3 * d) * c.ggs_s + f.col(3 * d + 1) * c.ggd_s + f.col(3 * d + 2) * c.gm_s);
    j.col(2 * d + 1) = -(f.col(3 * d + 1) * (-c.ggd_s) + f.col(3 * d + 2) * c.gds_s);
  }
  j.diagonal().array() += 1.0;
}

// I - F Jf from a point's stored Jf (3k x 2k, block diagonal), coefficient by coefficient
// (no product temporaries): where the point's factors must be formed again.
void one_minus_f_jf(const Eigen::MatrixXd& f, const Eigen::MatrixXd& jf, Eigen::MatrixXd& j) noexcept {
  for (int c = 0; c < j.cols(); ++c)
    for (int r = 0; r < j.rows(); ++r) {
      double s = r == c ? 1.0 : 0.0;
      for (int q = 0; q < f.cols(); ++q) s -= f(r, q) * jf(q, c);
      j(r, c) = s;
    }
}

// LU with partial pivoting of the n x n column-major matrix `a` in place, the row
// interchanges applied to whole rows as they happen (LAPACK's getrf order); piv[k] is the
// row swapped with row k at step k. U's diagonal is stored as its reciprocals (the solve
// then multiplies: a division is several times slower and sits on its dependency chain).
// Returns |det|, 0 when a pivot is zero or not finite.
// N > 0: the size at compile time (the loops unroll; at these sizes loop overhead costs
// more than the arithmetic); N = 0: n at run time.
template <int N>
__attribute__((always_inline)) inline double lu_factor_n(double* a, int n_rt, int* piv) noexcept {
  const int n = N > 0 ? N : n_rt;
  double det = 1.0;
  for (int k = 0; k < n; ++k) {
    int p = k;
    double best = std::fabs(a[k + k * n]);
    for (int r = k + 1; r < n; ++r) {
      const double v = std::fabs(a[r + k * n]);
      if (v > best) {
        best = v;
        p = r;
      }
    }
    piv[k] = p;
    if (!(best > 0.0) || !std::isfinite(best)) return 0.0;
    if (p != k)
      for (int c = 0; c < n; ++c) std::swap(a[k + c * n], a[p + c * n]);
    det *= best;
    const double inv = 1.0 / a[k + k * n];
    if constexpr (N > 0) {
      // Whole columns at the fixed size, the rows not to change multiplied by an exact 0
      // (so they do not): a fixed trip count runs in whole packets, a triangular one did not.
      double l[N > 0 ? N : 1];
      for (int r = 0; r < N; ++r) l[r] = r > k ? a[r + k * N] * inv : 0.0;
      for (int r = 0; r < N; ++r) a[r + k * N] = r > k ? l[r] : a[r + k * N];
      a[k + k * N] = inv;
      for (int c = k + 1; c < N; ++c) {
        const double akc = a[k + c * N];
        for (int r = 0; r < N; ++r) a[r + c * N] -= l[r] * akc;
      }
    } else {
      a[k + k * n] = inv;
      for (int r = k + 1; r < n; ++r) a[r + k * n] *= inv;
      for (int c = k + 1; c < n; ++c) {
        const double akc = a[k + c * n];
        for (int r = k + 1; r < n; ++r) a[r + c * n] -= a[r + k * n] * akc;
      }
    }
  }
  return det;
}

// Solves (the matrix factored by lu_factor) x = b in place.
template <int N>
__attribute__((always_inline)) inline void lu_solve_n(const double* a, int n_rt, const int* piv, double* b) noexcept {
  const int n = N > 0 ? N : n_rt;
  for (int k = 0; k < n; ++k)
    if (piv[k] != k) std::swap(b[k], b[piv[k]]);
  if constexpr (N > 0) {
    // Unrolled at the fixed size (the triangular loops' bounds then known).
#pragma GCC unroll 16
    for (int c = 0; c < N; ++c) {
      const double bc = b[c];
#pragma GCC unroll 16
      for (int r = c + 1; r < N; ++r) b[r] -= a[r + c * N] * bc;
    }
#pragma GCC unroll 16
    for (int c = N - 1; c >= 0; --c) {
      b[c] *= a[c + c * N];
      const double bc = b[c];
#pragma GCC unroll 16
      for (int r = 0; r < c; ++r) b[r] -= a[r + c * N] * bc;
    }
  } else {
    for (int c = 0; c < n; ++c) {
      const double bc = b[c];
      for (int r = c + 1; r < n; ++r) b[r] -= a[r + c * n] * bc;
    }
    for (int c = n - 1; c >= 0; --c) {
      b[c] *= a[c + c * n];
      const double bc = b[c];
      for (int r = 0; r < c; ++r) b[r] -= a[r + c * n] * bc;
    }
  }
}

// A bound on |A^-1| t (t >= 0, in place) from A's factors (lu_factor): with P A = L U,
// A^-1 = U^-1 L^-1 P, so |A^-1| t <= |U^-1| |L^-1| P t, and for a triangular T,
// |T^-1| <= M(T)^-1, M(T) the comparison matrix (|t_ii| on the diagonal, -|t_ij| off it;
// Higham, Accuracy and Stability of Numerical Algorithms, 2nd ed., Thm 8.12, from memory).
// So two triangular solves with the factors' magnitudes give the bound, without forming
// A^-1: every term is non-negative, so nothing cancels.
template <int N>
__attribute__((always_inline)) inline void abs_bound_n(const double* a, int n_rt, const int* piv, double* b) noexcept {
  const int n = N > 0 ? N : n_rt;
  for (int k = 0; k < n; ++k)
    if (piv[k] != k) std::swap(b[k], b[piv[k]]);
#pragma GCC unroll 16
  for (int c = 0; c < n; ++c) {
    const double bc = b[c];
#pragma GCC unroll 16
    for (int r = c + 1; r < n; ++r) b[r] += std::fabs(a[r + c * n]) * bc;
  }
#pragma GCC unroll 16
  for (int c = n - 1; c >= 0; --c) {
    b[c] *= std::fabs(a[c + c * n]);
    const double bc = b[c];
#pragma GCC unroll 16
    for (int r = 0; r < c; ++r) b[r] += std::fabs(a[r + c * n]) * bc;
  }
}

// The inverse of the block [a00, a01; a10, a11] in closed form (one division, as on the
// one-JFET path), column-major into `i`; false where it is not safely invertible alone:
// |det| not above 1e-3 of |a00 a11| + |a01 a10| or not finite.
__attribute__((always_inline)) inline bool invert_2x2(double a00, double a10, double a01, double a11,
                                                     double* i) noexcept {
  const double p0 = a00 * a11, p1 = a01 * a10;
  const double det = p0 - p1;
  if (!(std::fabs(det) > 1e-3 * (std::fabs(p0) + std::fabs(p1))) || !std::isfinite(det)) return false;
  const double inv = 1.0 / det;
  i[0] = a11 * inv;
  i[1] = -a10 * inv;
  i[2] = -a01 * inv;
  i[3] = a00 * inv;
  return true;
}
// The 2 x 2 block at d (column stride n) replaced by its inverse (invert_2x2); false, the
// block left as it was, where it is not safely invertible.
__attribute__((always_inline)) inline bool invert_block(double* d, int n) noexcept {
  double i[4];
  if (!invert_2x2(d[0], d[1], d[n], d[n + 1], i)) return false;
  d[0] = i[0];
  d[1] = i[1];
  d[n] = i[2];
  d[n + 1] = i[3];
  return true;
}

// Block LU without pivoting, in 2 x 2 blocks (one per JFET), of the n x n column-major
// matrix `a` in place: A = L U with L unit block lower triangular and U block upper
// triangular (Golub & Van Loan, Matrix Computations, 4th ed., 3.2.11, block LU, from memory).
// Each diagonal block of U is stored as its inverse (closed form: one division, as on the
// one-JFET path), the blocks of L below it, the blocks of U above. A chain's I - F Jf is
// nearly block lower triangular with each JFET's own 2 x 2 block on the diagonal, which the
// one-JFET path inverts without pivoting: no pivot search, no row interchanges, k divisions
// instead of 2k. Returns false (the matrix left unusable: factor it by lu_factor_n) where a
// diagonal block, after the elimination, is not safely invertible: |det| not above 1e-3 of
// |a00 a11| + |a01 a10| (its condition then too large to divide by without a pivot), or a
// multiplier grew above 1e4 (the rounding of the factors then no longer small against A).
template <int N>
__attribute__((always_inline)) inline bool block_factor_n(double* a, int n_rt) noexcept {
  const int n = N > 0 ? N : n_rt;
  constexpr int NL = N > 0 ? N : 1;
  for (int b = 0; b < n; b += 2) {
    double* d = a + b + b * n;
    if (!invert_block(d, n)) return false;
    const double i00 = d[0], i01 = d[n], i10 = d[1], i11 = d[n + 1];
    if (b + 2 >= n) break;
    // L's blocks below: A_ib D^-1; rows not below the block multiplied by an exact 0 in the
    // update (whole columns at the fixed size, as in lu_factor_n).
    if constexpr (N > 0) {
      double l0[NL], l1[NL];
      double growth = 0.0;
#pragma GCC unroll 16
      for (int r = 0; r < N; ++r) {
        const double x0 = a[r + b * N], x1 = a[r + (b + 1) * N];
        const double m0 = x0 * i00 + x1 * i10, m1 = x0 * i01 + x1 * i11;
        l0[r] = r > b + 1 ? m0 : 0.0;
        l1[r] = r > b + 1 ? m1 : 0.0;
        growth = std::max(growth, std::max(std::fabs(l0[r]), std::fabs(l1[r])));
      }
      if (!(growth <= 1e4)) return false;
#pragma GCC unroll 16
      for (int r = 0; r < N; ++r) {
        a[r + b * N] = r > b + 1 ? l0[r] : a[r + b * N];
        a[r + (b + 1) * N] = r > b + 1 ? l1[r] : a[r + (b + 1) * N];
      }
      for (int c = b + 2; c < N; ++c) {
        const double u0 = a[b + c * N], u1 = a[b + 1 + c * N];
#pragma GCC unroll 16
        for (int r = 0; r < N; ++r) a[r + c * N] -= l0[r] * u0 + l1[r] * u1;
      }
    } else {
      double growth = 0.0;
      for (int r = b + 2; r < n; ++r) {
        const double x0 = a[r + b * n], x1 = a[r + (b + 1) * n];
        a[r + b * n] = x0 * i00 + x1 * i10;
        a[r + (b + 1) * n] = x0 * i01 + x1 * i11;
        growth = std::max(growth, std::max(std::fabs(a[r + b * n]), std::fabs(a[r + (b + 1) * n])));
      }
      if (!(growth <= 1e4)) return false;
      for (int c = b + 2; c < n; ++c) {
        const double u0 = a[b + c * n], u1 = a[b + 1 + c * n];
        for (int r = b + 2; r < n; ++r) a[r + c * n] -= a[r + b * n] * u0 + a[r + (b + 1) * n] * u1;
      }
    }
  }
  return true;
}

// M = (I - F Jf)^-1 in full from the block factors of two JFETs (block_factor_n<4>): with
// A = D1^-1, L = L21, U = U12, T = S^-1, M = [A + X L, -X; -T L, T], X = A U T.
__attribute__((always_inline)) inline void pair_inverse(const double* jd, double* mt) noexcept {
  const double a00 = jd[0], a10 = jd[1], a01 = jd[4], a11 = jd[5];
  const double l00 = jd[2], l10 = jd[3], l01 = jd[6], l11 = jd[7];
  const double u00 = jd[8], u10 = jd[9], u01 = jd[12], u11 = jd[13];
  const double t00 = jd[10], t10 = jd[11], t01 = jd[14], t11 = jd[15];
  const double au00 = a00 * u00 + a01 * u10, au01 = a00 * u01 + a01 * u11;
  const double au10 = a10 * u00 + a11 * u10, au11 = a10 * u01 + a11 * u11;
  const double x00 = au00 * t00 + au01 * t10, x01 = au00 * t01 + au01 * t11;
  const double x10 = au10 * t00 + au11 * t10, x11 = au10 * t01 + au11 * t11;
  mt[0] = a00 + (x00 * l00 + x01 * l10);
  mt[1] = a10 + (x10 * l00 + x11 * l10);
  mt[2] = -(t00 * l00 + t01 * l10);
  mt[3] = -(t10 * l00 + t11 * l10);
  mt[4] = a01 + (x00 * l01 + x01 * l11);
  mt[5] = a11 + (x10 * l01 + x11 * l11);
  mt[6] = -(t00 * l01 + t01 * l11);
  mt[7] = -(t10 * l01 + t11 * l11);
  mt[8] = -x00;
  mt[9] = -x10;
  mt[10] = t00;
  mt[11] = t10;
  mt[12] = -x01;
  mt[13] = -x11;
  mt[14] = t01;
  mt[15] = t11;
}

// Solves (the matrix factored by block_factor_n) x = b in place: forward with L's blocks,
// then back with U's, each diagonal block's inverse applied in closed form.
template <int N>
__attribute__((always_inline)) inline void block_solve_n(const double* a, int n_rt, double* x) noexcept {
  const int n = N > 0 ? N : n_rt;
#pragma GCC unroll 8
  for (int b = 0; b + 2 < n; b += 2) {
    const double x0 = x[b], x1 = x[b + 1];
#pragma GCC unroll 16
    for (int r = b + 2; r < n; ++r) x[r] -= a[r + b * n] * x0 + a[r + (b + 1) * n] * x1;
  }
#pragma GCC unroll 8
  for (int b = n - 2; b >= 0; b -= 2) {
    const double* d = a + b + b * n;
    const double y0 = d[0] * x[b] + d[n] * x[b + 1], y1 = d[1] * x[b] + d[n + 1] * x[b + 1];
    x[b] = y0;
    x[b + 1] = y1;
#pragma GCC unroll 16
    for (int r = 0; r < b; ++r) x[r] -= a[r + b * n] * y0 + a[r + (b + 1) * n] * y1;
  }
}

// A bound on |A^-1| t (t >= 0, in place) from the block factors (block_factor_n): with
// A = L U, L = I + N_L (N_L strictly block lower) and U = D (I + D^-1 N_U) (N_U strictly
// block upper), both N_L and D^-1 N_U are nilpotent, so their Neumann series end and
// |L^-1| <= (I - |N_L|)^-1, |U^-1| <= (I - |D^-1| |N_U|)^-1 |D^-1|. So the forward and back
// solves of block_solve_n with every entry's magnitude, D^-1's blocks taken exactly, bound
// it: every term is non-negative, nothing cancels (the comparison-matrix argument of
// abs_bound_n, by blocks).
template <int N>
__attribute__((always_inline)) inline void block_abs_bound_n(const double* a, int n_rt, double* x) noexcept {
  const int n = N > 0 ? N : n_rt;
#pragma GCC unroll 8
  for (int b = 0; b + 2 < n; b += 2) {
    const double x0 = x[b], x1 = x[b + 1];
#pragma GCC unroll 16
    for (int r = b + 2; r < n; ++r) x[r] += std::fabs(a[r + b * n]) * x0 + std::fabs(a[r + (b + 1) * n]) * x1;
  }
#pragma GCC unroll 8
  for (int b = n - 2; b >= 0; b -= 2) {
    const double* d = a + b + b * n;
    const double y0 = std::fabs(d[0]) * x[b] + std::fabs(d[n]) * x[b + 1];
    const double y1 = std::fabs(d[1]) * x[b] + std::fabs(d[n + 1]) * x[b + 1];
    x[b] = y0;
    x[b + 1] = y1;
#pragma GCC unroll 16
    for (int r = 0; r < b; ++r) x[r] += std::fabs(a[r + b * n]) * y0 + std::fabs(a[r + (b + 1) * n]) * y1;
  }
}

// The per-stage (torn) step. J = I - F Jf of a chain is nearly block lower triangular, one
// 2 x 2 block per JFET: a later stage acts on an earlier one only through the rail, gate
// conduction and Cgd. torn_prepare_n replaces each diagonal block of J (column-major, n x n,
// N at compile time, or n_rt when N = 0) by its inverse in closed form, as block_factor_n
// does, and leaves the rest of J as it is; false where a block is not safely invertible
// alone (the same test as block_factor_n's). Nothing is eliminated: no Schur complements.
template <int N>
__attribute__((always_inline)) inline bool torn_prepare_n(double* a, int n_rt) noexcept {
  const int n = N > 0 ? N : n_rt;
#pragma GCC unroll 8
  for (int b = 0; b < n; b += 2)
    if (!invert_block(a + b + b * n, n)) return false;
  return true;
}

// One block Gauss-Seidel sweep on J x = r with J prepared by torn_prepare_n, on the running
// residual t = r - J x (in and out; t = r where the sweeps start from x = 0): block by block
// in signal order, delta_b = D_b^-1 t_b, x_b += delta_b, and t less J's column pair b times
// delta_b, every row but b's own (the rows of the blocks already swept are not read again
// this sweep).
// That is x_b = D_b^-1 (r_b - sum over the other blocks c of J_bc x_c), the blocks before b
// already swept (lower part) and those after b from the sweep before (upper part), with J's
// columns read whole (contiguous, in packets at the fixed size) instead of its rows. With
// x^m - x^(m-1) = delta, J x^m = r - U delta (U: J's strictly block upper part), so the
// sweep leaves the linear residual -U delta (t, up to rounding): the coupling that
// torn_coupling_n bounds.
template <int N>
__attribute__((always_inline)) inline void torn_sweep_n(const double* a, int n_rt, double* t, double* x,
                                                        double* delta) noexcept {
  const int n = N > 0 ? N : n_rt;
  if constexpr (N > 0) {
    // t, x and delta held in registers through the sweep and stored whole at its end (a
    // packet stored and reloaded around each block's scalar writes, or loaded whole after
    // them, stalls on store forwarding).
    vcol<N> tc = vcol<N>::load(t), xc = vcol<N>::load(x), dc = vcol<N>::zero();
#pragma GCC unroll 8
    for (int b = 0; b < N; b += 2) {
      const double* d = a + b + b * N;
      const double t0 = tc.get(b), t1 = tc.get(b + 1);
      const double e0 = d[0] * t0 + d[N] * t1, e1 = d[1] * t0 + d[N + 1] * t1;
      dc.set(b, e0);
      dc.set(b + 1, e1);
      xc.set(b, xc.get(b) + e0);
      xc.set(b + 1, xc.get(b + 1) + e1);
      tc.add(a + b * N, -e0);
      tc.add(a + (b + 1) * N, -e1);
      // The block's own rows hold D_b^-1 in place of J_bb: its residual, J_bb delta_b less
      // t_b, is 0.
      tc.set(b, 0.0);
      tc.set(b + 1, 0.0);
    }
    tc.store(t);
    xc.store(x);
    dc.store(delta);
    return;
  }
  for (int b = 0; b < n; b += 2) {
    const double* d = a + b + b * n;
    const double e0 = d[0] * t[b] + d[n] * t[b + 1], e1 = d[1] * t[b] + d[n + 1] * t[b + 1];
    delta[b] = e0;
    delta[b + 1] = e1;
    x[b] += e0;
    x[b + 1] += e1;
    const double* c0 = a + b * n;
    const double* c1 = c0 + n;
    for (int q = 0; q < n; ++q) t[q] -= c0[q] * e0 + c1[q] * e1;
    t[b] = 0.0;
    t[b + 1] = 0.0;
  }
}

// A bound on the linear residual a sweep leaves, |U delta| (torn_sweep_n), per row:
// |U| |delta| with a rounding margin; the last block row has no upper part. Returns its
// largest entry.
template <int N>
__attribute__((always_inline)) inline double torn_coupling_n(const double* a, int n_rt, const double* delta,
                                                             double* e) noexcept {
  const int n = N > 0 ? N : n_rt;
  double most = 0.0;
  if constexpr (N > 0) {
    // Column by column: column c adds to the rows of the blocks before its own.
    vcol<N> acc = vcol<N>::zero();
#pragma GCC unroll 16
    for (int c = 2; c < N; ++c) acc.add_abs(a + c * N, std::fabs(delta[c]), 0, c / 2 * 2);
    acc.store(e);
    for (int r = 0; r < N; ++r) {
      e[r] *= 1.0 + detail::acceptance_round_k;
      most = std::max(most, e[r]);
    }
    return most;
  }
#pragma GCC unroll 8
  for (int b = 0; b < n; b += 2) {
    double s0 = 0.0, s1 = 0.0;
#pragma GCC unroll 8
    for (int c = b + 2; c < n; c += 2) {
      const double q0 = std::fabs(delta[c]), q1 = std::fabs(delta[c + 1]);
      s0 += std::fabs(a[b + c * n]) * q0 + std::fabs(a[b + (c + 1) * n]) * q1;
      s1 += std::fabs(a[b + 1 + c * n]) * q0 + std::fabs(a[b + 1 + (c + 1) * n]) * q1;
    }
    e[b] = s0 * (1.0 + detail::acceptance_round_k);
    e[b + 1] = s1 * (1.0 + detail::acceptance_round_k);
    most = std::max(most, std::max(e[b], e[b + 1]));
  }
  return most;
}

// A bound on |J^-1| t (t >= 0, in place) from J prepared by torn_prepare_n, without
// factoring J. With J = L + U (L block lower with the diagonal blocks D, U strictly block
// upper), J^-1 = sum_m (-L^-1 U)^m L^-1, so |J^-1| <= sum_m G^m |L^-1| with G = |L^-1| |U|,
// and |L^-1| <= C = (I - |D^-1| |N_L|)^-1 |D^-1| (N_L = L - D is nilpotent: the
// comparison-matrix argument of block_abs_bound_n). One forward pass gives s = C t and
// w = C |U| 1; rho = max w bounds G's infinity norm, so G^m s <= rho^m max(s) 1 and
// |J^-1| t <= s + max(s) rho / (1 - rho). Returns rho (t then holds the bound where
// rho < 1, else is unusable). At run-time size (N = 0), n_rt <= torn_max_ports.
template <int N>
__attribute__((always_inline)) inline double torn_abs_bound_n(const double* a, int n_rt, double* t) noexcept {
  const int n = N > 0 ? N : n_rt;
  double w[N > 0 ? N : torn_max_ports];
  if constexpr (N > 0) {
    // Column by column (the same sums in another order; every term non-negative): u = |U| 1
    // first, then block by block t_b and w_b from |D_b^-1|, and block b's columns of |L|
    // times them onto the rows below.
    vcol<N> y = vcol<N>::load(t), u = vcol<N>::zero();
#pragma GCC unroll 16
    for (int c = 2; c < N; ++c) u.add_abs(a + c * N, 1.0, 0, c / 2 * 2);
    // Each block's two rows read back from a store of the packets (lane extracts instead
    // measured no faster).
    double ys[N], us[N];
    y.store(ys);
    u.store(us);
#pragma GCC unroll 8
    for (int b = 0; b < N; b += 2) {
      const double* d = a + b + b * N;
      const double d00 = std::fabs(d[0]), d01 = std::fabs(d[N]), d10 = std::fabs(d[1]), d11 = std::fabs(d[N + 1]);
      t[b] = d00 * ys[b] + d01 * ys[b + 1];
      t[b + 1] = d10 * ys[b] + d11 * ys[b + 1];
      w[b] = d00 * us[b] + d01 * us[b + 1];
      w[b + 1] = d10 * us[b] + d11 * us[b + 1];
      if (b + 2 >= N) break;
      y.add_abs(a + b * N, t[b], b + 2, N);
      y.add_abs(a + (b + 1) * N, t[b + 1], b + 2, N);
      u.add_abs(a + b * N, w[b], b + 2, N);
      u.add_abs(a + (b + 1) * N, w[b + 1], b + 2, N);
      y.store(ys);
      u.store(us);
    }
  } else {
#pragma GCC unroll 8
    for (int b = 0; b < n; b += 2) {
      double u0 = 0.0, u1 = 0.0;
#pragma GCC unroll 8
      for (int c = b + 2; c < n; c += 2) {
        u0 += std::fabs(a[b + c * n]) + std::fabs(a[b + (c + 1) * n]);
        u1 += std::fabs(a[b + 1 + c * n]) + std::fabs(a[b + 1 + (c + 1) * n]);
      }
      double y0 = t[b], y1 = t[b + 1];
#pragma GCC unroll 8
      for (int c = 0; c < b; c += 2) {
        const double l00 = std::fabs(a[b + c * n]), l01 = std::fabs(a[b + (c + 1) * n]);
        const double l10 = std::fabs(a[b + 1 + c * n]), l11 = std::fabs(a[b + 1 + (c + 1) * n]);
        y0 += l00 * t[c] + l01 * t[c + 1];
        y1 += l10 * t[c] + l11 * t[c + 1];
        u0 += l00 * w[c] + l01 * w[c + 1];
        u1 += l10 * w[c] + l11 * w[c + 1];
      }
      const double* d = a + b + b * n;
      const double d00 = std::fabs(d[0]), d01 = std::fabs(d[n]), d10 = std::fabs(d[1]), d11 = std::fabs(d[n + 1]);
      t[b] = d00 * y0 + d01 * y1;
      t[b + 1] = d10 * y0 + d11 * y1;
      w[b] = d00 * u0 + d01 * u1;
      w[b + 1] = d10 * u0 + d11 * u1;
    }
  }
  double rho = 0.0, smax = 0.0;
  for (int r = 0; r < n; ++r) {
    rho = std::max(rho, w[r]);
    smax = std::max(smax, t[r]);
  }
  if (!(rho < 1.0)) return rho;
  // Rounded up: the tail's factor is formed with a margin of its own rounding.
  const double tail = smax * rho / (1.0 - rho) * (1.0 + detail::acceptance_round_k);
  for (int r = 0; r < n; ++r) t[r] = (t[r] + tail) * (1.0 + detail::acceptance_round_k);
  return rho;
}

// x = J^-1 b approximately (in place), by `sweeps` block Gauss-Seidel sweeps from 0: the
// warm start's and the sub-steps' predictions from torn points (a prediction only; the
// Newton that follows decides the accuracy). At run-time size, n_rt <= torn_max_ports.
template <int N>
__attribute__((always_inline)) inline void torn_solve_n(const double* a, int n_rt, double* b, int sweeps) noexcept {
  const int n = N > 0 ? N : n_rt;
  double t[N > 0 ? N : torn_max_ports], delta[N > 0 ? N : torn_max_ports];
  for (int q = 0; q < n; ++q) {
    t[q] = b[q];
    b[q] = 0.0;
  }
  for (int s = 0; s < sweeps; ++s) torn_sweep_n<N>(a, n, t, b, delta);
}

// Factors of either kind: `blocked` says which (block_factor_n's or lu_factor_n's).
// `torn_sweeps` > 0 (N > 0, or run-time size in a sanitizer build): J prepared by
// torn_prepare_n, solved approximately by that many sweeps.
template <int N>
__attribute__((always_inline)) inline void factors_solve_n(const double* a, int n, const int* piv, bool blocked,
                                                           double* b, int torn_sweeps = 0) noexcept {
  if constexpr (N > 0 || torn_at_runtime_size) {
    if (torn_sweeps > 0) return torn_solve_n<N>(a, n, b, torn_sweeps);
  }
  if (blocked)
    block_solve_n<N>(a, n, b);
  else
    lu_solve_n<N>(a, n, piv, b);
}

// |A^-1| t (t >= 0) from A's factors, forming A^-1 column by column in `scratch` (n x n):
// the exact form of abs_bound_n's bound, for where that one is too coarse. Out of line.
template <int N>
__attribute__((noinline)) void exact_abs_bound(const double* a, int n, const int* piv, bool blocked, const double* t,
                                               double* scratch, double* out) noexcept {
  for (int c = 0; c < n; ++c) {
    double* col = scratch + c * n;
    for (int r = 0; r < n; ++r) col[r] = r == c ? 1.0 : 0.0;
    factors_solve_n<N>(a, n, piv, blocked, col);
  }
  for (int r = 0; r < n; ++r) {
    double sum = 0.0;
    for (int c = 0; c < n; ++c) sum += std::fabs(scratch[r + c * n]) * t[c];
    out[r] = sum;
  }
}

// y (+)= A x for a column-major A of N (0: n_rt) rows and m columns: column by column, each
// x_c broadcast once (Eigen's general product kernel, taken for these sizes, is not inlined
// into the wide loop).
template <int N, bool Add>
__attribute__((always_inline)) inline void product_n(const double* __restrict a, int n_rt, int m,
                                                     const double* __restrict x, double* __restrict y) noexcept {
  const int n = N > 0 ? N : n_rt;
  if constexpr (N > 0) {
    vcol<N> acc = Add ? vcol<N>::load(y) : vcol<N>::zero();
    for (int c = 0; c < m; ++c) acc.add(a + c * N, x[c]);
    acc.store(y);
  } else {
    if constexpr (!Add)
      for (int r = 0; r < n; ++r) y[r] = 0.0;
    for (int c = 0; c < m; ++c) {
      const double xc = x[c];
      for (int r = 0; r < n; ++r) y[r] += a[r + c * n] * xc;
    }
  }
}

// Two, three and four JFETs at compile-time sizes, more at run time.
double lu_factor(double* a, int n, int* piv) noexcept {
  switch (n) {
    case 4: return lu_factor_n<4>(a, n, piv);
    case 6: return lu_factor_n<6>(a, n, piv);
    case 8: return lu_factor_n<8>(a, n, piv);
    default: return lu_factor_n<0>(a, n, piv);
  }
}

// M = (I - F Jf)^-1 from its factors (of either kind), column by column.
void inverse_of(const Eigen::MatrixXd& lu, const std::vector<int>& piv, bool blocked, Eigen::MatrixXd& m) noexcept {
  const int n = static_cast<int>(m.rows());
  for (int c = 0; c < n; ++c) {
    double* col = m.col(c).data();
    for (int r = 0; r < n; ++r) col[r] = r == c ? 1.0 : 0.0;
    factors_solve_n<0>(lu.data(), n, piv.data(), blocked, col);
  }
}

// The stacked update W [x; u; i] (column-major, `rows` rows, padded with zero rows) in two
// parts, as on the one-JFET path: the x and u columns before the sample's Newton solve,
// the current columns after it. Column by column: each input is broadcast once and the
// column runs in whole packets; the sums in the same order in both kernel sets.
void update_before_portable(const double* __restrict w, int rows, const double* __restrict xu, int cols,
                            double* __restrict pre) noexcept {
  for (int row = 0; row < rows; ++row) pre[row] = 0.0;
  for (int c = 0; c < cols; ++c) {
    const double x = xu[c];
    const double* __restrict wc = w + static_cast<std::ptrdiff_t>(c) * rows;
    for (int row = 0; row < rows; ++row) pre[row] += wc[row] * x;
  }
}

void update_after_portable(const double* __restrict w, int rows, const double* __restrict pre,
                           const double* __restrict cur, int cols, double* __restrict o) noexcept {
  for (int row = 0; row < rows; ++row) o[row] = pre[row];
  for (int c = 0; c < cols; ++c) {
    const double x = cur[c];
    const double* __restrict wc = w + static_cast<std::ptrdiff_t>(c) * rows;
    for (int row = 0; row < rows; ++row) o[row] += wc[row] * x;
  }
}

#if PINCHOFF_DK_PAIR
// AVX2 + FMA: rows padded to a multiple of 4. Up to 12 packets (48 rows: six stages with
// rail filters) are held in registers while the columns pass once (each input broadcast
// once, the packets' fused multiply-adds independent); taller matrices pass in blocks of 8
// packets.
template <int P>
__attribute__((target("avx2,fma"), always_inline)) inline void update_block(const double* __restrict w, int rows,
                                                                            const double* __restrict start,
                                                                            const double* __restrict x, int cols,
                                                                            double* __restrict o) noexcept {
  __m256d a[P];
  for (int q = 0; q < P; ++q) a[q] = start ? _mm256_load_pd(start + 4 * q) : _mm256_setzero_pd();
  const double* wc = w;
  for (int c = 0; c < cols; ++c, wc += rows) {
    const __m256d xc = _mm256_broadcast_sd(x + c);
    for (int q = 0; q < P; ++q) a[q] = _mm256_fmadd_pd(_mm256_load_pd(wc + 4 * q), xc, a[q]);
  }
  for (int q = 0; q < P; ++q) _mm256_store_pd(o + 4 * q, a[q]);
}

__attribute__((target("avx2,fma"))) void update_wide(const double* __restrict w, int rows,
                                                     const double* __restrict start, const double* __restrict x,
                                                     int cols, double* __restrict o) noexcept {
  switch (rows / 4) {
    case 1: return update_block<1>(w, rows, start, x, cols, o);
    case 2: return update_block<2>(w, rows, start, x, cols, o);
    case 3: return update_block<3>(w, rows, start, x, cols, o);
    case 4: return update_block<4>(w, rows, start, x, cols, o);
    case 5: return update_block<5>(w, rows, start, x, cols, o);
    case 6: return update_block<6>(w, rows, start, x, cols, o);
    case 7: return update_block<7>(w, rows, start, x, cols, o);
    case 8: return update_block<8>(w, rows, start, x, cols, o);
    case 9: return update_block<9>(w, rows, start, x, cols, o);
    case 10: return update_block<10>(w, rows, start, x, cols, o);
    case 11: return update_block<11>(w, rows, start, x, cols, o);
    case 12: return update_block<12>(w, rows, start, x, cols, o);
    default: break;
  }
  int r0 = 0;
  for (; r0 + 32 <= rows; r0 += 32) update_block<8>(w + r0, rows, start ? start + r0 : nullptr, x, cols, o + r0);
  for (; r0 < rows; r0 += 4) update_block<1>(w + r0, rows, start ? start + r0 : nullptr, x, cols, o + r0);
}

// update_block over K JFETs' current columns (igs, igd, id of each, x their offsets from the
// DC point), a JFET's two junction columns passed over where both offsets are exactly zero:
// a junction taken as -is (far reverse) now and at the DC point carries the same current.
// The first ns rows (the states' increments) are added onto the states `st` themselves (the
// packets wholly among them not stored in o); the rest go to o.
template <int P, int K>
__attribute__((target("avx2,fma"), always_inline)) inline void update_currents_block(const double* __restrict w,
                                                                                     int rows,
                                                                                     const double* __restrict start,
                                                                                     const double* __restrict x,
                                                                                     double* __restrict o,
                                                                                     double* __restrict st,
                                                                                     int ns) noexcept {
  __m256d a[P];
  for (int q = 0; q < P; ++q) a[q] = _mm256_load_pd(start + 4 * q);
  for (int j = 0; j < K; ++j) {
    const double* wj = w + static_cast<std::ptrdiff_t>(3 * j) * rows;
    if (x[3 * j] != 0.0 || x[3 * j + 1] != 0.0) {
      const __m256d x0 = _mm256_broadcast_sd(x + 3 * j), x1 = _mm256_broadcast_sd(x + 3 * j + 1);
      for (int q = 0; q < P; ++q) a[q] = _mm256_fmadd_pd(_mm256_load_pd(wj + 4 * q), x0, a[q]);
      for (int q = 0; q < P; ++q) a[q] = _mm256_fmadd_pd(_mm256_load_pd(wj + rows + 4 * q), x1, a[q]);
    }
    const __m256d x2 = _mm256_broadcast_sd(x + 3 * j + 2);
    for (int q = 0; q < P; ++q) a[q] = _mm256_fmadd_pd(_mm256_load_pd(wj + 2 * rows + 4 * q), x2, a[q]);
  }
  for (int q = 0; q < P; ++q) {
    if (4 * q + 4 <= ns)
      _mm256_storeu_pd(st + 4 * q, _mm256_add_pd(_mm256_loadu_pd(st + 4 * q), a[q]));
    else
      _mm256_store_pd(o + 4 * q, a[q]);
  }
  for (int r = ns / 4 * 4; r < ns; ++r) st[r] += o[r];
}
template <int K>
__attribute__((target("avx2,fma"), always_inline)) inline void update_currents_wide(const double* __restrict w, int rows,
                                                                                    const double* __restrict start,
                                                                                    const double* __restrict x,
                                                                                    double* __restrict o,
                                                                                    double* __restrict st,
                                                                                    int ns) noexcept {
  switch (rows / 4) {
    case 5: return update_currents_block<5, K>(w, rows, start, x, o, st, ns);
    case 6: return update_currents_block<6, K>(w, rows, start, x, o, st, ns);
    case 7: return update_currents_block<7, K>(w, rows, start, x, o, st, ns);
    case 8: return update_currents_block<8, K>(w, rows, start, x, o, st, ns);
    case 9: return update_currents_block<9, K>(w, rows, start, x, o, st, ns);
    case 10: return update_currents_block<10, K>(w, rows, start, x, o, st, ns);
    case 11: return update_currents_block<11, K>(w, rows, start, x, o, st, ns);
    case 12: return update_currents_block<12, K>(w, rows, start, x, o, st, ns);
    default:
      update_wide(w, rows, start, x, 3 * K, o);
      vec_add_scaled(st, st, o, ns, 1.0);
  }
}
#endif

}  // namespace

void general_solver::port_set::resize(int k) {
  v.setZero(2 * k);
  i.setZero(3 * k);
  jf.setZero(3 * k, 2 * k);
  lu.setIdentity(2 * k, 2 * k);
  piv.resize(static_cast<std::size_t>(2 * k));
  for (int r = 0; r < 2 * k; ++r) piv[static_cast<std::size_t>(r)] = r;
  blocked = false;
  torn = false;
  pending = false;
}

general_solver::general_solver(const network& net, const operating_point& op, dk_matrices m, const dk_options& opt)
    : dk_solver_base(std::move(m), opt, net) {
  if (!(opt_.coupling_weight >= 0.0 && opt_.coupling_weight <= 1.0))
    throw internal_error("dk_options: coupling_weight must be 0..1");
  warm_ = detail::warm_start_weights(opt_.predictor_order);
  const int ns = m_.states, k = m_.devices, np = 2 * k, ni = 3 * k;
  storage& g = g_;
  g.dev.clear();
  for (const net_jfet& q : net.jfets) g.dev.push_back(detail::device_consts::of(q.device, net.vt_v));
  g.cur.assign(static_cast<std::size_t>(k), detail::port_currents{});
  g.f_abs = m_.f.cwiseAbs();

  // Stacked update as for one JFET: the state rows hold the increment x_n - x_{n-1}.
  wide_ = PINCHOFF_DK_GENERAL_WIDE && opt_.wide_kernels && detail::wide_kernels_available();
  g.rows = (ns + np + 1 + 3) / 4 * 4;
  {
    const Eigen::MatrixXd w = stacked_update(m_, g.rows);
    g.w = detail::aligned_doubles(static_cast<std::size_t>(w.size()));
    std::copy_n(w.data(), w.size(), g.w.data());
  }
  g.pre = detail::aligned_doubles(static_cast<std::size_t>(g.rows));
  g.out = detail::aligned_doubles(static_cast<std::size_t>(g.rows));
  std::fill_n(g.pre.data(), g.rows, 0.0);
  std::fill_n(g.out.data(), g.rows, 0.0);
  in_ = Eigen::VectorXd::Zero(ns + 2 + ni);

  for (Eigen::VectorXd* v : {&g.q, &g.p, &g.p_last, &g.p_dc, &g.dp, &g.v, &g.r, &g.d, &g.base,
                             &g.step, &g.t, &g.bound, &g.allowed, &g.pc, &g.pj, &g.guess})
    v->setZero(np);
  g.rem.setZero(ni);
  g.mag.setZero(ni);
  g.corr_q.setZero(ni);
  g.corr_r.setZero(ni);
  g.corr_e.setZero(np);
  g.corr_t.setZero(np);
  for (port_set* s : {&g.ring[0], &g.ring[1], &g.ring[2], &g.ring[3], &g.dc, &g.cur_pt, &g.next_pt}) s->resize(k);
  g.mdl.setZero(np);
  pair_ = PINCHOFF_DK_PAIR && opt_.wide_kernels && detail::wide_kernels_available() && k == 2 && opt_.block_factors;
  full_ = PINCHOFF_DK_PAIR && opt_.wide_kernels && detail::wide_kernels_available() && k >= 3 && k <= full_max_devices &&
          opt_.block_factors && opt_.full_inverse;
  {
    const int padded = (np + 3) / 4 * 4;  // process_n: columns of F, |F|, M padded to this
    const std::size_t ring = std::max<std::size_t>(64, static_cast<std::size_t>(4 * padded * np));
    g.mring = detail::aligned_doubles(ring);
    std::fill_n(g.mring.data(), ring, 0.0);
  }
  if (full_) {
    const int padded = (np + 3) / 4 * 4;
    g.fpad = detail::aligned_doubles(static_cast<std::size_t>(padded * ni));
    g.mw = detail::aligned_doubles(static_cast<std::size_t>(padded * np));
    g.fapad = detail::aligned_doubles(static_cast<std::size_t>(padded * ni));
    g.vpad = detail::aligned_doubles(static_cast<std::size_t>(6 * padded));
    std::fill_n(g.vpad.data(), 6 * padded, 0.0);
    // W's q rows (the next sample's port prediction) of the current columns, P rows a column.
    g.wq = detail::aligned_doubles(static_cast<std::size_t>(padded * ni));
    for (int c = 0; c < ni; ++c)
      for (int r = 0; r < padded; ++r)
        g.wq.data()[c * padded + r] = r < np ? g.w.data()[static_cast<std::ptrdiff_t>(ns + 2 + c) * g.rows + ns + r] : 0.0;
    for (int c = 0; c < ni; ++c)
      for (int r = 0; r < padded; ++r) {
        g.fpad.data()[c * padded + r] = r < np ? m_.f(r, c) : 0.0;
        g.fapad.data()[c * padded + r] = r < np ? g.f_abs(r, c) : 0.0;
      }
  }
  g.cj.setZero(ns, np);
  g.md.setZero(np, ns);
  g.mi.setZero(np, np);
  g.track_lu.setZero(np, np);
  g.track_piv.assign(static_cast<std::size_t>(np), 0);

  // Far-reverse junctions, as on the one-JFET path (dk_single.cpp says why): below
  // v / (n Vt) = skip_arg a junction is taken as -is with no conductance, which leaves out
  // at most is exp(skip_arg), e^0.01 times that over an accepted step; both junctions of
  // every JFET go through |F| into the acceptance bound (skip_t), and skip_arg is set so
  // that the sum over the JFETs stays below a thousandth of tol_v (never above exp(-16)).
  g.skip_t.setZero(np);
  g.junction_vcrit.resize(np);
  g.junction_small.resize(np);
  g.guess_knee.resize(np);
  for (int j = 0; j < k; ++j) {
    const detail::device_consts& dv = g.dev[static_cast<std::size_t>(j)];
    g.junction_vcrit[2 * j] = g.junction_vcrit[2 * j + 1] = dv.vcrit_v;
    g.junction_small[2 * j] = g.junction_small[2 * j + 1] = 0.01 * dv.nvt_v;
    // The guess's knees (solve_general): where the junction's conductance times the
    // network's resistance at the junction (its diagonal entry of F) reaches 1.
    const double self_gs = std::fabs(m_.f(2 * j, 3 * j));
    const double self_gd = std::fabs(m_.f(2 * j, 3 * j + 1) - m_.f(2 * j + 1, 3 * j + 1));
    for (int q = 0; q < 2; ++q) {
      const double self = q == 0 ? self_gs : self_gd;
      const double knee = dv.is_a > 0.0 && self > 0.0 ? dv.nvt_v * std::log(dv.nvt_v / (dv.is_a * self)) : dv.vcrit_v;
      g.guess_knee[2 * j + q] = std::min(dv.vcrit_v, knee);
    }
  }
  for (int j = 0; j < k; ++j) {
    detail::device_consts& dv = g.dev[static_cast<std::size_t>(j)];
    const Eigen::VectorXd fa = g.f_abs.col(3 * j) + g.f_abs.col(3 * j + 1);
    const double per_amp = 2.02 * fa.maxCoeff() * k;
    if (dv.is_a > 0.0 && per_amp > 0.0) {
      const double arg = std::log(1e-3 * opt_.tol_v / (per_amp * dv.is_a));
      dv.skip_arg = std::clamp(arg, detail::junction_deep_reverse, -16.0);
    }
    g.skip_t += fa * (2.02 * dv.is_a * std::exp(dv.skip_arg));
  }

  // DC point: states from the operating point, the port voltages refined on the engine's
  // own port equations (detail::refine_dc_ports); the states are carried as offsets from
  // these (dk_engine.hpp says why).
  const Eigen::Vector2d u(supply_v_, 0.0);
  Eigen::VectorXd q = dc_states(net, op.x);
  Eigen::VectorXd v(np);
  for (int j = 0; j < k; ++j) {
    const net_jfet& d = net.jfets[static_cast<std::size_t>(j)];
    v[2 * j] = node_v(op.x, d.gate) - node_v(op.x, d.source);
    v[2 * j + 1] = node_v(op.x, d.drain) - node_v(op.x, d.source);
  }
  detail::refine_dc_ports(m_, g.dev, supply_v_, q, v);
  x_dc_ = q;
  point_general(v, g.dc);
  {
    // How strongly the stages act backwards at the DC point: the infinity norm of
    // L^-1 U (J = I - F Jf = L + U, L block lower with each JFET's 2 x 2 block), the
    // contraction of a block Gauss-Seidel sweep. Where it is small, one sweep predicts the
    // warm start from a torn point; else two (DC-coupled followers: 0.1-0.2).
    const Eigen::MatrixXd j = Eigen::MatrixXd::Identity(np, np) - m_.f * g.dc.jf;
    Eigen::MatrixXd lower = j, upper = Eigen::MatrixXd::Zero(np, np);
    for (int c = 0; c < np; ++c)
      for (int r = 0; r < c / 2 * 2; ++r) {
        upper(r, c) = j(r, c);
        lower(r, c) = 0.0;
      }
    const Eigen::MatrixXd g_s = lower.partialPivLu().solve(upper);
    const double rho = g_s.cwiseAbs().rowwise().sum().maxCoeff();
    torn_predict_ = rho < 1e-2 ? 1 : 2;
  }
  g.p_dc = m_.d * q + m_.e * u;
  if (full_) {
    const int padded = (np + 3) / 4 * 4;
    for (int r = 0; r < np; ++r) {
      g.vpad.data()[r] = g.p_dc[r];
      g.vpad.data()[padded + r] = m_.e(r, 1);
      g.vpad.data()[2 * padded + r] = g.skip_t[r];
    }
  }
  // process_n's devices in lanes (dk_general.cpp, lane_consts): four a row, the lanes past
  // k a JFET that conducts nothing and whose junctions are always taken as -is.
  if (full_) {
    constexpr int count = lane_consts::count;
    const int rows = (k + 3) / 4;
    g.lanes = detail::aligned_doubles(static_cast<std::size_t>(4 * count * rows));
    for (int j = 0; j < 4 * rows; ++j) {
      double* c = g.lanes.data() + 4 * count * (j / 4) + j % 4;
      const bool real = j < k;
      const detail::device_consts dv = real ? g.dev[static_cast<std::size_t>(j)] : detail::device_consts{};
      c[4 * lane_consts::beta] = real ? dv.beta : 0.0;
      c[4 * lane_consts::vto] = real ? dv.vto_v : -1.0;
      c[4 * lane_consts::lambda] = real ? dv.lambda : 0.0;
      c[4 * lane_consts::is] = real ? dv.is_a : 0.0;
      c[4 * lane_consts::leak] = real ? dv.leak_a : 0.0;
      c[4 * lane_consts::inv_nvt] = real ? dv.inv_nvt : 1.0;
      c[4 * lane_consts::skip_arg] = real ? dv.skip_arg : std::numeric_limits<double>::infinity();
      c[4 * lane_consts::vcrit] = real ? dv.vcrit_v : std::numeric_limits<double>::infinity();
      c[4 * lane_consts::small] = real ? 0.01 * dv.nvt_v : std::numeric_limits<double>::infinity();
      c[4 * lane_consts::k_junction] = real ? 0.505 * dv.inv_nvt : 0.0;
      const double fgs = real ? g.f_abs.col(3 * j).maxCoeff() : 0.0, fgd = real ? g.f_abs.col(3 * j + 1).maxCoeff() : 0.0;
      c[4 * lane_consts::slight_gs] = fgs > 0.0 ? slight_junction / fgs : std::numeric_limits<double>::infinity();
      c[4 * lane_consts::slight_gd] = fgd > 0.0 ? slight_junction / fgd : std::numeric_limits<double>::infinity();
      c[4 * lane_consts::knee_gs] = real ? g.guess_knee[2 * j] : std::numeric_limits<double>::infinity();
      c[4 * lane_consts::knee_gd] = real ? g.guess_knee[2 * j + 1] : std::numeric_limits<double>::infinity();
    }
  }
  if (full_) {
    const int lr = (k + 3) / 4, lanes = 4 * lr;
    g.fch = detail::aligned_doubles(static_cast<std::size_t>(lanes * (2 * k + 2)));
    std::fill_n(g.fch.data(), lanes * (2 * k + 2), 0.0);
    for (int c = 0; c <= k; ++c)
      for (int j = 0; j < k; ++j) {
        const int col = 3 * (c < k ? c : j) + 2;  // c = k: each JFET's own channel
        g.fch.data()[2 * c * lanes + j] = m_.f(2 * j, col);
        g.fch.data()[(2 * c + 1) * lanes + j] = m_.f(2 * j + 1, col);
      }
  }
  g.y_dc = m_.d_out.dot(q) + m_.e_out.dot(u) + m_.f_out.dot(g.dc.i);
  y_dc_ = sign_ * g.y_dc;
  reset();
}

void general_solver::point_general(const Eigen::VectorXd& v, port_set& out) noexcept {
  storage& g = g_;
  const int k = m_.devices;
  for (int j = 0; j < k; ++j) {
    const detail::port_currents c = detail::evaluate_ports(g.dev[static_cast<std::size_t>(j)], v[2 * j], v[2 * j + 1]);
    g.cur[static_cast<std::size_t>(j)] = c;
    out.i[3 * j] = c.igs_a;
    out.i[3 * j + 1] = c.igd_a;
    out.i[3 * j + 2] = c.id_a;
    put_block(out.jf, j, c);
  }
  out.v = v;
  one_minus_f_jf(m_.f, g.cur, out.lu);
  out.blocked = false;
  out.torn = false;
  out.pending = false;
  if (!(lu_factor(out.lu.data(), k * 2, out.piv.data()) > 0.0))
    out.lu.setConstant(std::numeric_limits<double>::quiet_NaN());
}

void general_solver::reset() {
  storage& g = g_;
  inputs_at_dc(g.dc.i.size());
  g.q.setZero();
  for (port_set& s : g.ring) s = g.dc;
  g.head = 0;
  for (bool& r : g.ring_rescued) r = false;
  if (pair_)
    for (int slot = 0; slot < 4; ++slot) pair_m_of(slot);
  if (full_) {
    for (int slot = 0; slot < 4; ++slot) ring_m_of(slot);
    const int np = 2 * m_.devices, padded = (np + 3) / 4 * 4;
    combine_warm<0>(padded * np);
    for (int r = 0; r < np; ++r) {
      g.vpad.data()[3 * padded + r] = g.last().v[r];
      g.vpad.data()[4 * padded + r] = g.p_dc[r];
      g.vpad.data()[5 * padded + r] = 0.0;  // q
    }
  }
  torn_holdoff_ = 0;
  g.p_last = g.p_dc;
  std::fill_n(g.guess_mean, 4, 0.0);
  std::fill_n(g.guess_extrapolated, 4, 0.0);
  stats_ = {};
}

// A point process_pair accepted holds I - F Jf itself (`pending`): its factors, as
// solve_general would have left them, for what reads them (the sub-steps, pair_m_of); the
// pair loop's own samples and track() use M in full.
void general_solver::ensure_factors(port_set& pt) noexcept {
  if (pt.stale) {
    one_minus_f_jf(m_.f, pt.jf, pt.lu);
    pt.stale = false;
    pt.pending = true;
  }
  if (!pt.pending) return;
  pt.pending = false;
  pt.torn = false;
  const int np = 2 * m_.devices;
  pt.blocked = opt_.block_factors && block_factor_n<0>(pt.lu.data(), np);
  if (pt.blocked) return;
  one_minus_f_jf(m_.f, pt.jf, pt.lu);
  if (!(lu_factor(pt.lu.data(), np, pt.piv.data()) > 0.0)) pt.lu.setConstant(std::numeric_limits<double>::quiet_NaN());
}

// dv/dp of ring point `slot` in full, from its factors (two JFETs: process_pair).
void general_solver::pair_m_of(int slot) noexcept {
  ensure_factors(g_.ring[slot]);
  const port_set& pt = g_.ring[slot];
  if (pt.blocked && !pt.torn) return pair_inverse(pt.lu.data(), g_.mring.data() + 16 * slot);
  inverse_of(pt.lu, pt.piv, pt.blocked, g_.mi);
  std::copy_n(g_.mi.data(), 16, g_.mring.data() + 16 * slot);
}

// The square matrix m into `out` column by column, `rows` rows a column (m's rows, then
// zeros): process_n's layout of M.
static void padded_columns(const Eigen::MatrixXd& m, int rows, double* out) noexcept {
  const int n = static_cast<int>(m.rows());
  for (int c = 0; c < n; ++c)
    for (int r = 0; r < rows; ++r) out[c * rows + r] = r < n ? m(r, c) : 0.0;
}

// M = (I - F Jf)^-1 into `mt` (columns of `rows` rows) from I - F Jf factored with partial
// pivoting (process_n, where its 2 x 2 pivot blocks do not serve), Jf from the JFETs'
// derivatives as rows of lanes (ggs, ggd, gm, gds; `stride` apart). False: singular.
bool general_solver::pivoted_m(double* mt, const double* derivatives, int stride) noexcept {
  storage& g = g_;
  const int k = m_.devices, np = 2 * k, rows = (np + 3) / 4 * 4;
  ++stats_.pivoted;
  // (g.cur and track_lu are scratch here, as in solve_general and track().)
  for (int j = 0; j < k; ++j) {
    detail::port_currents& c = g.cur[static_cast<std::size_t>(j)];
    c.ggs_s = derivatives[j];
    c.ggd_s = derivatives[stride + j];
    c.gm_s = derivatives[2 * stride + j];
    c.gds_s = derivatives[3 * stride + j];
  }
  one_minus_f_jf(m_.f, g.cur, g.track_lu);
  if (!(lu_factor(g.track_lu.data(), np, g.track_piv.data()) > 1e-200)) return false;
  inverse_of(g.track_lu, g.track_piv, false, g.mi);
  padded_columns(g.mi, rows, mt);
  return true;
}

// process_n's warm-start matrix: the weights warm_ on M of the last three ring points, summed
// (N entries a slot, N a multiple of four; 0: n_rt at run time).
template <int N>
__attribute__((always_inline)) inline void general_solver::combine_warm(int n_rt) noexcept {
  const int n = N > 0 ? N : n_rt;
  const double* m0 = g_.mring.data() + static_cast<std::ptrdiff_t>(n) * g_.head;
  const double* m1 = g_.mring.data() + static_cast<std::ptrdiff_t>(n) * ((g_.head - 1) & 3);
  const double* m2 = g_.mring.data() + static_cast<std::ptrdiff_t>(n) * ((g_.head - 2) & 3);
  double* out = g_.mw.data();
  const double w0 = warm_[0], w1 = warm_[1], w2 = warm_[2];
#pragma GCC unroll 4
  for (int e = 0; e < n; ++e) out[e] = w0 * m0[e] + w1 * m1[e] + w2 * m2[e];
}

// M of ring point `slot` in full, from its factors, into the ring in columns of P rows
// (three to six JFETs: process_n).
void general_solver::ring_m_of(int slot) noexcept {
  port_set& pt = g_.ring[slot];
  ensure_factors(pt);
  const int np = 2 * m_.devices, rows = (np + 3) / 4 * 4;
  if (pt.torn) {
    // A torn point holds J with its diagonal blocks inverted: J formed again and factored.
    one_minus_f_jf(m_.f, pt.jf, g_.track_lu);
    if (!(lu_factor(g_.track_lu.data(), np, g_.track_piv.data()) > 0.0))
      g_.track_lu.setConstant(std::numeric_limits<double>::quiet_NaN());
    inverse_of(g_.track_lu, g_.track_piv, false, g_.mi);
  } else {
    inverse_of(pt.lu, pt.piv, pt.blocked, g_.mi);
  }
  padded_columns(g_.mi, rows, g_.mring.data() + static_cast<std::ptrdiff_t>(rows) * np * slot);
}

void general_solver::set_state(const Eigen::Ref<const Eigen::VectorXd>& x) {
  in_.head(m_.states) = x - x_dc_;
  g_.q.noalias() = m_.d * in_.head(m_.states);
  if (full_) {
    const int np = 2 * m_.devices, padded = (np + 3) / 4 * 4;
    std::copy_n(g_.q.data(), np, g_.vpad.data() + 5 * padded);
  }
}

void general_solver::track(Eigen::MatrixXd& sensitivity) {
  const bool rescued = full_ && g_.ring_rescued[g_.head];
  if (rescued) {
    // Accepted after a rescue step: Jf at the point itself (the one it holds is the
    // iterate's, a Newton step away), and below, M from it.
    port_set& pt = g_.last();
    for (int j = 0; j < m_.devices; ++j)
      put_block(pt.jf, j, detail::evaluate_ports(g_.dev[static_cast<std::size_t>(j)], pt.v[2 * j], pt.v[2 * j + 1]));
    pt.stale = true;
  }
  // C Jf by JFET j's 3 x 2 block of Jf (rows 3j.., columns 2j..), the rest of Jf zero; the
  // small products coefficient by coefficient (a general product's packing costs more).
  const Eigen::MatrixXd& jf = g_.last().jf;
  for (int j = 0; j < m_.devices; ++j)
    for (int t = 2 * j; t < 2 * j + 2; ++t)
      g_.cj.col(t) = m_.c.col(3 * j) * jf(3 * j, t) + m_.c.col(3 * j + 1) * jf(3 * j + 1, t) +
                     m_.c.col(3 * j + 2) * jf(3 * j + 2, t);
  const port_set& last = g_.last();
  if (pair_) {
    // The two-JFET loop keeps M of every ring point in full (its own points' I - F Jf left
    // unfactored).
    g_.mi = Eigen::Map<const Eigen::Matrix4d>(g_.mring.data() + 16 * g_.head);
  } else if (full_ && !rescued) {
    // So does the loop for three to six JFETs, in columns padded to a multiple of four rows.
    const int np = 2 * m_.devices, rows = (np + 3) / 4 * 4;
    g_.mi = Eigen::Map<const Eigen::MatrixXd, 0, Eigen::OuterStride<>>(
        g_.mring.data() + static_cast<std::ptrdiff_t>(rows) * np * g_.head, np, np, Eigen::OuterStride<>(rows));
  } else if (last.torn || rescued) {
    // A torn point holds J = I - F Jf with its diagonal blocks inverted, not factors (and a
    // rescued point's M is the iterate's): J formed again from the point's Jf and factored
    // with pivoting.
    const int np = 2 * m_.devices;
    one_minus_f_jf(m_.f, jf, g_.track_lu);
    if (!(lu_factor(g_.track_lu.data(), np, g_.track_piv.data()) > 0.0))
      g_.track_lu.setConstant(std::numeric_limits<double>::quiet_NaN());
    inverse_of(g_.track_lu, g_.track_piv, false, g_.mi);
  } else {
    inverse_of(last.lu, last.piv, last.blocked, g_.mi);
  }
  g_.md.noalias() = g_.mi.lazyProduct(m_.d);
  apply_factor(g_.cj, g_.md, sensitivity);
}

// A guess extrapolated past a corner of the waveform can put a gate junction far forward
// where the solution has it off: Newton then walks down the exponential by about n Vt an
// iteration (24-43 evaluations in one sample where the bench's chains clip at 10 V). Each
// JFET's part of the guess is limited as a Newton step from the point it was extrapolated
// from (pnjlim, Nagel 1975), with the junction's knee in place of vcrit: where its
// conductance times the network's resistance at the junction (F's diagonal entry) reaches
// 1, at most vcrit (storage::guess_knee).
__attribute__((noinline)) void general_solver::limit_guess(double* v, const double* from) const noexcept {
  const int k = m_.devices;
  for (int j = 0; j < k; ++j) {
    const double gs = v[2 * j], gd = v[2 * j] - v[2 * j + 1];
    if (!(gs > g_.guess_knee[2 * j] || gd > g_.guess_knee[2 * j + 1])) continue;
    const double nvt = g_.dev[static_cast<std::size_t>(j)].nvt_v;
    const double gs0 = from[2 * j], gd0 = from[2 * j] - from[2 * j + 1];
    const double ls = limit_junction(gs, gs0, nvt, g_.guess_knee[2 * j]);
    const double ld = limit_junction(gd, gd0, nvt, g_.guess_knee[2 * j + 1]);
    double alpha = 1.0;
    if (ls != gs) alpha = std::min(alpha, (ls - gs0) / (gs - gs0));
    if (ld != gd) alpha = std::min(alpha, (ld - gd0) / (gd - gd0));
    if (alpha < 1.0 && alpha >= 0.0) {
      v[2 * j] = from[2 * j] + alpha * (v[2 * j] - from[2 * j]);
      v[2 * j + 1] = from[2 * j + 1] + alpha * (v[2 * j + 1] - from[2 * j + 1]);
    }
  }
}

// Newton on r(v) = p + F i(v) - v = 0 from `guess`, for k JFETs; the argument of
// newton_iteration() (dk_single.cpp) carried over, with the same acceptance. After the step
// dv computed at v, device j's currents at v + dv differ from their linearisation by a
// remainder bounded per current as there (the junction bound 0.505 g dv^2 / nVt for
// |dv| <= 0.01 nVt, the channel's exact, plus its rounding margin); stacked into R (3k),
// the residual at v + dv is at most |F| R + rounding and the distance to the exact solution
// at most |M| times that, with M = (I - F Jf)^-1 (Ortega & Rheinboldt 1970, 12.6). The
// rounding of the port equation, 8 eps (|F| (|i| + |Jf dv|) + |p| + |v + dv|) a row, is
// allowed on top of tol_v up to 1e-8 V, as on the one-JFET path (which says why). The
// per-device part (remainders, magnitudes, the small-step test) is one function for both
// paths (detail::remainders_of); only the assembly of the rows differs.
//
// K > 0: the number of JFETs at compile time (fixed-size views of the engine's storage, so
// the small products unroll); K = 0: any number, at run time.
template <int K>
bool general_solver::solve_general(const Eigen::VectorXd& p_in, const Eigen::VectorXd& guess, const double* from,
                                   port_set& out, int& evals) noexcept {
  using vec_p = Eigen::Matrix<double, ports_of(K), 1>;
  using vec_i = Eigen::Matrix<double, currents_of(K), 1>;
  using mat_f = Eigen::Matrix<double, ports_of(K), currents_of(K)>;
  storage& g = g_;
  const int k = K > 0 ? K : m_.devices, np = 2 * k, ni = 3 * k;
  const Eigen::Map<const mat_f> f(m_.f.data(), np, ni);
  const Eigen::Map<const mat_f> f_abs(g.f_abs.data(), np, ni);
  const Eigen::Map<const vec_p> p(p_in.data(), np);
  Eigen::Map<vec_p> v(g.v.data(), np), r(g.r.data(), np), d(g.d.data(), np), base(g.base.data(), np),
      step(g.step.data(), np), t(g.t.data(), np), bound(g.bound.data(), np);
  Eigen::Map<vec_p> allowed(g.allowed.data(), np);
  Eigen::Map<vec_i> i(out.i.data(), ni), rem(g.rem.data(), ni), mag(g.mag.data(), ni);
  const double tol = opt_.tol_v;
  using detail::acceptance_round_k;
  using detail::rounding_allowance_v;
  v = Eigen::Map<const vec_p>(guess.data(), np);
  if (from != nullptr) limit_guess(v.data(), from);
  base = v;
  step.setZero();
  double rn_base = std::numeric_limits<double>::infinity();
  bool may_damp = false;
  int halvings = 0;
  for (int it = 0; it < opt_.max_iterations; ++it) {
    for (int j = 0; j < k; ++j) {
      const detail::port_currents c = detail::evaluate_ports(g.dev[static_cast<std::size_t>(j)], v[2 * j], v[2 * j + 1]);
      g.cur[static_cast<std::size_t>(j)] = c;
      i[3 * j] = c.igs_a;
      i[3 * j + 1] = c.igd_a;
      i[3 * j + 2] = c.id_a;
    }
    ++evals;
    double rn;
    if constexpr (K > 0) {
      vcol<2 * K> rc = vcol<2 * K>::load(p.data()).zip(vcol<2 * K>::load(v.data()), [](const auto& x, const auto& y) { return x - y; });
      for (int c = 0; c < 3 * K; ++c) rc.add(f.data() + c * 2 * K, i[c]);
      rc.store(r.data());
      rn = rc.abs_max();
    } else {
      r = p - v;
      product_n<lu_size_of(K), true>(f.data(), np, ni, i.data(), r.data());
      rn = r.cwiseAbs().maxCoeff();
    }
    // Damped Newton: halve a step that made the residual grow (or not finite).
    if (detail::halve_step(may_damp, rn, rn_base, tol, halvings)) {
      step *= 0.5;
      v = base + step;
      ++halvings;
      continue;
    }
    if (!std::isfinite(rn)) return false;

    // I - F Jf, column pair by column pair (Jf is block diagonal).
    auto form_j = [&]() noexcept {
      double* jd = out.lu.data();
      out.pending = false;
      if constexpr (K > 0) {
        constexpr int NP = 2 * K;
        for (int q = 0; q < K; ++q) {
          const detail::port_currents& c = g.cur[static_cast<std::size_t>(q)];
          const double* f0 = f.data() + 3 * q * NP;
          vcol<NP> c0 = vcol<NP>::zero(), c1 = vcol<NP>::zero();
          c0.add(f0, -c.ggs_s);
          c0.add(f0 + NP, -c.ggd_s);
          c0.add(f0 + 2 * NP, -c.gm_s);
          c1.add(f0 + NP, c.ggd_s);
          c1.add(f0 + 2 * NP, -c.gds_s);
          c0.store(jd + 2 * q * NP);
          c1.store(jd + (2 * q + 1) * NP);
          jd[2 * q + 2 * q * NP] += 1.0;
          jd[2 * q + 1 + (2 * q + 1) * NP] += 1.0;
        }
        return;
      }
      for (int q = 0; q < k; ++q) {
        const detail::port_currents& c = g.cur[static_cast<std::size_t>(q)];
        for (int row = 0; row < np; ++row) {
          const double f0 = f(row, 3 * q), f1 = f(row, 3 * q + 1), f2 = f(row, 3 * q + 2);
          jd[row + (2 * q) * np] = (row == 2 * q ? 1.0 : 0.0) - (f0 * c.ggs_s + f1 * c.ggd_s + f2 * c.gm_s);
          jd[row + (2 * q + 1) * np] = (row == 2 * q + 1 ? 1.0 : 0.0) - (-f1 * c.ggd_s + f2 * c.gds_s);
        }
      }
    };
    form_j();

    // Junction-voltage limiting (Nagel 1975, SPICE2 pnjlim), per JFET; the largest cut
    // scales the whole step.
    auto limit_step = [&]() noexcept {
      if constexpr (K > 0) {
        // Which junction would pass vcrit, all JFETs at once (the scalar loop below then).
        if (!vcol<2 * K>::load(v.data()).plus(d.data()).junctions().any_above(g.junction_vcrit.data())) return false;
      }
      double alpha = 1.0;
      for (int j = 0; j < k; ++j) {
        const detail::device_consts& dv = g.dev[static_cast<std::size_t>(j)];
        const double gs_new = v[2 * j] + d[2 * j], gd_new = (v[2 * j] - v[2 * j + 1]) + d[2 * j] - d[2 * j + 1];
        if (gs_new > dv.vcrit_v || gd_new > dv.vcrit_v)
          alpha = std::min(alpha, detail::junction_step_scale(dv, v[2 * j], v[2 * j + 1], d[2 * j], d[2 * j + 1]));
      }
      if (alpha < 1.0) {
        d *= alpha;
        return true;
      }
      return false;
    };
    auto small_step = [&]() noexcept {
      if constexpr (K > 0) return vcol<2 * K>::load(d.data()).junctions().all_at_most(g.junction_small.data());
      bool small = true;
      for (int j = 0; j < k && small; ++j)
        small = detail::small_junction_steps(g.dev[static_cast<std::size_t>(j)], d[2 * j], d[2 * j] - d[2 * j + 1]);
      return small;
    };

    // The acceptance of the step d from v. coupling: null for an exact Newton step; for a
    // torn step, the bound on the linear residual its last sweep left (torn_coupling_n),
    // which the residual at v + d holds on top of |F| R, so it is added to t; the distance
    // to the exact solution is then bounded by torn_abs_bound_n instead of the factors.
    // Returns accept_yes (out holds the accepted point), accept_no, accept_sweep (a torn
    // step that another sweep may make acceptable) or accept_full (a torn step whose bound
    // cannot be had from J's blocks: factor J).
    // The correction of a point the factored step accepts (detail::correction_floor): the
    // step e = J^-1 F R from v + d, R the junctions' remainders themselves (by their
    // series), and the point v + d + e with the junctions' currents i(v + d) + Jf e and the
    // channels' linearised ones, where the bound on the residual there (|F| R' + the
    // rest of t, R' from detail::correction_remainders) and on the error (from the
    // factors, as the acceptance) are below tol_v. False: not taken (out unchanged).
    auto correct_point = [&]() noexcept -> bool {
      Eigen::Map<vec_i> cq(g.corr_q.data(), ni), cr(g.corr_r.data(), ni);
      Eigen::Map<vec_p> ce(g.corr_e.data(), np);
      for (int j = 0; j < k; ++j) {
        const detail::device_consts& dv = g.dev[static_cast<std::size_t>(j)];
        if (!detail::correction_applies(dv, v[2 * j], v[2 * j + 1], 0.0, 0.0)) return false;
        const detail::port_currents& c = g.cur[static_cast<std::size_t>(j)];
        cq[3 * j] = detail::junction_remainder(c.ggs_s, dv, d[2 * j]);
        cq[3 * j + 1] = detail::junction_remainder(c.ggd_s, dv, d[2 * j] - d[2 * j + 1]);
        cq[3 * j + 2] = 0.0;
      }
      product_n<lu_size_of(K), false>(f.data(), np, ni, cq.data(), ce.data());
      factors_solve_n<lu_size_of(K)>(out.lu.data(), np, out.piv.data(), out.blocked, ce.data());
      for (int j = 0; j < k; ++j) {
        const detail::device_consts& dv = g.dev[static_cast<std::size_t>(j)];
        const double e0 = ce[2 * j], e1 = ce[2 * j + 1];
        if (!detail::correction_applies(dv, v[2 * j], v[2 * j + 1], e0, e1)) return false;
        const detail::port_currents& c = g.cur[static_cast<std::size_t>(j)];
        const double d0 = d[2 * j], d1 = d[2 * j + 1];
        const double id_end = c.id_a + (c.gm_s * d0 + c.gds_s * d1);
        detail::correction_remainders(dv, c, d0, d1, e0, e1, v[2 * j] + d0 + e0, v[2 * j + 1] + d1 + e1, id_end,
                                      cr.data() + 3 * j);
      }
      product_n<lu_size_of(K), false>(f_abs.data(), np, ni, cr.data(), bound.data());
      bound += Eigen::Map<const vec_p>(g.corr_t.data(), np);
      if (!(bound.maxCoeff() <= tol)) return false;
      if (out.blocked)
        block_abs_bound_n<lu_size_of(K)>(out.lu.data(), np, bound.data());
      else
        abs_bound_n<lu_size_of(K)>(out.lu.data(), np, out.piv.data(), bound.data());
      if (!(bound.maxCoeff() <= tol)) return false;
      Eigen::Map<vec_p>(out.v.data(), np) = v + d + ce;
      for (int j = 0; j < k; ++j) {
        const detail::port_currents& c = g.cur[static_cast<std::size_t>(j)];
        const double d0 = d[2 * j], d1 = d[2 * j + 1], e0 = ce[2 * j], e1 = ce[2 * j + 1];
        i[3 * j] = c.igs_a + c.ggs_s * (d0 + e0) + cq[3 * j];
        i[3 * j + 1] = c.igd_a + c.ggd_s * ((d0 - d1) + (e0 - e1)) + cq[3 * j + 1];
        i[3 * j + 2] = c.id_a + (c.gm_s * d0 + c.gds_s * d1) + (c.gm_s * e0 + c.gds_s * e1);
        put_block(out.jf, j, c);
      }
      return true;
    };

    enum { accept_no, accept_yes, accept_sweep, accept_full };
    auto try_accept = [&](const double* coupling) noexcept -> int {
      for (int j = 0; j < k; ++j) {
        const detail::step_remainders sr = detail::remainders_of(
            g.dev[static_cast<std::size_t>(j)], g.cur[static_cast<std::size_t>(j)], v[2 * j] + d[2 * j], v[2 * j + 1] + d[2 * j + 1], d[2 * j],
            d[2 * j + 1]);
        for (int q = 0; q < 3; ++q) {
          rem[3 * j + q] = sr.rem[q];
          mag[3 * j + q] = sr.mag[q];
        }
      }
      // allowed: the rounding of each row, up to the allowance; t: the residual bound less
      // what is allowed (so t <= tol_v is the test of the residual).
      if constexpr (K > 0) {
        // The same sums, both products in one pass over |F|, in fixed-size vectors.
        constexpr int NP = 2 * K;
        vcol<NP> ma = vcol<NP>::zero(), ta = vcol<NP>::zero();
        for (int c = 0; c < 3 * K; ++c) {
          ma.add(f_abs.data() + c * NP, mag[c]);
          ta.add(f_abs.data() + c * NP, rem[c]);
        }
        const vcol<NP> al = ma.zip(vcol<NP>::load(p.data()), [](const auto& x, const auto& y) { return x + vabs(y); })
                                .zip(vcol<NP>::load(v.data()).plus(d.data()),
                                     [](const auto& x, const auto& y) { return acceptance_round_k * (x + vabs(y)); });
        const vcol<NP> rs = vcol<NP>::load(g.skip_t.data()).zip(al, [](const auto& x, const auto& y) {
          return x + vmax(y - rounding_allowance_v, decltype(y){} );
        });
        rs.store(g.corr_t.data());
        ta.zip(rs, [](const auto& x, const auto& y) { return x + y; }).store(t.data());
        al.zip(vcol<NP>::fill(rounding_allowance_v), [](const auto& x, const auto& y) { return vmin(x, y); })
            .store(allowed.data());
      } else {
        product_n<lu_size_of(K), false>(f_abs.data(), np, ni, mag.data(), allowed.data());
        allowed = acceptance_round_k * (allowed + p.cwiseAbs() + (v + d).cwiseAbs());
      }
      // The junctions' part of |F| R, for the correction's test (two JFETs only, below).
      double junctions_most = 0.0;
      bool junction_on = false;  // a junction taken as -is has no conductance and no remainder
      for (int j = 0; j < k && k == 2; ++j) {
        const detail::port_currents& c = g.cur[static_cast<std::size_t>(j)];
        junction_on = junction_on || c.ggs_s > 0.0 || c.ggd_s > 0.0;
      }
      if (k == 2 && junction_on && opt_.correct_junctions) {
        Eigen::Map<vec_i> cq(g.corr_q.data(), ni);
        for (int j = 0; j < k; ++j) {
          cq[3 * j] = rem[3 * j];
          cq[3 * j + 1] = rem[3 * j + 1];
          cq[3 * j + 2] = 0.0;
        }
        product_n<lu_size_of(K), false>(f_abs.data(), np, ni, cq.data(), g.corr_e.data());
        junctions_most = Eigen::Map<const vec_p>(g.corr_e.data(), np).maxCoeff();
      }
      if constexpr (K == 0) {
        product_n<lu_size_of(K), false>(f_abs.data(), np, ni, rem.data(), t.data());
        Eigen::Map<vec_p> rest(g.corr_t.data(), np);  // skip_t and the rounding beyond the allowance
        rest = Eigen::Map<const vec_p>(g.skip_t.data(), np) + (allowed.array() - rounding_allowance_v).max(0.0).matrix();
        t += rest;
        allowed = allowed.cwiseMin(rounding_allowance_v);
      }
      bool sweep_may_help = false;
      if (coupling) {
        sweep_may_help = t.maxCoeff() <= tol;
        t += opt_.coupling_weight * Eigen::Map<const vec_p>(coupling, np);
      }
      if (!(t.maxCoeff() <= tol)) return sweep_may_help ? accept_sweep : accept_no;
      bound = t;
      if (coupling) {
        if constexpr (K > 0 || torn_at_runtime_size) {
          const double rho = torn_abs_bound_n<lu_size_of(K)>(out.lu.data(), np, bound.data());
          // Where the blocks cannot bound it (the coupling is already a small share of
          // tol_v here, so more sweeps would not), the factors decide, as without tearing.
          if (!(rho < 1.0 && bound.maxCoeff() <= tol)) return accept_full;
        }
      } else {
        // The bound on the error, |M| t with M = (I - F Jf)^-1, from the factors
        // (abs_bound_n: no inverse formed). Where that bound is too coarse (the
        // comparison matrices can overstate |U^-1| by far where U's entries cancel), |M| t
        // itself, from M formed column by column.
        if (out.blocked)
          block_abs_bound_n<lu_size_of(K)>(out.lu.data(), np, bound.data());
        else
          abs_bound_n<lu_size_of(K)>(out.lu.data(), np, out.piv.data(), bound.data());
        if (!(bound.maxCoeff() <= tol)) [[unlikely]]
          exact_abs_bound<lu_size_of(K)>(out.lu.data(), np, out.piv.data(), out.blocked, t.data(), g.mi.data(),
                                         bound.data());
        if (!(bound.maxCoeff() <= tol)) return accept_no;
      }
      if (opt_.confirm) {
        bound = v + d;  // the accepted point (bound is free now)
        for (int j = 0; j < k; ++j) {
          // The exact device (no far-reverse skip), so the check covers the skip's bound too.
          detail::device_consts exact = g.dev[static_cast<std::size_t>(j)];
          exact.skip_arg = detail::junction_deep_reverse;
          const detail::port_currents cc = detail::evaluate_ports(exact, bound[2 * j], bound[2 * j + 1]);
          rem[3 * j] = cc.igs_a;
          rem[3 * j + 1] = cc.igd_a;
          rem[3 * j + 2] = cc.id_a;
          g.cur[static_cast<std::size_t>(j)] = cc;
        }
        ++evals;
        t = p - bound;
        product_n<lu_size_of(K), true>(f.data(), np, ni, rem.data(), t.data());
        if (!(t.cwiseAbs().array() <= tol + allowed.array()).all()) {
          ++stats_.bound_misses;
          return accept_no;
        }
        out.v = g.bound;
        i = rem;
        for (int j = 0; j < k; ++j) put_block(out.jf, j, g.cur[static_cast<std::size_t>(j)]);
        return accept_yes;
      }
      // The correction (detail::correction_floor says why), where the remainders move the
      // point by more than a thousandth of tol_v and its own bound holds; at two JFETs
      // only. From three, a sample's step may be torn (it solves the linearised equations
      // only up to its coupling, and takes no correction) or factored, and which one a
      // sample takes differs between the kernel sets; with the correction on the factored
      // steps alone their points would part by up to the correction.
      if (!coupling && k == 2 && junctions_most > detail::correction_floor * tol && opt_.correct_junctions &&
          correct_point()) [[unlikely]]
        return accept_yes;
      Eigen::Map<vec_p>(out.v.data(), np) = v + d;
      for (int j = 0; j < k; ++j) {
        const detail::port_currents& c = g.cur[static_cast<std::size_t>(j)];
        const double d0 = d[2 * j], d1 = d[2 * j + 1];
        i[3 * j] = c.igs_a + c.ggs_s * d0;
        i[3 * j + 1] = c.igd_a + c.ggd_s * (d0 - d1);
        i[3 * j + 2] = c.id_a + (c.gm_s * d0 + c.gds_s * d1);
        put_block(out.jf, j, c);
      }
      return accept_yes;
    };

    bool limited = false;
    bool full = true;
    if constexpr (K >= torn_min_devices || (K == 0 && torn_at_runtime_size)) {
      // The torn step: block Gauss-Seidel sweeps on J d = r (torn_sweep_n), as many as the
      // acceptance or the Newton's progress asks, each leaving the coupling -U delta in the
      // linear residual, which enters the acceptance (try_accept). Where J's own blocks
      // are not safely invertible, the sweeps stop contracting, or the bound cannot be had
      // from the blocks, this step is computed from J's factors instead (below).
      // (At run-time size, from torn_min_devices to torn_max_devices JFETs.)
      if ((K > 0 || (k >= torn_min_devices && k <= torn_max_devices)) && opt_.torn_solve && opt_.block_factors &&
          torn_holdoff_ == 0 && torn_prepare_n<lu_size_of(K)>(out.lu.data(), np)) {
        full = false;
        out.torn = true;
        out.blocked = false;
        double delta[K > 0 ? 2 * K : torn_max_ports], coupling[K > 0 ? 2 * K : torn_max_ports];
        double left[K > 0 ? 2 * K : torn_max_ports];  // the running residual of the sweeps
        for (int q = 0; q < np; ++q) left[q] = r[q];
        d.setZero();
        torn_sweep_n<lu_size_of(K)>(out.lu.data(), np, left, d.data(), delta);
        int sweeps = 1;
        double change = d.cwiseAbs().maxCoeff();
        for (;;) {
          const double coupling_most = torn_coupling_n<lu_size_of(K)>(out.lu.data(), np, delta, coupling);
          if (limit_step()) {
            limited = true;
            break;
          }
          // The acceptance is tried once the coupling is a small part of tol_v (before,
          // it fails on the coupling alone: another sweep is cheaper).
          bool sweep_more = coupling_most > torn_forcing * rn;
          if (small_step()) {
            if (opt_.coupling_weight * coupling_most <= torn_coupling_share * tol) {
              const int verdict = try_accept(coupling);
              if (verdict == accept_yes) return true;
              if (verdict == accept_full) {
                full = true;
                break;
              }
              sweep_more = sweep_more || verdict == accept_sweep;
            } else {
              sweep_more = true;
            }
          }
          if (sweeps >= torn_max_sweeps || !sweep_more) break;
          torn_sweep_n<lu_size_of(K)>(out.lu.data(), np, left, d.data(), delta);
          ++sweeps;
          double change_now = 0.0;
          for (int q = 0; q < np; ++q) change_now = std::max(change_now, std::fabs(delta[q]));
          if (!(change_now <= torn_slow_ratio * change)) {  // contracting slowly, or not at all (or not finite)
            full = true;
            break;
          }
          change = change_now;
        }
        if (full) {
          ++stats_.torn_full;
          torn_holdoff_ = torn_holdoff_samples;
          form_j();
        }
      }
    }
    if (full) {
      out.torn = false;
      // J's factors, straight into the point's (kept when this step is accepted): by 2 x 2
      // blocks where that is safe (block_factor_n), else with partial pivoting, I - F Jf
      // formed again; and the step d = (I - F Jf)^-1 r.
      out.blocked = opt_.block_factors && block_factor_n<lu_size_of(K)>(out.lu.data(), np);
      if (!out.blocked) [[unlikely]] {
        ++stats_.pivoted;
        if (opt_.block_factors) one_minus_f_jf(m_.f, g.cur, out.lu);
        if (!(lu_factor_n<lu_size_of(K)>(out.lu.data(), np, out.piv.data()) > 1e-200)) return false;
      }
      d = r;
      factors_solve_n<lu_size_of(K)>(out.lu.data(), np, out.piv.data(), out.blocked, d.data());
      if (!d.allFinite()) return false;
      limited = limit_step();
      if (!limited && small_step() && try_accept(nullptr) == accept_yes) return true;
    }
    if (!d.allFinite()) return false;
    base = v;
    step = d;
    rn_base = rn;
    may_damp = !limited;
    halvings = 0;
    v += d;
  }
  return false;
}

// A sample whose Newton did not converge: sub-steps from the last sample's solution
// (detail::substep), on the solver's storage (no allocation).
template <int K>
__attribute__((noinline)) void general_solver::substep_general(const Eigen::VectorXd& p, port_set& out, int& evals) noexcept {
  struct path {
    general_solver& s;
    const Eigen::VectorXd& p;
    port_set& out;
    void restart() noexcept {
      s.ensure_factors(s.g_.last());
      s.g_.cur_pt = s.g_.last();
      s.g_.pc = s.g_.p_last;
    }
    bool step_to(double frac, bool last, int& evals) noexcept {
      storage& g = s.g_;
      if (last)
        g.pj = p;
      else
        g.pj = g.p_last + (p - g.p_last) * frac;
      g.dp = g.pj - g.pc;
      g.mdl = g.dp;
      factors_solve_n<lu_size_of(K)>(g.cur_pt.lu.data(), static_cast<int>(g.dp.size()), g.cur_pt.piv.data(),
                                     g.cur_pt.blocked, g.mdl.data(), g.cur_pt.torn ? 2 : 0);
      g.guess = g.cur_pt.v + g.mdl;
      if (!s.solve_general<K>(g.pj, g.guess, g.cur_pt.v.data(), g.next_pt, evals)) return false;
      g.cur_pt = g.next_pt;
      g.pc = g.pj;
      return true;
    }
    void take() noexcept { out = s.g_.cur_pt; }
    void hold() noexcept { out = s.g_.last(); }
  } path_{*this, p, out};
  detail::substep(path_, opt_.max_substep_levels, stats_, evals);
}

template <int K>
double general_solver::process_k(double generator_v) noexcept {
  using vec_p = Eigen::Matrix<double, ports_of(K), 1>;
  storage& g = g_;
  const int ns = m_.states, k = K > 0 ? K : m_.devices, np = 2 * k, ni = 3 * k;
  const int rows = g.rows;
  const double ug = sign_ * generator_v;
  in_[ns + 1] = ug;
  // W's x and u columns times [x; u].
#if PINCHOFF_DK_GENERAL_WIDE
  if (wide_)
    update_wide(g.w.data(), rows, nullptr, in_.data(), ns + 2, g.pre.data());
  else
#endif
    update_before_portable(g.w.data(), rows, in_.data(), ns + 2, g.pre.data());
  Eigen::Map<vec_p> p(g.p.data(), np), q(g.q.data(), np), p_last(g.p_last.data(), np), dp(g.dp.data(), np),
      guess(g.guess.data(), np);
  const Eigen::Map<const vec_p> p_dc(g.p_dc.data(), np), e1(m_.e.col(1).data(), np);
  p = p_dc + q + e1 * ug;

  // Warm start as for one JFET: the last solution moved along the step of p by dv/dp at
  // the last three samples (Adams-Bashforth weights warm_; dk_single.cpp, step_t).
  {
    Eigen::Map<vec_p> mdl(g.mdl.data(), np);
    dp = p - p_last;
    guess = Eigen::Map<const vec_p>(g.last().v.data(), np);
    for (int h = 0; h < 3; ++h) {
      if (warm_[static_cast<std::size_t>(h)] == 0.0) continue;
      mdl = dp;
      const port_set& ph = g.back(h);
      factors_solve_n<lu_size_of(K)>(ph.lu.data(), np, ph.piv.data(), ph.blocked, mdl.data(), ph.torn ? torn_predict_ : 0);
      guess += warm_[static_cast<std::size_t>(h)] * mdl;
    }
  }

  int evals = 0;
  if (torn_holdoff_ > 0) --torn_holdoff_;
  port_set& trial = g.trial();
  if (!solve_general<K>(g.p, g.guess, g.last().v.data(), trial, evals)) substep_general<K>(g.p, trial, evals);

  // The trial becomes the last point; the two before it stay in the ring for the next
  // warm start (nothing copied).
  g.head = (g.head + 1) & 3;
  p_last = p;

  // The current columns of W times i - i_dc, onto the pre-computed part.
  {
    double* __restrict x_in = in_.data();
    const double* __restrict i_dc = g.dc.i.data();
    vec_add_scaled(x_in + ns + 2, g.last().i.data(), i_dc, ni, -1.0);
    const double* w_i = g.w.data() + static_cast<std::ptrdiff_t>(ns + 2) * rows;
#if PINCHOFF_DK_GENERAL_WIDE
    if (wide_)
      update_wide(w_i, rows, g.pre.data(), x_in + ns + 2, ni, g.out.data());
    else
#endif
      update_after_portable(w_i, rows, g.pre.data(), x_in + ns + 2, ni, g.out.data());
    const double* __restrict o = g.out.data();
    vec_add_scaled(x_in, x_in, o, ns, 1.0);
  }
  q = Eigen::Map<const vec_p>(g.out.data() + ns, np);

  ++stats_.samples;
  stats_.evaluations += evals;
  stats_.max_evaluations = std::max(stats_.max_evaluations, evals);
  return sign_ * (g.y_dc + g.out.data()[ns + np]);
}

// One block: the number of JFETs is dispatched once, then the samples in turn.
template <int K>
void general_solver::block_k(const double* in, double* out, std::size_t n) noexcept {
  for (std::size_t k = 0; k < n; ++k) out[k] = process_k<K>(in[k]);
}

// The same loop compiled for AVX2 + FMA as a whole (the Newton's small matrix loops run in
// packets of 4 with fused multiply-adds), everything but the rare sub-stepping inlined into
// it, as on the one-JFET path (dk_single.cpp says why flattening). It rounds differently
// from the portable loop; a processor always takes the same one.
#if PINCHOFF_DK_GENERAL_WIDE
template <int K>
__attribute__((PINCHOFF_DK_FLATTEN target("avx2,fma"))) void general_solver::block_wide(const double* in, double* out,
                                                                                  std::size_t n) noexcept {
  for (std::size_t k = 0; k < n; ++k) out[k] = process_k<K>(in[k]);
}
#endif

#if PINCHOFF_DK_PAIR
// Two JFETs, the sample as the one-JFET path lays it out (dk_single.cpp): the four port
// voltages, the residual, the step and each column of F, of I - F Jf and of
// M = (I - F Jf)^-1 in one AVX2 register each; M formed in full in registers by 2 x 2
// blocks (pair_inverse_regs: the block factors' arithmetic and tests, without their round
// trip through memory; the point keeps I - F Jf itself, factored only where the sub-steps
// read it: ensure_factors) and kept for the three points the warm start uses and track(),
// so the warm start, the step and the bound |M| t are each four fused multiply-adds a
// column. The same Newton, the same acceptance (the bound |M| t itself, which
// block_abs_bound_n bounds from above) and the same warm start as solve_general; up to
// pair_inline_iterations iterations here, and anything else (a junction step to limit, a
// step to damp, factors that need pivoting, more iterations) by solve_general<2> from
// where they stopped (pair_rest; the warm start limited here as solve_general limits its
// guess: limit_guess).
namespace {
__attribute__((target("avx2,fma"), always_inline)) inline double hmax_abs(__m256d x) noexcept {
  const __m256d a = _mm256_andnot_pd(_mm256_set1_pd(-0.0), x);
  const __m128d m = _mm_max_pd(_mm256_castpd256_pd128(a), _mm256_extractf128_pd(a, 1));
  return _mm_cvtsd_f64(_mm_max_sd(m, _mm_unpackhi_pd(m, m)));
}
__attribute__((target("avx2,fma"), always_inline)) inline __m256d abs4(__m256d x) noexcept {
  return _mm256_andnot_pd(_mm256_set1_pd(-0.0), x);
}
// y + sum_c col_c x_c over four columns of a 4 x 4 column-major matrix.
__attribute__((target("avx2,fma"), always_inline)) inline __m256d mul4(const double* a, const double* x,
                                                                       __m256d y) noexcept {
  y = _mm256_fmadd_pd(_mm256_load_pd(a), _mm256_broadcast_sd(x), y);
  y = _mm256_fmadd_pd(_mm256_load_pd(a + 4), _mm256_broadcast_sd(x + 1), y);
  y = _mm256_fmadd_pd(_mm256_load_pd(a + 8), _mm256_broadcast_sd(x + 2), y);
  return _mm256_fmadd_pd(_mm256_load_pd(a + 12), _mm256_broadcast_sd(x + 3), y);
}
// |A| x (x >= 0) for a 4 x 4 column-major A.
__attribute__((target("avx2,fma"), always_inline)) inline __m256d mul4_abs(const double* a, const double* x) noexcept {
  __m256d y = _mm256_mul_pd(abs4(_mm256_load_pd(a)), _mm256_broadcast_sd(x));
  y = _mm256_fmadd_pd(abs4(_mm256_load_pd(a + 4)), _mm256_broadcast_sd(x + 1), y);
  y = _mm256_fmadd_pd(abs4(_mm256_load_pd(a + 8)), _mm256_broadcast_sd(x + 2), y);
  return _mm256_fmadd_pd(abs4(_mm256_load_pd(a + 12)), _mm256_broadcast_sd(x + 3), y);
}

// The 2 x 2 block with columns c0, c1 inverted as invert_block does (invert_2x2), into the
// columns i0, i1.
__attribute__((always_inline)) inline bool invert_block_cols(vd2 c0, vd2 c1, vd2& i0, vd2& i1) noexcept {
  double i[4];
  if (!invert_2x2(c0[0], c0[1], c1[0], c1[1], i)) return false;
  i0 = vd2{i[0], i[1]};
  i1 = vd2{i[2], i[3]};
  return true;
}

// M = (I - F Jf)^-1 of two JFETs in registers, from the four columns k0..k3 of I - F Jf:
// the block factors block_factor_n<4> forms (D1^-1, L21 = A21 D1^-1, S = A22 - L21 A12,
// T = S^-1, each 2 x 2 block inverted as invert_block does) and M from them as pair_inverse
// does, with the same tests (a block not safely invertible, a multiplier above 1e4: false),
// without the factors' round trip through memory. Columns of M in m0..m3.
__attribute__((target("avx2,fma"), always_inline)) inline bool pair_inverse_regs(__m256d k0, __m256d k1, __m256d k2,
                                                                                  __m256d k3, __m256d& m0, __m256d& m1,
                                                                                  __m256d& m2, __m256d& m3) noexcept {
  // The blocks' columns (rows 0-1 and 2-3 of each column of I - F Jf).
  const vd2 a0 = _mm256_castpd256_pd128(k0), a1 = _mm256_castpd256_pd128(k1);
  const vd2 c0 = _mm256_extractf128_pd(k0, 1), c1 = _mm256_extractf128_pd(k1, 1);
  const vd2 b0 = _mm256_castpd256_pd128(k2), b1 = _mm256_castpd256_pd128(k3);
  const vd2 d0 = _mm256_extractf128_pd(k2, 1), d1 = _mm256_extractf128_pd(k3, 1);
  vd2 ai0, ai1;  // A^-1
  if (!invert_block_cols(a0, a1, ai0, ai1)) return false;
  // L = C A^-1, its growth; S = D - L B.
  const vd2 l0 = c0 * ai0[0] + c1 * ai0[1];
  const vd2 l1 = c0 * ai1[0] + c1 * ai1[1];
  {
    const vd2 g = vmax(vabs(l0), vabs(l1));
    if (!(std::max(g[0], g[1]) <= 1e4)) return false;
  }
  const vd2 s0 = d0 - (l0 * b0[0] + l1 * b0[1]);
  const vd2 s1 = d1 - (l0 * b1[0] + l1 * b1[1]);
  vd2 t0, t1;  // T = S^-1
  if (!invert_block_cols(s0, s1, t0, t1)) return false;
  // X = A^-1 B T; M = [A^-1 + X L, -X; -T L, T].
  const vd2 au0 = ai0 * b0[0] + ai1 * b0[1], au1 = ai0 * b1[0] + ai1 * b1[1];
  const vd2 x0 = au0 * t0[0] + au1 * t0[1], x1 = au0 * t1[0] + au1 * t1[1];
  const vd2 top0 = ai0 + (x0 * l0[0] + x1 * l0[1]), top1 = ai1 + (x0 * l1[0] + x1 * l1[1]);
  const vd2 bot0 = -(t0 * l0[0] + t1 * l0[1]), bot1 = -(t0 * l1[0] + t1 * l1[1]);
  m0 = _mm256_set_m128d(bot0, top0);
  m1 = _mm256_set_m128d(bot1, top1);
  m2 = _mm256_set_m128d(t0, -x0);
  m3 = _mm256_set_m128d(t1, -x1);
  return true;
}

struct pair_out {
  double* v;  // 4 port voltages
  double* i;  // 6 currents
};

// The correction of an accepted two-JFET point (detail::correction_floor): the step
// e = M F R from vn = v + d, R the junctions' remainders themselves; the point vn + e with
// the junctions' currents i(vn) + Jf e and the channels' linearised ones is stored in
// `out` where the bound on the residual there,
// |F| R' + the rest of t (skip_t and the rounding beyond the allowance: `excess`), and
// |M| times it are below tol_v (R': detail::correction_remainders). False: not taken.
__attribute__((target("avx2,fma"), noinline)) bool pair_correct(
    const detail::device_consts& dv0, const detail::device_consts& dv1, const detail::port_currents& c0,
    const detail::port_currents& c1, const detail::step_remainders& s0, const detail::step_remainders& s1,
    const double* vv, const double* dd, __m256d vn, const double* mt, const double* f,
    const double* fa, __m256d excess, double tol, pair_out out) noexcept {
  // The junctions' part of the bound, |M| |F| R_junctions, against the floor.
  {
    const double rj[6] = {s0.rem[0], s0.rem[1], 0.0, s1.rem[0], s1.rem[1], 0.0};
    __m256d tj = _mm256_setzero_pd();
    for (int c = 0; c < 6; ++c) tj = _mm256_fmadd_pd(_mm256_loadu_pd(fa + 4 * c), _mm256_set1_pd(rj[c]), tj);
    alignas(32) double tjv[4];
    _mm256_store_pd(tjv, tj);
    if (!(hmax_abs(mul4_abs(mt, tjv)) > detail::correction_floor * tol)) return false;
  }
  if (!detail::correction_applies(dv0, vv[0], vv[1], 0.0, 0.0) || !detail::correction_applies(dv1, vv[2], vv[3], 0.0, 0.0))
    return false;
  const double q[6] = {detail::junction_remainder(c0.ggs_s, dv0, dd[0]),
                       detail::junction_remainder(c0.ggd_s, dv0, dd[0] - dd[1]), 0.0,
                       detail::junction_remainder(c1.ggs_s, dv1, dd[2]),
                       detail::junction_remainder(c1.ggd_s, dv1, dd[2] - dd[3]), 0.0};
  __m256d fr = _mm256_setzero_pd();
  for (int c = 0; c < 6; ++c) fr = _mm256_fmadd_pd(_mm256_loadu_pd(f + 4 * c), _mm256_set1_pd(q[c]), fr);
  alignas(32) double frv[4], ev[4], vcv[4];
  _mm256_store_pd(frv, fr);
  const __m256d e = mul4(mt, frv, _mm256_setzero_pd());
  _mm256_store_pd(ev, e);
  if (!detail::correction_applies(dv0, vv[0], vv[1], ev[0], ev[1]) ||
      !detail::correction_applies(dv1, vv[2], vv[3], ev[2], ev[3]))
    return false;
  const __m256d vc = _mm256_add_pd(vn, e);
  _mm256_store_pd(vcv, vc);
  const double id0 = c0.id_a + s0.id_lin_d, id1 = c1.id_a + s1.id_lin_d;
  double r[6];
  detail::correction_remainders(dv0, c0, dd[0], dd[1], ev[0], ev[1], vcv[0], vcv[1], id0, r);
  detail::correction_remainders(dv1, c1, dd[2], dd[3], ev[2], ev[3], vcv[2], vcv[3], id1, r + 3);
  __m256d t = excess;
  for (int c = 0; c < 6; ++c) t = _mm256_fmadd_pd(_mm256_loadu_pd(fa + 4 * c), _mm256_set1_pd(r[c]), t);
  alignas(32) double tv[4];
  _mm256_store_pd(tv, t);
  if (!(std::max(std::max(tv[0], tv[1]), std::max(tv[2], tv[3])) <= tol) || !(hmax_abs(mul4_abs(mt, tv)) <= tol))
    return false;
  _mm256_storeu_pd(out.v, vc);
  double* i = out.i;
  i[0] = c0.igs_a + c0.ggs_s * (dd[0] + ev[0]) + q[0];
  i[1] = c0.igd_a + c0.ggd_s * (dd[0] - dd[1] + ev[0] - ev[1]) + q[1];
  i[2] = id0 + c0.gm_s * ev[0] + c0.gds_s * ev[1];
  i[3] = c1.igs_a + c1.ggs_s * (dd[2] + ev[2]) + q[3];
  i[4] = c1.igd_a + c1.ggd_s * (dd[2] - dd[3] + ev[2] - ev[3]) + q[4];
  i[5] = id1 + c1.gm_s * ev[2] + c1.gds_s * ev[3];
  return true;
}
}  // namespace

// The sanitizer tree (PINCHOFF_RUNTIME_SIZES) compiles the general Newton at run-time size only.
#if defined(PINCHOFF_RUNTIME_SIZES)
constexpr int pair_general_k = 0;
#else
constexpr int pair_general_k = 2;
#endif

// The start of a sample in the two wide loops: the generator's voltage (network frame,
// returned) into the inputs, and W's state and input columns times them into `pre`.
__attribute__((target("avx2,fma"), always_inline)) inline double general_solver::start_wide_sample(
    double generator_v) noexcept {
  const int ns = m_.states;
  const double ug = sign_ * generator_v;
  in_[ns + 1] = ug;
  update_wide(g_.w.data(), g_.rows, nullptr, in_.data(), ns + 2, g_.pre.data());
  return ug;
}

__attribute__((noinline)) void general_solver::pair_rest(int& evals, bool attempt_failed) noexcept {
  port_set& trial = g_.trial();
  if (attempt_failed || !solve_general<pair_general_k>(g_.p, g_.guess, nullptr, trial, evals))
    substep_general<pair_general_k>(g_.p, trial, evals);
  pair_m_of((g_.head + 1) & 3);
}

__attribute__((target("avx2,fma"), always_inline)) inline double general_solver::process_pair(double generator_v) noexcept {
  storage& g = g_;
  const int ns = m_.states, rows = g.rows;
  double* __restrict x_in = in_.data();
  const double ug = start_wide_sample(generator_v);
  const double* f = m_.f.data();
  const double* fa = g.f_abs.data();
  const __m256d p = _mm256_fmadd_pd(_mm256_loadu_pd(m_.e.col(1).data()), _mm256_set1_pd(ug),
                                    _mm256_add_pd(_mm256_loadu_pd(g.p_dc.data()), _mm256_loadu_pd(g.q.data())));

  // Warm start (as process_k): the last solution moved along the step of p by M at the
  // last three points, Adams-Bashforth weights.
  // Where the trapezoidal rule rings at Nyquist on a node a conducting junction loads (a
  // follower's gate held forward), M alternates from sample to sample and the extrapolation
  // of the three Ms overshoots; the mean of the last two Ms does not. Whichever of the two
  // guesses came closer to the last sample's solution is taken.
  alignas(32) double dp[4];
  _mm256_store_pd(dp, _mm256_sub_pd(p, _mm256_loadu_pd(g.p_last.data())));
  const __m256d v_last = _mm256_loadu_pd(g.last().v.data());
  const bool two_guesses = warm_[1] != 0.0;  // an extrapolating predictor (predictor_order 2 or 3)
  const bool by_mean = two_guesses && hmax_abs(_mm256_sub_pd(v_last, _mm256_loadu_pd(g.guess_mean))) <
                                          hmax_abs(_mm256_sub_pd(v_last, _mm256_loadu_pd(g.guess_extrapolated)));
  __m256d v = v_last, v_mean = v_last;
  for (int h = 0; h < 3; ++h) {
    const double wh = warm_[static_cast<std::size_t>(h)];
    if (wh == 0.0) continue;
    const __m256d mdp = mul4(g.mring.data() + 16 * ((g.head - h) & 3), dp, _mm256_setzero_pd());
    v = _mm256_fmadd_pd(_mm256_set1_pd(wh), mdp, v);
    if (two_guesses && h < 2) v_mean = _mm256_fmadd_pd(_mm256_set1_pd(0.5), mdp, v_mean);
  }
  _mm256_storeu_pd(g.guess_extrapolated, v);
  _mm256_storeu_pd(g.guess_mean, v_mean);
  if (by_mean) v = v_mean;

  // The guess limited where a junction would rise past its knee (limit_guess).
  {
    const __m256d odd = _mm256_castsi256_pd(_mm256_setr_epi64x(0, -1, 0, -1));
    const __m256d junctions = _mm256_sub_pd(_mm256_permute_pd(v, 0), _mm256_and_pd(v, odd));  // gs, gd of each
    const __m256d knees = _mm256_loadu_pd(g.guess_knee.data());
    if (_mm256_movemask_pd(_mm256_cmp_pd(junctions, knees, _CMP_GT_OQ)) != 0) [[unlikely]] {
      alignas(32) double gv[4];
      _mm256_store_pd(gv, v);
      limit_guess(gv, g.last().v.data());
      v = _mm256_load_pd(gv);
    }
  }
  const int slot = (g.head + 1) & 3;
  port_set& trial = g.trial();
  double* mt = g.mring.data() + 16 * slot;
  const double tol = opt_.tol_v;
  const detail::device_consts& dv0 = g.dev[0];
  const detail::device_consts& dv1 = g.dev[1];
  int evals = 0;
  bool accepted = false;
  double rn_base = 0.0;
  __m256d base = v, step = _mm256_setzero_pd(), restart = v;
  const int inline_iterations = std::min(opt_.max_iterations, pair_inline_iterations);
  int it = 0;
  for (; it < inline_iterations; ++it) {
    alignas(32) double vv[4];
    _mm256_store_pd(vv, v);
    const detail::port_currents c0 = detail::evaluate_ports(dv0, vv[0], vv[1]);
    const detail::port_currents c1 = detail::evaluate_ports(dv1, vv[2], vv[3]);
    ++evals;
    __m256d r = _mm256_sub_pd(p, v);
    r = _mm256_fmadd_pd(_mm256_loadu_pd(f), _mm256_set1_pd(c0.igs_a), r);
    r = _mm256_fmadd_pd(_mm256_loadu_pd(f + 4), _mm256_set1_pd(c0.igd_a), r);
    r = _mm256_fmadd_pd(_mm256_loadu_pd(f + 8), _mm256_set1_pd(c0.id_a), r);
    r = _mm256_fmadd_pd(_mm256_loadu_pd(f + 12), _mm256_set1_pd(c1.igs_a), r);
    r = _mm256_fmadd_pd(_mm256_loadu_pd(f + 16), _mm256_set1_pd(c1.igd_a), r);
    r = _mm256_fmadd_pd(_mm256_loadu_pd(f + 20), _mm256_set1_pd(c1.id_a), r);
    const double rn = hmax_abs(r);
    // The second iteration's damping test (detail::halve_step): a step to halve goes to
    // solve_general.
    if (!std::isfinite(rn) || (it > 0 && detail::halve_step(true, rn, rn_base, tol, 0))) {
      // solve_general from the halved step (the damped Newton's next point), or from the
      // warm start where the first residual was not finite.
      restart = it > 0 ? _mm256_fmadd_pd(_mm256_set1_pd(0.5), step, base) : restart;
      break;
    }
    restart = v;

    // I - F Jf by columns, into the point's factor storage, and its block factors.
    double* jd = trial.lu.data();
    const __m256d f0 = _mm256_loadu_pd(f), f1 = _mm256_loadu_pd(f + 4), f2 = _mm256_loadu_pd(f + 8);
    const __m256d f3 = _mm256_loadu_pd(f + 12), f4 = _mm256_loadu_pd(f + 16), f5 = _mm256_loadu_pd(f + 20);
    __m256d j0 = _mm256_mul_pd(f0, _mm256_set1_pd(c0.ggs_s));
    j0 = _mm256_fmadd_pd(f1, _mm256_set1_pd(c0.ggd_s), j0);
    j0 = _mm256_fmadd_pd(f2, _mm256_set1_pd(c0.gm_s), j0);
    __m256d j1 = _mm256_mul_pd(f2, _mm256_set1_pd(c0.gds_s));
    j1 = _mm256_fnmadd_pd(f1, _mm256_set1_pd(c0.ggd_s), j1);
    __m256d j2 = _mm256_mul_pd(f3, _mm256_set1_pd(c1.ggs_s));
    j2 = _mm256_fmadd_pd(f4, _mm256_set1_pd(c1.ggd_s), j2);
    j2 = _mm256_fmadd_pd(f5, _mm256_set1_pd(c1.gm_s), j2);
    __m256d j3 = _mm256_mul_pd(f5, _mm256_set1_pd(c1.gds_s));
    j3 = _mm256_fnmadd_pd(f4, _mm256_set1_pd(c1.ggd_s), j3);
    const __m256d k0 = _mm256_sub_pd(_mm256_setr_pd(1.0, 0.0, 0.0, 0.0), j0);
    const __m256d k1 = _mm256_sub_pd(_mm256_setr_pd(0.0, 1.0, 0.0, 0.0), j1);
    const __m256d k2 = _mm256_sub_pd(_mm256_setr_pd(0.0, 0.0, 1.0, 0.0), j2);
    const __m256d k3 = _mm256_sub_pd(_mm256_setr_pd(0.0, 0.0, 0.0, 1.0), j3);
    // I - F Jf itself into the point (its factors formed only where something reads them:
    // ensure_factors), M in registers and into the ring for the warm start.
    _mm256_storeu_pd(jd, k0);
    _mm256_storeu_pd(jd + 4, k1);
    _mm256_storeu_pd(jd + 8, k2);
    _mm256_storeu_pd(jd + 12, k3);
    trial.pending = true;
    trial.blocked = false;
    trial.torn = false;
    __m256d mc0, mc1, mc2, mc3;
    if (!pair_inverse_regs(k0, k1, k2, k3, mc0, mc1, mc2, mc3)) break;
    _mm256_store_pd(mt, mc0);
    _mm256_store_pd(mt + 4, mc1);
    _mm256_store_pd(mt + 8, mc2);
    _mm256_store_pd(mt + 12, mc3);
    alignas(32) double rv[4];
    _mm256_store_pd(rv, r);
    __m256d d = _mm256_mul_pd(mc0, _mm256_broadcast_sd(rv));
    d = _mm256_fmadd_pd(mc1, _mm256_broadcast_sd(rv + 1), d);
    d = _mm256_fmadd_pd(mc2, _mm256_broadcast_sd(rv + 2), d);
    d = _mm256_fmadd_pd(mc3, _mm256_broadcast_sd(rv + 3), d);
    alignas(32) double dd[4];
    _mm256_store_pd(dd, d);
    if (!std::isfinite(dd[0] + dd[1] + dd[2] + dd[3])) break;
    // A junction landing above vcrit may need limiting: solve_general.
    if (vv[0] + dd[0] > dv0.vcrit_v || (vv[0] - vv[1]) + (dd[0] - dd[1]) > dv0.vcrit_v ||
        vv[2] + dd[2] > dv1.vcrit_v || (vv[2] - vv[3]) + (dd[2] - dd[3]) > dv1.vcrit_v)
      break;
    const __m256d vn = _mm256_add_pd(v, d);
    if (detail::small_junction_steps(dv0, dd[0], dd[0] - dd[1]) &&
        detail::small_junction_steps(dv1, dd[2], dd[2] - dd[3])) {
      alignas(32) double vnv[4];
      _mm256_store_pd(vnv, vn);
      const detail::step_remainders s0 = detail::remainders_of(dv0, c0, vnv[0], vnv[1], dd[0], dd[1]);
      const detail::step_remainders s1 = detail::remainders_of(dv1, c1, vnv[2], vnv[3], dd[2], dd[3]);
      // As solve_general's try_accept: the rounding of each row, allowed up to the
      // allowance; t the residual bound less what is allowed; then |M| t.
      __m256d al = _mm256_add_pd(abs4(p), abs4(vn));
      __m256d t = _mm256_loadu_pd(g.skip_t.data());
      const double mags[6] = {s0.mag[0], s0.mag[1], s0.mag[2], s1.mag[0], s1.mag[1], s1.mag[2]};
      const double rems[6] = {s0.rem[0], s0.rem[1], s0.rem[2], s1.rem[0], s1.rem[1], s1.rem[2]};
      __m256d fm = _mm256_setzero_pd(), tr = _mm256_setzero_pd();
      for (int c = 0; c < 6; ++c) {
        const __m256d fc = _mm256_loadu_pd(fa + 4 * c);
        fm = _mm256_fmadd_pd(fc, _mm256_set1_pd(mags[c]), fm);
        tr = _mm256_fmadd_pd(fc, _mm256_set1_pd(rems[c]), tr);
      }
      al = _mm256_mul_pd(_mm256_set1_pd(detail::acceptance_round_k), _mm256_add_pd(fm, al));
      const __m256d excess =
          _mm256_add_pd(t, _mm256_max_pd(_mm256_sub_pd(al, _mm256_set1_pd(detail::rounding_allowance_v)),
                                         _mm256_setzero_pd()));  // skip_t and the rounding beyond the allowance
      t = _mm256_add_pd(tr, excess);
      alignas(32) double tv[4];
      _mm256_store_pd(tv, t);
      if (std::max(std::max(tv[0], tv[1]), std::max(tv[2], tv[3])) <= tol) {
        __m256d e = _mm256_mul_pd(abs4(mc0), _mm256_broadcast_sd(tv));
        e = _mm256_fmadd_pd(abs4(mc1), _mm256_broadcast_sd(tv + 1), e);
        e = _mm256_fmadd_pd(abs4(mc2), _mm256_broadcast_sd(tv + 2), e);
        e = _mm256_fmadd_pd(abs4(mc3), _mm256_broadcast_sd(tv + 3), e);
        if (hmax_abs(e) <= tol && opt_.confirm) [[unlikely]] {
          // Confirm mode, as solve_general: the exact devices (no far-reverse skip) at the
          // point, whose residual must be below tol_v plus the row's rounding allowance.
          detail::device_consts x0 = dv0, x1 = dv1;
          x0.skip_arg = x1.skip_arg = detail::junction_deep_reverse;
          const detail::port_currents k0 = detail::evaluate_ports(x0, vnv[0], vnv[1]);
          const detail::port_currents k1 = detail::evaluate_ports(x1, vnv[2], vnv[3]);
          ++evals;
          const double ik[6] = {k0.igs_a, k0.igd_a, k0.id_a, k1.igs_a, k1.igd_a, k1.id_a};
          __m256d q = _mm256_sub_pd(p, vn);
          for (int c = 0; c < 6; ++c) q = _mm256_fmadd_pd(_mm256_loadu_pd(f + 4 * c), _mm256_set1_pd(ik[c]), q);
          const __m256d lim = _mm256_add_pd(_mm256_set1_pd(tol), _mm256_min_pd(al, _mm256_set1_pd(detail::rounding_allowance_v)));
          if (_mm256_movemask_pd(_mm256_cmp_pd(abs4(q), lim, _CMP_LE_OQ)) != 15) {
            ++stats_.bound_misses;
          } else {
            _mm256_storeu_pd(trial.v.data(), vn);
            std::copy_n(ik, 6, trial.i.data());
            put_block(trial.jf, 0, k0);
            put_block(trial.jf, 1, k1);
            accepted = true;
            break;
          }
        } else if (hmax_abs(e) <= tol) {
          // The correction (detail::correction_floor says why), where the remainders move
          // the point by more than a thousandth of tol_v and its own bound holds.
          // (A junction taken as -is has no conductance and no remainder: at rest all are.)
          if ((c0.ggs_s > 0.0 || c0.ggd_s > 0.0 || c1.ggs_s > 0.0 || c1.ggd_s > 0.0) && opt_.correct_junctions &&
              pair_correct(dv0, dv1, c0, c1, s0, s1, vv, dd, vn, mt, f, fa, excess, tol,
                           pair_out{trial.v.data(), trial.i.data()})) [[unlikely]] {
            put_block(trial.jf, 0, c0);
            put_block(trial.jf, 1, c1);
            accepted = true;
            break;
          }
          _mm256_storeu_pd(trial.v.data(), vn);
          double* i = trial.i.data();
          i[0] = c0.igs_a + c0.ggs_s * dd[0];
          i[1] = c0.igd_a + c0.ggd_s * (dd[0] - dd[1]);
          i[2] = c0.id_a + s0.id_lin_d;
          i[3] = c1.igs_a + c1.ggs_s * dd[2];
          i[4] = c1.igd_a + c1.ggd_s * (dd[2] - dd[3]);
          i[5] = c1.id_a + s1.id_lin_d;
          put_block(trial.jf, 0, c0);
          put_block(trial.jf, 1, c1);
          accepted = true;
          break;
        }
      }
    }
    rn_base = rn;
    base = v;
    step = d;
    v = vn;
    restart = vn;
  }
  if (!accepted) [[unlikely]] {
    // Where the inline iterations stopped (see above): solve_general goes on from there,
    // at this sample's p.
    _mm256_storeu_pd(g.p.data(), p);
    _mm256_storeu_pd(g.guess.data(), restart);
    // All of max_iterations made here: the attempt has failed, as solve_general's would.
    pair_rest(evals, it == opt_.max_iterations);
  }

  g.head = slot;
  _mm256_storeu_pd(g.p_last.data(), p);

  // The current columns of W times i - i_dc, onto the pre-computed part.
  {
    const double* __restrict i_dc = g.dc.i.data();
    const double* __restrict il = g.last().i.data();
    for (int c = 0; c < 6; ++c) x_in[ns + 2 + c] = il[c] - i_dc[c];
    update_currents_wide<2>(g.w.data() + static_cast<std::ptrdiff_t>(ns + 2) * rows, rows, g.pre.data(), x_in + ns + 2,
                            g.out.data(), x_in, ns);
    const double* __restrict o = g.out.data();
    _mm256_storeu_pd(g.q.data(), _mm256_loadu_pd(o + ns));
  }
  ++stats_.samples;
  stats_.evaluations += evals;
  stats_.max_evaluations = std::max(stats_.max_evaluations, evals);
  return sign_ * (g.y_dc + g.out.data()[ns + 4]);
}

__attribute__((PINCHOFF_DK_FLATTEN target("avx2,fma"))) void general_solver::block_pair(const double* in, double* out,
                                                                               std::size_t n) noexcept {
  for (std::size_t k = 0; k < n; ++k) out[k] = process_pair(in[k]);
}

// Three to six JFETs (full_max_devices), the two-JFET loop's layout widened (process_n):
// the 2k port voltages, the residual, the step and each column of F, |F| and
// M = (I - F Jf)^-1 in R = ceil(2k / 4) AVX2 registers, the rows past 2k zero; M formed in
// full each Newton iteration, in place in the ring slot the warm start reads: from the k
// channels (channel_m, a k x k inverse) and a rank-one update for each of up to k / 2
// significant gate junctions (junction_update), the slight ones left to the remainders;
// else by Gauss-Jordan elimination in 2 x 2 pivot blocks, one per JFET
// (gauss_jordan_blocks), or from pivoted factors where a pivot block is not safely
// invertible or a multiplier grows above 1e4 (pivoted_m). The same damped Newton, junction
// limiting, acceptance (the bound |M| t itself), correction and warm start as
// solve_general; what is not settled in wide_inline_iterations iterations, or not finite
// where the step may not be halved, goes to solve_general<K> from where it stopped
// (wide_rest).
namespace {
template <int K>
struct wide_dims {
  static constexpr int NP = 2 * K, NI = 3 * K, R = (NP + 3) / 4, P = 4 * R;
};
// The lanes of packet r that hold one of NP rows (all four but in the last packet of a
// column of 6 or 10 rows).
template <int NP>
__attribute__((target("avx2,fma"), always_inline)) inline __m256i rows_mask(int r) noexcept {
  const long long a = 4 * r < NP ? -1 : 0, b = 4 * r + 1 < NP ? -1 : 0, c = 4 * r + 2 < NP ? -1 : 0,
                  d = 4 * r + 3 < NP ? -1 : 0;
  return _mm256_setr_epi64x(a, b, c, d);
}
// Packet r of the unit column e_row.
__attribute__((target("avx2,fma"), always_inline)) inline __m256d unit_packet(int row, int r) noexcept {
  const int l = row - 4 * r;
  return _mm256_setr_pd(l == 0 ? 1.0 : 0.0, l == 1 ? 1.0 : 0.0, l == 2 ? 1.0 : 0.0, l == 3 ? 1.0 : 0.0);
}
// Packet r of the column with x0, x1 in rows s, s + 1 and 0 elsewhere.
__attribute__((target("avx2,fma"), always_inline)) inline __m256d pivot_packet(int s, int r, double x0, double x1) noexcept {
  const int l = s - 4 * r;
  return _mm256_setr_pd(l == 0 ? x0 : l == -1 ? x1 : 0.0, l == 1 ? x0 : l == 0 ? x1 : 0.0, l == 2 ? x0 : l == 1 ? x1 : 0.0,
                        l == 3 ? x0 : l == 2 ? x1 : 0.0);
}
template <int NP>
__attribute__((target("avx2,fma"), always_inline)) inline __m256d load_rows(const double* x, int r) noexcept {
  if (4 * r + 4 <= NP) return _mm256_loadu_pd(x + 4 * r);
  return _mm256_maskload_pd(x + 4 * r, rows_mask<NP>(r));
}
template <int NP>
__attribute__((target("avx2,fma"), always_inline)) inline void store_rows(double* x, int r, __m256d v) noexcept {
  if (4 * r + 4 <= NP) return _mm256_storeu_pd(x + 4 * r, v);
  _mm256_maskstore_pd(x + 4 * r, rows_mask<NP>(r), v);
}

// M = A^-1 in place, A (NP x NP, column-major, column stride P, rows NP..P-1 zero) by
// Gauss-Jordan elimination without interchanges in 2 x 2 pivot blocks, one per JFET
// (Golub & Van Loan, Matrix Computations, 4th ed., 1.2 and 3.2.11, from memory): at pivot
// block s, Pi = A_ss^-1 (invert_2x2: false where it is not safely invertible alone), then
// A_sc <- Pi A_sc, A_ic <- A_ic - A_is Pi A_sc, A_is <- -A_is Pi, A_ss <- Pi (i, c not s).
// Each column is updated as a whole by G = A_:s - E_s (E_s the unit columns of the block)
// with u = Pi A_sc: A_:c - G u leaves u in the pivot rows and the update elsewhere, and the
// pivot columns become E_s - G Pi. false also where a multiplier (an entry of -A_is Pi)
// grew above 1e4, as block_factor_n.
template <int K>
__attribute__((target("avx2,fma"), always_inline)) inline bool gauss_jordan_blocks(double* a) noexcept {
  using D = wide_dims<K>;
  constexpr int NP = D::NP, R = D::R, P = D::P;
  #pragma GCC unroll 16
  for (int b = 0; b < K; ++b) {
    const int s = 2 * b;
    double* cs0 = a + s * P;
    double* cs1 = a + (s + 1) * P;
    double pi[4];
    if (!invert_2x2(cs0[s], cs0[s + 1], cs1[s], cs1[s + 1], pi)) return false;
    // (Every write below a whole packet: a packet loaded after a scalar store into it
    // waits for the store instead of taking it forwarded, on the step's chain.)
    __m256d g0[R], g1[R];
    #pragma GCC unroll 16
    for (int r = 0; r < R; ++r) {
      g0[r] = _mm256_sub_pd(_mm256_load_pd(cs0 + 4 * r), unit_packet(s, r));
      g1[r] = _mm256_sub_pd(_mm256_load_pd(cs1 + 4 * r), unit_packet(s + 1, r));
    }
    #pragma GCC unroll 16
    for (int c = 0; c < NP; ++c) {
      if (c == s || c == s + 1) continue;
      double* cc = a + c * P;
      const double a0 = cc[s], a1 = cc[s + 1];
      const __m256d u0 = _mm256_set1_pd(pi[0] * a0 + pi[2] * a1), u1 = _mm256_set1_pd(pi[1] * a0 + pi[3] * a1);
      #pragma GCC unroll 16
      for (int r = 0; r < R; ++r)
        _mm256_store_pd(cc + 4 * r, _mm256_fnmadd_pd(g1[r], u1, _mm256_fnmadd_pd(g0[r], u0, _mm256_load_pd(cc + 4 * r))));
    }
    const __m256d p0 = _mm256_set1_pd(pi[0]), p1 = _mm256_set1_pd(pi[1]), p2 = _mm256_set1_pd(pi[2]),
                  p3 = _mm256_set1_pd(pi[3]);
    __m256d grow = _mm256_setzero_pd();
    #pragma GCC unroll 16
    for (int r = 0; r < R; ++r) {
      const __m256d n0 = _mm256_fmadd_pd(g1[r], p1, _mm256_mul_pd(g0[r], p0));
      const __m256d n1 = _mm256_fmadd_pd(g1[r], p3, _mm256_mul_pd(g0[r], p2));
      // The multipliers: every row but the pivot rows (there G Pi is Pi - I; they take
      // Pi itself).
      const long long l = 4 * r;
      const __m256d keep = _mm256_castsi256_pd(_mm256_setr_epi64x(
          l == s || l == s + 1 ? 0 : -1, l + 1 == s || l + 1 == s + 1 ? 0 : -1, l + 2 == s || l + 2 == s + 1 ? 0 : -1,
          l + 3 == s || l + 3 == s + 1 ? 0 : -1));
      _mm256_store_pd(cs0 + 4 * r,
                      _mm256_blendv_pd(pivot_packet(s, r, pi[0], pi[1]), _mm256_sub_pd(_mm256_setzero_pd(), n0), keep));
      _mm256_store_pd(cs1 + 4 * r,
                      _mm256_blendv_pd(pivot_packet(s, r, pi[2], pi[3]), _mm256_sub_pd(_mm256_setzero_pd(), n1), keep));
      grow = _mm256_max_pd(_mm256_and_pd(keep, _mm256_max_pd(abs4(n0), abs4(n1))), grow);
    }
    // (max_pd returns its second operand where one is NaN: a NaN multiplier is not caught
    // here, and the step or the bound it makes is not finite, which the loop tests.)
    if (!(hmax_abs(grow) <= 1e4)) return false;
  }
  return true;
}

}  // namespace

namespace {
// process_n's devices in lanes, one JFET a lane (four a register; the lanes past k a
// device that conducts nothing: beta = 0, is = 0, its junctions always taken as -is): the
// constants of detail::device_consts as columns of lanes, the same equations as
// detail::evaluate_ports / remainders_of (dk_device.hpp, dk_acceptance.hpp) on all JFETs
// at once, the junction exponentials on the lanes that need one by the scalar function.
// The port voltages (vgs0, vds0, vgs1, vds1, ...) of packets a and b as vgs and vds of
// JFETs 0-3 of the two packets.
__attribute__((target("avx2,fma"), always_inline)) inline void lanes_of(__m256d a, __m256d b, __m256d& gs,
                                                                        __m256d& ds) noexcept {
  gs = _mm256_permute4x64_pd(_mm256_unpacklo_pd(a, b), 0xD8);
  ds = _mm256_permute4x64_pd(_mm256_unpackhi_pd(a, b), 0xD8);
}
struct lane_currents {
  __m256d igs, igd, id, ggs, ggd, gm, gds;
};
// forward_channel (dk_device.hpp) on lanes: f, d f / d g, d f / d w at (g, w), w >= 0.
__attribute__((target("avx2,fma"), always_inline)) inline void channel_lanes(const double* c, __m256d g, __m256d w,
                                                                             __m256d& f, __m256d& fg,
                                                                             __m256d& fw) noexcept {
  const __m256d beta = _mm256_load_pd(c + 4 * lane_consts::beta), lambda = _mm256_load_pd(c + 4 * lane_consts::lambda);
  const __m256d vgst = _mm256_sub_pd(g, _mm256_load_pd(c + 4 * lane_consts::vto));
  const __m256d on = _mm256_cmp_pd(vgst, _mm256_setzero_pd(), _CMP_GT_OQ);
  const __m256d clm = _mm256_add_pd(_mm256_set1_pd(1.0), _mm256_mul_pd(lambda, w));
  const __m256d tri = _mm256_cmp_pd(w, vgst, _CMP_LT_OQ);
  const __m256d two_beta = _mm256_mul_pd(_mm256_set1_pd(2.0), beta);
  const __m256d core = _mm256_mul_pd(w, _mm256_sub_pd(_mm256_mul_pd(_mm256_set1_pd(2.0), vgst), w));
  const __m256d ft = _mm256_mul_pd(_mm256_mul_pd(beta, core), clm);
  const __m256d fs = _mm256_mul_pd(_mm256_mul_pd(_mm256_mul_pd(beta, vgst), vgst), clm);
  const __m256d gt = _mm256_mul_pd(_mm256_mul_pd(two_beta, w), clm);
  const __m256d gsat = _mm256_mul_pd(_mm256_mul_pd(two_beta, vgst), clm);
  const __m256d wt = _mm256_mul_pd(
      beta, _mm256_add_pd(_mm256_mul_pd(_mm256_sub_pd(_mm256_mul_pd(_mm256_set1_pd(2.0), vgst),
                                                      _mm256_mul_pd(_mm256_set1_pd(2.0), w)),
                                        clm),
                          _mm256_mul_pd(core, lambda)));
  const __m256d ws = _mm256_mul_pd(_mm256_mul_pd(_mm256_mul_pd(beta, vgst), vgst), lambda);
  f = _mm256_and_pd(on, _mm256_blendv_pd(fs, ft, tri));
  fg = _mm256_and_pd(on, _mm256_blendv_pd(gsat, gt, tri));
  fw = _mm256_and_pd(on, _mm256_blendv_pd(ws, wt, tri));
}
// channel_current (dk_device.hpp) on lanes.
__attribute__((target("avx2,fma"), always_inline)) inline __m256d channel_current_lanes(const double* c, __m256d gs,
                                                                                        __m256d ds) noexcept {
  const __m256d inv = _mm256_cmp_pd(ds, _mm256_setzero_pd(), _CMP_LT_OQ);
  const __m256d g = _mm256_blendv_pd(gs, _mm256_sub_pd(gs, ds), inv);
  const __m256d w = _mm256_blendv_pd(ds, _mm256_sub_pd(_mm256_setzero_pd(), ds), inv);
  const __m256d beta = _mm256_load_pd(c + 4 * lane_consts::beta), lambda = _mm256_load_pd(c + 4 * lane_consts::lambda);
  const __m256d vgst = _mm256_sub_pd(g, _mm256_load_pd(c + 4 * lane_consts::vto));
  const __m256d on = _mm256_cmp_pd(vgst, _mm256_setzero_pd(), _CMP_GT_OQ);
  const __m256d clm = _mm256_add_pd(_mm256_set1_pd(1.0), _mm256_mul_pd(lambda, w));
  const __m256d tri = _mm256_cmp_pd(w, vgst, _CMP_LT_OQ);
  const __m256d ft =
      _mm256_mul_pd(_mm256_mul_pd(beta, _mm256_mul_pd(w, _mm256_sub_pd(_mm256_mul_pd(_mm256_set1_pd(2.0), vgst), w))), clm);
  const __m256d fs = _mm256_mul_pd(_mm256_mul_pd(_mm256_mul_pd(beta, vgst), vgst), clm);
  const __m256d f = _mm256_and_pd(on, _mm256_blendv_pd(fs, ft, tri));
  return _mm256_blendv_pd(f, _mm256_sub_pd(_mm256_setzero_pd(), f), inv);
}
// evaluate_ports on lanes; `dev` the JFETs' scalar constants (for the lanes whose junction
// needs its exponential), `first` the JFET of lane 0, `k` the JFETs in all.
__attribute__((target("avx2,fma"), always_inline)) inline lane_currents evaluate_lanes(
    const double* c, const detail::device_consts* dev, int first, int k, __m256d gs, __m256d ds) noexcept {
  lane_currents o;
  const __m256d inv_nvt = _mm256_load_pd(c + 4 * lane_consts::inv_nvt), skip = _mm256_load_pd(c + 4 * lane_consts::skip_arg);
  const __m256d is = _mm256_load_pd(c + 4 * lane_consts::is);
  const __m256d gd = _mm256_sub_pd(gs, ds);
  const __m256d need_gs = _mm256_cmp_pd(_mm256_mul_pd(gs, inv_nvt), skip, _CMP_NLT_UQ);
  const __m256d need_gd = _mm256_cmp_pd(_mm256_mul_pd(gd, inv_nvt), skip, _CMP_NLT_UQ);
  o.igs = o.igd = _mm256_sub_pd(_mm256_setzero_pd(), is);
  o.ggs = o.ggd = _mm256_setzero_pd();
  const int m_gs = _mm256_movemask_pd(need_gs), m_gd = _mm256_movemask_pd(need_gd);
  if ((m_gs | m_gd) != 0) [[unlikely]] {
    alignas(32) double vg[4], vd[4], ig[4], gg[4], id[4], gdd[4];
    _mm256_store_pd(vg, gs);
    _mm256_store_pd(vd, gd);
    _mm256_store_pd(ig, o.igs);
    _mm256_store_pd(gg, o.ggs);
    _mm256_store_pd(id, o.igd);
    _mm256_store_pd(gdd, o.ggd);
    for (int l = 0; l < 4 && first + l < k; ++l) {
      if (m_gs >> l & 1) detail::junction(dev[first + l], vg[l], ig[l], gg[l]);
      if (m_gd >> l & 1) detail::junction(dev[first + l], vd[l], id[l], gdd[l]);
    }
    o.igs = _mm256_load_pd(ig);
    o.ggs = _mm256_load_pd(gg);
    o.igd = _mm256_load_pd(id);
    o.ggd = _mm256_load_pd(gdd);
  }
  o.igs = _mm256_sub_pd(o.igs, _mm256_load_pd(c + 4 * lane_consts::leak));
  const __m256d inv = _mm256_cmp_pd(ds, _mm256_setzero_pd(), _CMP_LT_OQ);
  const __m256d g = _mm256_blendv_pd(gs, gd, inv);
  const __m256d w = _mm256_blendv_pd(ds, _mm256_sub_pd(_mm256_setzero_pd(), ds), inv);
  __m256d f, fg, fw;
  channel_lanes(c, g, w, f, fg, fw);
  o.id = _mm256_blendv_pd(f, _mm256_sub_pd(_mm256_setzero_pd(), f), inv);
  o.gm = _mm256_blendv_pd(fg, _mm256_sub_pd(_mm256_setzero_pd(), fg), inv);
  o.gds = _mm256_blendv_pd(fw, _mm256_add_pd(fg, fw), inv);
  return o;
}
struct lane_remainders {
  __m256d rem[3], mag[3], id_lin, id_rem;  // id_rem: the channel's remainder, signed
};
// remainders_of (dk_acceptance.hpp) on lanes: the step (d0, d1) to (vn0, vn1).
__attribute__((target("avx2,fma"), always_inline)) inline lane_remainders remainders_lanes(const double* c,
                                                                                           const lane_currents& o,
                                                                                           __m256d vn0, __m256d vn1,
                                                                                           __m256d d0,
                                                                                           __m256d d1) noexcept {
  lane_remainders s;
  const __m256d dgd = _mm256_sub_pd(d0, d1);
  const __m256d kj = _mm256_load_pd(c + 4 * lane_consts::k_junction);
  s.rem[0] = _mm256_mul_pd(_mm256_mul_pd(_mm256_mul_pd(kj, o.ggs), d0), d0);
  s.rem[1] = _mm256_mul_pd(_mm256_mul_pd(_mm256_mul_pd(kj, o.ggd), dgd), dgd);
  const __m256d id_new = channel_current_lanes(c, vn0, vn1);
  const __m256d gm_d = _mm256_mul_pd(o.gm, d0), gds_d = _mm256_mul_pd(o.gds, d1);
  s.id_lin = _mm256_add_pd(gm_d, gds_d);
  const __m256d k = _mm256_set1_pd(detail::acceptance_round_k);
  s.id_rem = _mm256_sub_pd(_mm256_sub_pd(id_new, o.id), s.id_lin);
  s.rem[2] = _mm256_add_pd(
      abs4(s.id_rem),
      _mm256_mul_pd(k, _mm256_add_pd(_mm256_add_pd(abs4(id_new), abs4(o.id)), _mm256_add_pd(abs4(gm_d), abs4(gds_d)))));
  s.mag[0] = _mm256_add_pd(abs4(o.igs), abs4(_mm256_mul_pd(o.ggs, d0)));
  s.mag[1] = _mm256_add_pd(abs4(o.igd), abs4(_mm256_mul_pd(o.ggd, dgd)));
  s.mag[2] = _mm256_add_pd(abs4(o.id), abs4(s.id_lin));
  return s;
}
}  // namespace

namespace {
// acc += M x (|M| x where Abs) for an NP x NP M in columns of P rows, in two sums of half the
// columns each, added last: the latency of the chain of fused multiply-adds, not their
// count, sets the time of process_n's sample.
template <int K, bool Abs>
__attribute__((target("avx2,fma"), always_inline)) inline void add_product(const double* m, const double* x,
                                                                           __m256d* acc) noexcept {
  constexpr int NP = wide_dims<K>::NP, R = wide_dims<K>::R, P = wide_dims<K>::P;
  __m256d b[R];
#pragma GCC unroll 16
  for (int r = 0; r < R; ++r) b[r] = _mm256_setzero_pd();
#pragma GCC unroll 16
  for (int c = 0; c < NP; c += 2) {
    const __m256d x0 = _mm256_broadcast_sd(x + c), x1 = _mm256_broadcast_sd(x + c + 1);
#pragma GCC unroll 16
    for (int r = 0; r < R; ++r) {
      const __m256d m0 = _mm256_load_pd(m + c * P + 4 * r), m1 = _mm256_load_pd(m + (c + 1) * P + 4 * r);
      acc[r] = _mm256_fmadd_pd(Abs ? abs4(m0) : m0, x0, acc[r]);
      b[r] = _mm256_fmadd_pd(Abs ? abs4(m1) : m1, x1, b[r]);
    }
  }
#pragma GCC unroll 16
  for (int r = 0; r < R; ++r) acc[r] = _mm256_add_pd(acc[r], b[r]);
}

// out = M x, as add_product.
template <int K>
__attribute__((target("avx2,fma"), always_inline)) inline void product_of(const double* m, const double* x,
                                                                          __m256d* out) noexcept {
#pragma GCC unroll 16
  for (int r = 0; r < wide_dims<K>::R; ++r) out[r] = _mm256_setzero_pd();
  add_product<K, false>(m, x, out);
}

// The largest entry of |M| t (the acceptance's bound on the distance to the solution).
template <int K>
__attribute__((target("avx2,fma"), always_inline)) inline double abs_product_max(const double* m,
                                                                                 const double* t) noexcept {
  constexpr int R = wide_dims<K>::R;
  __m256d e[R];
#pragma GCC unroll 16
  for (int r = 0; r < R; ++r) e[r] = _mm256_setzero_pd();
  add_product<K, true>(m, t, e);
  __m256d emax = e[0];
#pragma GCC unroll 16
  for (int r = 1; r < R; ++r) emax = _mm256_max_pd(emax, e[r]);
  return hmax_abs(emax);
}

// I - F Jf into `a` (NP x NP, columns of P rows) by column pairs, from F in columns of P rows
// and the JFETs' ggs, ggd, gm and gds as rows (one entry a JFET).
template <int K>
__attribute__((target("avx2,fma"), always_inline)) inline void one_minus_f_jf_wide(const double* f, const double* ggs,
                                                                                   const double* ggd, const double* gm,
                                                                                   const double* gds,
                                                                                   double* a) noexcept {
  constexpr int R = wide_dims<K>::R, P = wide_dims<K>::P;
#pragma GCC unroll 16
  for (int j = 0; j < K; ++j) {
    const double* fj = f + 3 * j * P;
    const __m256d bs = _mm256_broadcast_sd(ggs + j), bd = _mm256_broadcast_sd(ggd + j),
                  bm = _mm256_broadcast_sd(gm + j), bw = _mm256_broadcast_sd(gds + j);
#pragma GCC unroll 16
    for (int r = 0; r < R; ++r) {
      const __m256d f0 = _mm256_load_pd(fj + 4 * r), f1 = _mm256_load_pd(fj + P + 4 * r),
                    f2 = _mm256_load_pd(fj + 2 * P + 4 * r);
      const __m256d j0 = _mm256_fmadd_pd(f2, bm, _mm256_fmadd_pd(f1, bd, _mm256_mul_pd(f0, bs)));
      const __m256d j1 = _mm256_fnmadd_pd(f1, bd, _mm256_mul_pd(f2, bw));
      _mm256_store_pd(a + 2 * j * P + 4 * r, _mm256_sub_pd(unit_packet(2 * j, r), j0));
      _mm256_store_pd(a + (2 * j + 1) * P + 4 * r, _mm256_sub_pd(unit_packet(2 * j + 1, r), j1));
    }
  }
}

// M = (I - F Jf)^-1 into `a` (as gauss_jordan_blocks leaves it) with the gate junctions
// left out of Jf (process_n leaves out the off and the slight ones, slight_junction, and adds
// the significant ones after, junction_update). Without the junctions' rows,
// I - F Jf = I - Fc G, with Fc F's K channel columns (NP x K) and G (K x NP) the channels'
// derivatives (row j: gm_j at column 2j, gds_j at 2j + 1). By the Woodbury identity
// (Golub & Van Loan, Matrix Computations, 4th ed., 2.1.4, from memory)
//   M = I + Fc S^-1 G,  S = I - G Fc (K x K),
// so column 2j of M is e_2j + gm_j Q_j and column 2j + 1 is e_2j+1 + gds_j Q_j, with
// Q = Fc S^-1: a K x K elimination where gauss_jordan_blocks eliminates 2K x 2K. S^-1 by
// Gauss-Jordan without interchanges in 1 x 1 pivots, rows in lanes (JFET j in lane j), the
// same scheme as gauss_jordan_blocks. det(S) = det(I - F Jf) (Sylvester's determinant
// identity): the one is singular where the other is. false (a not written) where a pivot
// is not safely nonzero: S's diagonal entry formed with cancellation (|S_jj| not above 1e-3
// of 1 + |gm_j F| + |gds_j F|, its two terms), the pivot after the elimination not above
// 1e-3 of that entry, or a multiplier above 1e4; the caller then eliminates I - F Jf.
// f: F in columns of P rows; fch: storage::fch; cl: the devices at the iterate in lanes;
// gmv, gdsv: their gm and gds as rows of lanes in memory.
template <int K>
__attribute__((target("avx2,fma"), always_inline)) inline bool channel_m(const double* f, const double* fch,
                                                                         const lane_currents* cl, const double* gmv,
                                                                         const double* gdsv, double* a) noexcept {
  using D = wide_dims<K>;
  constexpr int R = D::R, P = D::P, L = (K + 3) / 4, C = 4 * L;
  int bad = 0;
#pragma GCC unroll 4
  for (int l = 0; l < L; ++l) {
    const __m256d t0 = _mm256_mul_pd(cl[l].gm, _mm256_load_pd(fch + 4 * (2 * K * L + l))),
                  t1 = _mm256_mul_pd(cl[l].gds, _mm256_load_pd(fch + 4 * ((2 * K + 1) * L + l)));
    const __m256d one = _mm256_set1_pd(1.0);
    const __m256d d = _mm256_sub_pd(_mm256_sub_pd(one, t0), t1);
    const __m256d mag = _mm256_add_pd(one, _mm256_add_pd(abs4(t0), abs4(t1)));
    bad |= _mm256_movemask_pd(_mm256_cmp_pd(abs4(d), _mm256_mul_pd(_mm256_set1_pd(1e-3), mag), _CMP_NGT_UQ));
  }
  if (bad != 0) return false;
  // S in columns of C rows (lanes past K zero), in memory: its pivots are read as scalars.
  alignas(32) double s[K * C];
#pragma GCC unroll 16
  for (int c = 0; c < K; ++c)
#pragma GCC unroll 4
    for (int l = 0; l < L; ++l) {
      const __m256d fe = _mm256_load_pd(fch + 4 * (2 * c * L + l)), fo = _mm256_load_pd(fch + 4 * ((2 * c + 1) * L + l));
      _mm256_store_pd(s + c * C + 4 * l,
                      _mm256_sub_pd(unit_packet(c, l), _mm256_fmadd_pd(cl[l].gds, fo, _mm256_mul_pd(cl[l].gm, fe))));
    }
  double diag[K];
#pragma GCC unroll 16
  for (int b = 0; b < K; ++b) diag[b] = s[b * C + b];
#pragma GCC unroll 16
  for (int b = 0; b < K; ++b) {
    double* cs = s + b * C;
    const double piv = cs[b];
    if (!(std::fabs(piv) > 1e-3 * std::fabs(diag[b]))) return false;
    const double pi = 1.0 / piv;
    __m256d g[L];
#pragma GCC unroll 4
    for (int l = 0; l < L; ++l) g[l] = _mm256_sub_pd(_mm256_load_pd(cs + 4 * l), unit_packet(b, l));
#pragma GCC unroll 16
    for (int c = 0; c < K; ++c) {
      if (c == b) continue;
      double* cc = s + c * C;
      const __m256d u = _mm256_set1_pd(pi * cc[b]);
#pragma GCC unroll 4
      for (int l = 0; l < L; ++l) _mm256_store_pd(cc + 4 * l, _mm256_fnmadd_pd(g[l], u, _mm256_load_pd(cc + 4 * l)));
    }
    const __m256d pv = _mm256_set1_pd(pi);
    __m256d grow = _mm256_setzero_pd();
#pragma GCC unroll 4
    for (int l = 0; l < L; ++l) {
      const __m256d n = _mm256_mul_pd(g[l], pv);
      const long long q = 4 * l;
      const __m256d keep = _mm256_castsi256_pd(
          _mm256_setr_epi64x(q == b ? 0 : -1, q + 1 == b ? 0 : -1, q + 2 == b ? 0 : -1, q + 3 == b ? 0 : -1));
      _mm256_store_pd(cs + 4 * l,
                      _mm256_blendv_pd(_mm256_mul_pd(unit_packet(b, l), pv), _mm256_sub_pd(_mm256_setzero_pd(), n), keep));
      grow = _mm256_max_pd(_mm256_and_pd(keep, abs4(n)), grow);
    }
    if (!(hmax_abs(grow) <= 1e4)) return false;
  }
  // Q_j = Fc (S^-1)_:j, then M's columns 2j and 2j + 1.
#pragma GCC unroll 16
  for (int j = 0; j < K; ++j) {
    __m256d q[R];
#pragma GCC unroll 16
    for (int r = 0; r < R; ++r) q[r] = _mm256_setzero_pd();
#pragma GCC unroll 16
    for (int c = 0; c < K; ++c) {
      const __m256d w = _mm256_broadcast_sd(s + j * C + c);
      const double* fc = f + (3 * c + 2) * P;
#pragma GCC unroll 16
      for (int r = 0; r < R; ++r) q[r] = _mm256_fmadd_pd(_mm256_load_pd(fc + 4 * r), w, q[r]);
    }
    const __m256d gj = _mm256_broadcast_sd(gmv + j), dj = _mm256_broadcast_sd(gdsv + j);
#pragma GCC unroll 16
    for (int r = 0; r < R; ++r) {
      _mm256_store_pd(a + 2 * j * P + 4 * r, _mm256_fmadd_pd(q[r], gj, unit_packet(2 * j, r)));
      _mm256_store_pd(a + (2 * j + 1) * P + 4 * r, _mm256_fmadd_pd(q[r], dj, unit_packet(2 * j + 1, r)));
    }
  }
  return true;
}

// M = (J - u v')^-1 from M = J^-1 in place (Sherman & Morrison; Golub & Van Loan, Matrix
// Computations, 4th ed., 2.1.4, from memory): M + (M u) (v' M) / (1 - v' M u), for a gate
// junction of JFET j that channel_m left out, u its current's column of F and v' its row of
// Jf: g e_2j' (gate-source) or g (e_2j - e_2j+1)' (gate-drain, `drain`), g its conductance.
// false (M left as it may be half-updated: the caller eliminates I - F Jf) where the
// denominator 1 - x is formed with cancellation: |1 - x| not above 1e-3 of 1 + |x|.
template <int K>
__attribute__((target("avx2,fma"), always_inline)) inline bool junction_update(double* a, const double* f, int j,
                                                                               bool drain, double g) noexcept {
  using D = wide_dims<K>;
  constexpr int NP = D::NP, R = D::R, P = D::P;
  const double* u = f + (3 * j + (drain ? 1 : 0)) * P;
  __m256d w[R];
  product_of<K>(a, u, w);
  alignas(32) double wv[P];
#pragma GCC unroll 16
  for (int r = 0; r < R; ++r) _mm256_store_pd(wv + 4 * r, w[r]);
  const double x = g * (drain ? wv[2 * j] - wv[2 * j + 1] : wv[2 * j]);
  const double den = 1.0 - x;
  if (!(std::fabs(den) > 1e-3 * (1.0 + std::fabs(x)))) return false;
  const double sc = g / den;
#pragma GCC unroll 16
  for (int c = 0; c < NP; ++c) {
    double* mc = a + c * P;
    const __m256d z = _mm256_set1_pd(sc * (drain ? mc[2 * j] - mc[2 * j + 1] : mc[2 * j]));
#pragma GCC unroll 16
    for (int r = 0; r < R; ++r) _mm256_store_pd(mc + 4 * r, _mm256_fmadd_pd(w[r], z, _mm256_load_pd(mc + 4 * r)));
  }
  return true;
}

}  // namespace

// acc += sum_j m_j x_j over the K JFETs' three current columns of m (P rows a column), x0,
// x1, x2 the gate-source, gate-drain and channel rows of lanes; in three sums (one per
// current: the latency of the chain, not the count, sets the time), added last.
template <int K>
__attribute__((target("avx2,fma"), always_inline)) inline void by_currents(const double* m, const double* x0,
                                                                           const double* x1, const double* x2,
                                                                           __m256d* acc) noexcept {
  constexpr int R = wide_dims<K>::R, P = wide_dims<K>::P;
  __m256d a1[R], a2[R];
#pragma GCC unroll 16
  for (int r = 0; r < R; ++r) a1[r] = a2[r] = _mm256_setzero_pd();
#pragma GCC unroll 16
  for (int j = 0; j < K; ++j) {
    const double* mj = m + 3 * j * P;
    const __m256d b0 = _mm256_broadcast_sd(x0 + j), b1 = _mm256_broadcast_sd(x1 + j), b2 = _mm256_broadcast_sd(x2 + j);
#pragma GCC unroll 16
    for (int r = 0; r < R; ++r) {
      acc[r] = _mm256_fmadd_pd(_mm256_load_pd(mj + 4 * r), b0, acc[r]);
      a1[r] = _mm256_fmadd_pd(_mm256_load_pd(mj + P + 4 * r), b1, a1[r]);
      a2[r] = _mm256_fmadd_pd(_mm256_load_pd(mj + 2 * P + 4 * r), b2, a2[r]);
    }
  }
#pragma GCC unroll 16
  for (int r = 0; r < R; ++r) acc[r] = _mm256_add_pd(acc[r], _mm256_add_pd(a1[r], a2[r]));
}

// One more step of K JFETs from vn = v + d with the same M, on lanes: e = M F q, q the
// currents' remainders at vn themselves, the junctions' from their series
// (detail::junction_remainder; a junction taken as -is has none) and, for a rescue, the
// channels' exactly (id_rem, from their currents at vn). The point vc = vn + e, with the
// currents i(v) + Jf (d + e) + q, is stored in `out` where the bound on the residual there,
// |F| R' + `excess` (R' as detail::correction_remainders, the channels' from their currents
// at vc), and |M| times it are below tol_v. False: not taken.
// - Rescue (dk_options::rescue_steps): where the step d missed the acceptance.
// - Not (the correction of an accepted point, detail::correction_floor says why): the
//   junctions only, and only where their part of the bound, |M| |F| R_junctions (rem_gs,
//   rem_gd: their remainder bounds over d), is above correction_floor tol_v.
// cl, gs, ds: the currents and port voltages at v, dgs, dds the step, in lanes; rem_gs,
// rem_gd, id_lin and id_rem rows of lanes (process_n's sr[0], sr[1], sr[6], sr[7]).
template <int K, bool Rescue>
__attribute__((target("avx2,fma"), always_inline)) inline bool remainder_step(
    const double* lc, const lane_currents* cl, const __m256d* gs, const __m256d* ds, const __m256d* dgs,
    const __m256d* dds, const double* rem_gs, const double* rem_gd, const double* id_lin, const double* id_rem,
    const __m256d* vn, const double* mt, const double* f, const double* fa, const double* excess, double tol,
    const __m256d* off_gs, const __m256d* off_gd, pair_out out) noexcept {
  using D = wide_dims<K>;
  constexpr int NP = D::NP, R = D::R, P = D::P, L = (K + 3) / 4, LC = lane_consts::count;
  // The junctions that M leaves out (off_gs, off_gd: all-ones lanes; channel_m): their
  // linear changes, g d over d and g e over e, are remainders too (in F q and in R').
  if constexpr (!Rescue) {
    alignas(32) double none[4 * L] = {};
    alignas(32) double tj[P];
    __m256d a[R];
#pragma GCC unroll 16
    for (int r = 0; r < R; ++r) a[r] = _mm256_setzero_pd();
    by_currents<K>(fa, rem_gs, rem_gd, none, a);
#pragma GCC unroll 16
    for (int r = 0; r < R; ++r) _mm256_store_pd(tj + 4 * r, a[r]);
    if (!(abs_product_max<K>(mt, tj) > detail::correction_floor * tol)) return false;
  }
  // The junctions' series need their arguments below the exponential's limit (as
  // detail::correction_applies).
  int bad = 0;
  alignas(32) double q[3][4 * L], qf[2][4 * L];
#pragma GCC unroll 4
  for (int l = 0; l < L; ++l) {
    const double* c = lc + 4 * LC * l;
    const __m256d inv_nvt = _mm256_load_pd(c + 4 * lane_consts::inv_nvt);
    const __m256d lim = _mm256_set1_pd(detail::junction_exp_limit - 1.0);
    bad |= _mm256_movemask_pd(
        _mm256_or_pd(_mm256_cmp_pd(_mm256_mul_pd(gs[l], inv_nvt), lim, _CMP_NLT_UQ),
                     _mm256_cmp_pd(_mm256_mul_pd(_mm256_sub_pd(gs[l], ds[l]), inv_nvt), lim, _CMP_NLT_UQ)));
    // g d x (1/2 + x (1/6 + x (1/24 + x / 120))), x = d / nVt: detail::junction_remainder.
    auto series = [&](__m256d g, __m256d d) __attribute__((target("avx2,fma"), always_inline)) {
      const __m256d x = _mm256_mul_pd(d, inv_nvt);
      __m256d h = _mm256_fmadd_pd(x, _mm256_set1_pd(1.0 / 120.0), _mm256_set1_pd(1.0 / 24.0));
      h = _mm256_fmadd_pd(x, h, _mm256_set1_pd(1.0 / 6.0));
      h = _mm256_fmadd_pd(x, h, _mm256_set1_pd(0.5));
      return _mm256_mul_pd(_mm256_mul_pd(g, d), _mm256_mul_pd(x, h));
    };
    const __m256d dgd = _mm256_sub_pd(dgs[l], dds[l]);
    const __m256d q0 = series(cl[l].ggs, dgs[l]), q1 = series(cl[l].ggd, dgd);
    _mm256_store_pd(q[0] + 4 * l, q0);
    _mm256_store_pd(q[1] + 4 * l, q1);
    _mm256_store_pd(qf[0] + 4 * l, _mm256_add_pd(q0, _mm256_and_pd(off_gs[l], _mm256_mul_pd(cl[l].ggs, dgs[l]))));
    _mm256_store_pd(qf[1] + 4 * l, _mm256_add_pd(q1, _mm256_and_pd(off_gd[l], _mm256_mul_pd(cl[l].ggd, dgd))));
    _mm256_store_pd(q[2] + 4 * l, Rescue ? _mm256_load_pd(id_rem + 4 * l) : _mm256_setzero_pd());
  }
  if (bad != 0) return false;
  // e = M F q.
  alignas(32) double fq[P];
  {
    __m256d a[R];
#pragma GCC unroll 16
    for (int r = 0; r < R; ++r) a[r] = _mm256_setzero_pd();
    by_currents<K>(f, qf[0], qf[1], q[2], a);
#pragma GCC unroll 16
    for (int r = 0; r < R; ++r) _mm256_store_pd(fq + 4 * r, a[r]);
  }
  __m256d e[R], vc[R];
#pragma GCC unroll 16
  for (int r = 0; r < R; ++r) e[r] = _mm256_setzero_pd();
  add_product<K, false>(mt, fq, e);
#pragma GCC unroll 16
  for (int r = 0; r < R; ++r) vc[r] = _mm256_add_pd(vn[r], e[r]);
  // R' (detail::correction_remainders) on the lanes; e small enough for its junction bound.
  alignas(32) double rr[3][4 * L], cur_out[3][4 * L];
  int large = 0;
#pragma GCC unroll 4
  for (int l = 0; l < L; ++l) {
    const double* c = lc + 4 * LC * l;
    const __m256d inv_nvt = _mm256_load_pd(c + 4 * lane_consts::inv_nvt), small = _mm256_load_pd(c + 4 * lane_consts::small);
    __m256d egs, eds, cgs, cds;
    lanes_of(e[2 * l], 2 * l + 1 < R ? e[2 * l + 1] : _mm256_setzero_pd(), egs, eds);
    lanes_of(vc[2 * l], 2 * l + 1 < R ? vc[2 * l + 1] : _mm256_setzero_pd(), cgs, cds);
    const __m256d egd = _mm256_sub_pd(egs, eds), dgd = _mm256_sub_pd(dgs[l], dds[l]);
    large |= _mm256_movemask_pd(_mm256_or_pd(_mm256_cmp_pd(abs4(egs), small, _CMP_NLE_UQ),
                                             _mm256_cmp_pd(abs4(egd), small, _CMP_NLE_UQ)));
    const __m256d k1 = _mm256_set1_pd(1.0101), k2 = _mm256_set1_pd(0.5101);
    const __m256d lin_gs = _mm256_mul_pd(cl[l].ggs, abs4(egs)), lin_gd = _mm256_mul_pd(cl[l].ggd, abs4(egd));
    _mm256_store_pd(rr[0] + 4 * l,
                    _mm256_fmadd_pd(lin_gs,
                                    _mm256_mul_pd(inv_nvt, _mm256_fmadd_pd(k1, abs4(dgs[l]), _mm256_mul_pd(k2, abs4(egs)))),
                                    _mm256_and_pd(off_gs[l], lin_gs)));
    _mm256_store_pd(rr[1] + 4 * l,
                    _mm256_fmadd_pd(lin_gd,
                                    _mm256_mul_pd(inv_nvt, _mm256_fmadd_pd(k1, abs4(dgd), _mm256_mul_pd(k2, abs4(egd)))),
                                    _mm256_and_pd(off_gd[l], lin_gd)));
    const __m256d id_end =
        _mm256_add_pd(_mm256_add_pd(cl[l].id, _mm256_load_pd(id_lin + 4 * l)), _mm256_load_pd(q[2] + 4 * l));
    const __m256d id_c = channel_current_lanes(c, cgs, cds);
    const __m256d gm_e = _mm256_mul_pd(cl[l].gm, egs), gds_e = _mm256_mul_pd(cl[l].gds, eds);
    const __m256d lin = _mm256_add_pd(gm_e, gds_e);
    _mm256_store_pd(rr[2] + 4 * l,
                    _mm256_add_pd(abs4(_mm256_sub_pd(_mm256_sub_pd(id_c, id_end), lin)),
                                  _mm256_mul_pd(_mm256_set1_pd(detail::acceptance_round_k),
                                                _mm256_add_pd(_mm256_add_pd(abs4(id_c), abs4(id_end)),
                                                              _mm256_add_pd(abs4(gm_e), abs4(gds_e))))));
    // The currents at vc: i(v) + Jf (d + e) + q.
    _mm256_store_pd(cur_out[0] + 4 * l,
                    _mm256_add_pd(_mm256_fmadd_pd(cl[l].ggs, _mm256_add_pd(dgs[l], egs), cl[l].igs),
                                  _mm256_load_pd(q[0] + 4 * l)));
    _mm256_store_pd(cur_out[1] + 4 * l,
                    _mm256_add_pd(_mm256_fmadd_pd(cl[l].ggd, _mm256_add_pd(dgd, egd), cl[l].igd),
                                  _mm256_load_pd(q[1] + 4 * l)));
    _mm256_store_pd(cur_out[2] + 4 * l, _mm256_add_pd(id_end, lin));
  }
  if (large != 0) return false;
  // t = |F| R' + excess; then |M| t.
  alignas(32) double tv[P];
  __m256d tmax = _mm256_setzero_pd();
  {
    __m256d t[R];
#pragma GCC unroll 16
    for (int r = 0; r < R; ++r) t[r] = _mm256_load_pd(excess + 4 * r);
    by_currents<K>(fa, rr[0], rr[1], rr[2], t);
#pragma GCC unroll 16
    for (int r = 0; r < R; ++r) {
      _mm256_store_pd(tv + 4 * r, t[r]);
      tmax = _mm256_max_pd(tmax, t[r]);
    }
  }
  if (!(hmax_abs(tmax) <= tol) || !(abs_product_max<K>(mt, tv) <= tol)) return false;
#pragma GCC unroll 16
  for (int r = 0; r < R; ++r) store_rows<NP>(out.v, r, vc[r]);
#pragma GCC unroll 16
  for (int j = 0; j < K; ++j) {
    out.i[3 * j] = cur_out[0][j];
    out.i[3 * j + 1] = cur_out[1][j];
    out.i[3 * j + 2] = cur_out[2][j];
  }
  return true;
}

// The correction of an accepted point (remainder_step), out of line: it is rare.
template <int K>
__attribute__((target("avx2,fma"), noinline)) bool wide_correct(
    const double* lc, const lane_currents* cl, const __m256d* gs, const __m256d* ds, const __m256d* dgs,
    const __m256d* dds, const double* rem_gs, const double* rem_gd, const double* id_lin, const __m256d* vn,
    const double* mt, const double* f, const double* fa, const double* excess, double tol, const __m256d* off_gs,
    const __m256d* off_gd, pair_out out) noexcept {
  return remainder_step<K, false>(lc, cl, gs, ds, dgs, dds, rem_gs, rem_gd, id_lin, nullptr, vn, mt, f, fa, excess,
                                  tol, off_gs, off_gd, out);
}

// Confirm mode (dk_options::confirm) at the point vpt of K JFETs: the exact devices (no
// far-reverse skip) into kc, and whether the residual p - v + F i there is within tol_v
// plus each row's rounding allowance (al, up to detail::rounding_allowance_v).
template <int K>
__attribute__((target("avx2,fma"), noinline)) bool confirmed_at(const detail::device_consts* dev, const double* vpt,
                                                                const __m256d* p, const __m256d* al, const double* f,
                                                                double tol, detail::port_currents* kc) noexcept {
  using D = wide_dims<K>;
  constexpr int NP = D::NP, R = D::R, P = D::P;
  for (int j = 0; j < K; ++j) {
    detail::device_consts x = dev[j];
    x.skip_arg = detail::junction_deep_reverse;
    kc[j] = detail::evaluate_ports(x, vpt[2 * j], vpt[2 * j + 1]);
  }
  bool ok = true;
  for (int r = 0; r < R; ++r) {
    __m256d q = _mm256_sub_pd(p[r], load_rows<NP>(vpt, r));
    for (int j = 0; j < K; ++j) {
      const double* fj = f + 3 * j * P + 4 * r;
      q = _mm256_fmadd_pd(_mm256_load_pd(fj), _mm256_set1_pd(kc[j].igs_a), q);
      q = _mm256_fmadd_pd(_mm256_load_pd(fj + P), _mm256_set1_pd(kc[j].igd_a), q);
      q = _mm256_fmadd_pd(_mm256_load_pd(fj + 2 * P), _mm256_set1_pd(kc[j].id_a), q);
    }
    const __m256d lim =
        _mm256_add_pd(_mm256_set1_pd(tol), _mm256_min_pd(al[r], _mm256_set1_pd(detail::rounding_allowance_v)));
    ok = ok && _mm256_movemask_pd(_mm256_cmp_pd(abs4(q), lim, _CMP_LE_OQ)) == 15;
  }
  return ok;
}

// Where the inline iterations of process_n stopped, solve_general<K> (or the sub-steps)
// goes on; M of the point it accepts into the ring (ring_m_of). Its guess, an iterate or
// the warm start process_n has limited already, is not limited again.
#if defined(PINCHOFF_RUNTIME_SIZES)
template <int K>
constexpr int wide_general_k = 0;
#else
template <int K>
constexpr int wide_general_k = K;
#endif

template <int K>
__attribute__((noinline)) void general_solver::wide_rest(int& evals, bool attempt_failed) noexcept {
  port_set& trial = g_.trial();
  if (attempt_failed || !solve_general<wide_general_k<K>>(g_.p, g_.guess, nullptr, trial, evals))
    substep_general<wide_general_k<K>>(g_.p, trial, evals);
  ring_m_of((g_.head + 1) & 3);
}

template <int K>
__attribute__((target("avx2,fma"), always_inline)) inline double general_solver::process_n(double generator_v) noexcept {
  using D = wide_dims<K>;
  constexpr int NP = D::NP, NI = D::NI, R = D::R, P = D::P;
  storage& g = g_;
  const int ns = m_.states, rows = g.rows;
  double* __restrict x_in = in_.data();
  const double ug = start_wide_sample(generator_v);
  const double* f = g.fpad.data();
  const double* fa = g.fapad.data();
  double* pads = g.vpad.data();  // p_dc, e1, skip_t, the last point's v and p: P each
  __m256d p[R];
#pragma GCC unroll 16
  for (int r = 0; r < R; ++r)
    p[r] = _mm256_fmadd_pd(_mm256_load_pd(pads + P + 4 * r), _mm256_set1_pd(ug),
                           _mm256_add_pd(_mm256_load_pd(pads + 4 * r), _mm256_load_pd(pads + 5 * P + 4 * r)));

  // Warm start (as process_k): the last solution moved along the step of p by M at the
  // last three points, Adams-Bashforth weights, combined into one matrix at the end of the
  // last sample (g.mw, combine_warm: off this sample's chain of dependent operations). Two
  // sums of half the columns each: the latency of the chain, not the count, sets the time.
  __m256d v[R];
  {
    alignas(32) double dp[P];
#pragma GCC unroll 16
    for (int r = 0; r < R; ++r) {
      _mm256_store_pd(dp + 4 * r, _mm256_sub_pd(p[r], _mm256_load_pd(pads + 4 * P + 4 * r)));
      v[r] = _mm256_load_pd(pads + 3 * P + 4 * r);
    }
    add_product<K, false>(g.mw.data(), dp, v);
  }

  const int slot = (g.head + 1) & 3;
  port_set& trial = g.trial();
  double* mt = g.mring.data() + P * NP * slot;
  const double tol = opt_.tol_v;
  const detail::device_consts* dev = g.dev.data();
  int evals = 0;
  bool accepted = false;
  double rn_base = std::numeric_limits<double>::infinity();
  bool may_damp = false;
  int halvings = 0;
  __m256d base[R], step[R], restart[R], vacc[R];  // vacc: the accepted point
#pragma GCC unroll 16
  for (int r = 0; r < R; ++r) {
    base[r] = v[r];
    step[r] = _mm256_setzero_pd();
    restart[r] = v[r];
  }
  // The devices' currents and derivatives at the iterate, a row of lanes each (igs, igd,
  // id, ggs, ggd, gm, gds), for the broadcasts of the products below.
  constexpr int L = (K + 3) / 4;
  constexpr int LC = lane_consts::count;
  const double* lc = g.lanes.data();
  alignas(32) double cur[7][4 * L];
  lane_currents cl[L];
  __m256d gs[L], ds[L];
  // The guess limited where a junction would rise past its knee (limit_guess).
  {
    int above = 0;
#pragma GCC unroll 4
    for (int l = 0; l < L; ++l) {
      __m256d a, b;
      lanes_of(v[2 * l], 2 * l + 1 < R ? v[2 * l + 1] : _mm256_setzero_pd(), a, b);
      const double* c = lc + 4 * LC * l;
      above |= _mm256_movemask_pd(
          _mm256_or_pd(_mm256_cmp_pd(a, _mm256_load_pd(c + 4 * lane_consts::knee_gs), _CMP_GT_OQ),
                       _mm256_cmp_pd(_mm256_sub_pd(a, b), _mm256_load_pd(c + 4 * lane_consts::knee_gd), _CMP_GT_OQ)));
    }
    if (above != 0) [[unlikely]] {
      alignas(32) double gv[P];
#pragma GCC unroll 16
      for (int r = 0; r < R; ++r) _mm256_store_pd(gv + 4 * r, v[r]);
      limit_guess(gv, pads + 3 * P);
#pragma GCC unroll 16
      for (int r = 0; r < R; ++r) base[r] = restart[r] = v[r] = _mm256_load_pd(gv + 4 * r);
    }
  }
  const int inline_iterations = std::min(opt_.max_iterations, wide_inline_iterations);
  bool rescued = false;
  // A point that remainder_step stored in trial (corrected or rescued) accepted, with the
  // iterate's Jf.
  auto take_corrected = [&]() __attribute__((target("avx2,fma"), always_inline)) {
#pragma GCC unroll 16
    for (int j = 0; j < K; ++j) put_block_of(trial.jf, j, cur[3][j], cur[4][j], cur[5][j], cur[6][j]);
#pragma GCC unroll 16
    for (int r = 0; r < R; ++r) vacc[r] = load_rows<NP>(trial.v.data(), r);
    accepted = true;
  };
  int it = 0;
  for (; it < inline_iterations; ++it) {
    alignas(32) double vv[P];
#pragma GCC unroll 16
    for (int r = 0; r < R; ++r) _mm256_store_pd(vv + 4 * r, v[r]);
#pragma GCC unroll 4
    for (int l = 0; l < L; ++l) {
      lanes_of(v[2 * l], 2 * l + 1 < R ? v[2 * l + 1] : _mm256_setzero_pd(), gs[l], ds[l]);
      cl[l] = evaluate_lanes(lc + 4 * LC * l, dev, 4 * l, K, gs[l], ds[l]);
      _mm256_store_pd(cur[0] + 4 * l, cl[l].igs);
      _mm256_store_pd(cur[1] + 4 * l, cl[l].igd);
      _mm256_store_pd(cur[2] + 4 * l, cl[l].id);
      _mm256_store_pd(cur[3] + 4 * l, cl[l].ggs);
      _mm256_store_pd(cur[4] + 4 * l, cl[l].ggd);
      _mm256_store_pd(cur[5] + 4 * l, cl[l].gm);
      _mm256_store_pd(cur[6] + 4 * l, cl[l].gds);
    }
    ++evals;
    // The residual p - v + F i.
    __m256d res[R];
#pragma GCC unroll 16
    for (int r = 0; r < R; ++r) res[r] = _mm256_sub_pd(p[r], v[r]);
    by_currents<K>(f, cur[0], cur[1], cur[2], res);
    __m256d rmax = abs4(res[0]);
#pragma GCC unroll 16
    for (int r = 1; r < R; ++r) rmax = _mm256_max_pd(rmax, abs4(res[r]));
    const double rn = hmax_abs(rmax);
    // Damped Newton, as solve_general: a step that made the residual grow (or not finite)
    // is halved, from where it began.
    if (detail::halve_step(may_damp, rn, rn_base, tol, halvings)) [[unlikely]] {
#pragma GCC unroll 16
      for (int r = 0; r < R; ++r) {
        step[r] = _mm256_mul_pd(_mm256_set1_pd(0.5), step[r]);
        v[r] = _mm256_add_pd(base[r], step[r]);
        restart[r] = v[r];
      }
      ++halvings;
      continue;
    }
    // Not finite where it may not damp: solve_general from this point (it fails there too,
    // and the sub-steps take the sample).
    if (!std::isfinite(rn)) break;

    // M into the ring slot: from the channels alone where every gate junction is off or
    // slight (channel_m; slight_junction), else I - F Jf by column pairs, then M in place.
    int conducting = 0, n_significant = 0;
    __m256d sig_gs[L], sig_gd[L], off_gs[L], off_gd[L];
#pragma GCC unroll 4
    for (int l = 0; l < L; ++l) {
      const double* c = lc + 4 * LC * l;
      conducting |= _mm256_movemask_pd(_mm256_or_pd(_mm256_cmp_pd(cl[l].ggs, _mm256_setzero_pd(), _CMP_GT_OQ),
                                                    _mm256_cmp_pd(cl[l].ggd, _mm256_setzero_pd(), _CMP_GT_OQ)));
      sig_gs[l] = _mm256_cmp_pd(cl[l].ggs, _mm256_load_pd(c + 4 * lane_consts::slight_gs), _CMP_NLE_UQ);
      sig_gd[l] = _mm256_cmp_pd(cl[l].ggd, _mm256_load_pd(c + 4 * lane_consts::slight_gd), _CMP_NLE_UQ);
      n_significant += __builtin_popcount(_mm256_movemask_pd(sig_gs[l])) + __builtin_popcount(_mm256_movemask_pd(sig_gd[l]));
    }
    // by_channels: M from the channels and the significant junctions (junction_update on
    // each); the slight junctions left out, their linear change a remainder below.
    bool by_channels = n_significant <= max_junction_updates(K) && opt_.channel_inverse &&
                       channel_m<K>(f, g.fch.data(), cl, cur[5], cur[6], mt);
    if (by_channels && n_significant > 0) [[unlikely]] {
#pragma GCC unroll 4
      for (int l = 0; l < L && by_channels; ++l) {
        const int mg = _mm256_movemask_pd(sig_gs[l]), md = _mm256_movemask_pd(sig_gd[l]);
        for (int b = 0; b < 4 && by_channels; ++b) {
          if (mg >> b & 1) by_channels = junction_update<K>(mt, f, 4 * l + b, false, cur[3][4 * l + b]);
          if (by_channels && (md >> b & 1)) by_channels = junction_update<K>(mt, f, 4 * l + b, true, cur[4][4 * l + b]);
        }
      }
    }
#pragma GCC unroll 4
    for (int l = 0; l < L; ++l) {
      const __m256d all = _mm256_castsi256_pd(_mm256_set1_epi64x(by_channels ? -1 : 0));
      off_gs[l] = _mm256_andnot_pd(sig_gs[l], all);
      off_gd[l] = _mm256_andnot_pd(sig_gd[l], all);
    }
    if (by_channels) {
      ++stats_.channel_steps;
      stats_.junction_updates += n_significant;
    } else {
      // A pivot block not safely invertible alone, or a multiplier above 1e4: M from
      // I - F Jf factored with partial pivoting, as solve_general would (stats: pivoted).
      one_minus_f_jf_wide<K>(f, cur[3], cur[4], cur[5], cur[6], mt);
      if (!gauss_jordan_blocks<K>(mt) && !pivoted_m(mt, &cur[3][0], 4 * L)) [[unlikely]]
        break;
    }
    alignas(32) double rv[P];
#pragma GCC unroll 16
    for (int r = 0; r < R; ++r) _mm256_store_pd(rv + 4 * r, res[r]);
    __m256d d[R];
    product_of<K>(mt, rv, d);
    alignas(32) double dd[P];
#pragma GCC unroll 16
    for (int r = 0; r < R; ++r) _mm256_store_pd(dd + 4 * r, d[r]);
    {
      double sum = 0.0;
#pragma GCC unroll 16
      for (int q = 0; q < NP; ++q) sum += dd[q];
      if (!std::isfinite(sum)) break;
    }
    // The step's lanes; a junction landing above vcrit is limited as in solve_general
    // (Nagel's pnjlim through detail::junction_step_scale), and a limited step is taken
    // without the acceptance, and not damped after.
    __m256d dgs[L], dds[L];
    int limit = 0, large = 0;
#pragma GCC unroll 4
    for (int l = 0; l < L; ++l) {
      lanes_of(d[2 * l], 2 * l + 1 < R ? d[2 * l + 1] : _mm256_setzero_pd(), dgs[l], dds[l]);
      const double* c = lc + 4 * LC * l;
      const __m256d vcrit = _mm256_load_pd(c + 4 * lane_consts::vcrit), lim = _mm256_load_pd(c + 4 * lane_consts::small);
      const __m256d dgd = _mm256_sub_pd(dgs[l], dds[l]);
      limit |= _mm256_movemask_pd(_mm256_or_pd(
          _mm256_cmp_pd(_mm256_add_pd(gs[l], dgs[l]), vcrit, _CMP_GT_OQ),
          _mm256_cmp_pd(_mm256_add_pd(_mm256_sub_pd(gs[l], ds[l]), dgd), vcrit, _CMP_GT_OQ)));
      // detail::small_junction_steps on the lanes; but a junction taken as -is at v (no
      // conductance: far reverse) may take any step after which it still is (its argument
      // below skip_arg: what it leaves out there is within skip_t).
      const __m256d skip = _mm256_load_pd(c + 4 * lane_consts::skip_arg),
                    inv_nvt = _mm256_load_pd(c + 4 * lane_consts::inv_nvt);
      const __m256d off_gs =
          _mm256_and_pd(_mm256_cmp_pd(cl[l].ggs, _mm256_setzero_pd(), _CMP_EQ_OQ),
                        _mm256_cmp_pd(_mm256_mul_pd(_mm256_add_pd(gs[l], dgs[l]), inv_nvt), skip, _CMP_LT_OQ));
      const __m256d off_gd = _mm256_and_pd(
          _mm256_cmp_pd(cl[l].ggd, _mm256_setzero_pd(), _CMP_EQ_OQ),
          _mm256_cmp_pd(_mm256_mul_pd(_mm256_add_pd(_mm256_sub_pd(gs[l], ds[l]), dgd), inv_nvt), skip, _CMP_LT_OQ));
      large |= _mm256_movemask_pd(_mm256_or_pd(_mm256_andnot_pd(off_gs, _mm256_cmp_pd(abs4(dgs[l]), lim, _CMP_NLE_UQ)),
                                               _mm256_andnot_pd(off_gd, _mm256_cmp_pd(abs4(dgd), lim, _CMP_NLE_UQ))));
    }
    bool limited = false;
    if (limit != 0) [[unlikely]] {
      double alpha = 1.0;
#pragma GCC unroll 16
      for (int j = 0; j < K; ++j) {
        const double gs_new = vv[2 * j] + dd[2 * j], gd_new = (vv[2 * j] - vv[2 * j + 1]) + dd[2 * j] - dd[2 * j + 1];
        if (gs_new > dev[j].vcrit_v || gd_new > dev[j].vcrit_v)
          alpha = std::min(alpha, detail::junction_step_scale(dev[j], vv[2 * j], vv[2 * j + 1], dd[2 * j], dd[2 * j + 1]));
      }
      if (alpha < 1.0) {
        limited = true;
#pragma GCC unroll 16
        for (int r = 0; r < R; ++r) d[r] = _mm256_mul_pd(_mm256_set1_pd(alpha), d[r]);
      }
    }
    __m256d vn[R];
#pragma GCC unroll 16
    for (int r = 0; r < R; ++r) vn[r] = _mm256_add_pd(v[r], d[r]);
    if (large == 0 && !limited) {
      alignas(32) double vnv[P];
#pragma GCC unroll 16
      for (int r = 0; r < R; ++r) _mm256_store_pd(vnv + 4 * r, vn[r]);
      // The remainders (rem, mag: rows 0-2, 3-5) and the channels' linear change (row 6),
      // a row of lanes each.
      alignas(32) double sr[8][4 * L];
#pragma GCC unroll 4
      for (int l = 0; l < L; ++l) {
        lane_remainders q = remainders_lanes(lc + 4 * LC * l, cl[l], _mm256_add_pd(gs[l], dgs[l]),
                                             _mm256_add_pd(ds[l], dds[l]), dgs[l], dds[l]);
        q.rem[0] = _mm256_add_pd(q.rem[0], _mm256_and_pd(off_gs[l], abs4(_mm256_mul_pd(cl[l].ggs, dgs[l]))));
        q.rem[1] = _mm256_add_pd(q.rem[1],
                                 _mm256_and_pd(off_gd[l], abs4(_mm256_mul_pd(cl[l].ggd, _mm256_sub_pd(dgs[l], dds[l])))));
        for (int m = 0; m < 3; ++m) {
          _mm256_store_pd(sr[m] + 4 * l, q.rem[m]);
          _mm256_store_pd(sr[3 + m] + 4 * l, q.mag[m]);
        }
        _mm256_store_pd(sr[6] + 4 * l, q.id_lin);
        _mm256_store_pd(sr[7] + 4 * l, q.id_rem);
      }
      // As solve_general's try_accept: the rounding of each row, allowed up to the
      // allowance; t the residual bound less what is allowed; then |M| t.
      // Each in two sums (the junctions' columns and the channels'), added last.
      __m256d fm[R], tr[R], fm2[R], tr2[R];
#pragma GCC unroll 16
      for (int r = 0; r < R; ++r) fm[r] = tr[r] = fm2[r] = tr2[r] = _mm256_setzero_pd();
#pragma GCC unroll 16
      for (int j = 0; j < K; ++j)
#pragma GCC unroll 16
        for (int q = 0; q < 3; ++q) {
          const __m256d mg = _mm256_broadcast_sd(sr[3 + q] + j), rm = _mm256_broadcast_sd(sr[q] + j);
#pragma GCC unroll 16
          for (int r = 0; r < R; ++r) {
            const __m256d fc = _mm256_load_pd(fa + (3 * j + q) * P + 4 * r);
            if (q == 2) {
              fm2[r] = _mm256_fmadd_pd(fc, mg, fm2[r]);
              tr2[r] = _mm256_fmadd_pd(fc, rm, tr2[r]);
            } else {
              fm[r] = _mm256_fmadd_pd(fc, mg, fm[r]);
              tr[r] = _mm256_fmadd_pd(fc, rm, tr[r]);
            }
          }
        }
#pragma GCC unroll 16
      for (int r = 0; r < R; ++r) {
        fm[r] = _mm256_add_pd(fm[r], fm2[r]);
        tr[r] = _mm256_add_pd(tr[r], tr2[r]);
      }
      alignas(32) double tv[P], excess[P];
      __m256d tmax = _mm256_setzero_pd();
      __m256d al[R];
#pragma GCC unroll 16
      for (int r = 0; r < R; ++r) {
        al[r] = _mm256_mul_pd(_mm256_set1_pd(detail::acceptance_round_k),
                              _mm256_add_pd(fm[r], _mm256_add_pd(abs4(p[r]), abs4(vn[r]))));
        const __m256d ex = _mm256_add_pd(_mm256_load_pd(pads + 2 * P + 4 * r),
                                         _mm256_max_pd(_mm256_sub_pd(al[r], _mm256_set1_pd(detail::rounding_allowance_v)),
                                                       _mm256_setzero_pd()));
        _mm256_store_pd(excess + 4 * r, ex);
        const __m256d t = _mm256_add_pd(tr[r], ex);
        _mm256_store_pd(tv + 4 * r, t);
        tmax = _mm256_max_pd(tmax, t);
      }
      if (hmax_abs(tmax) <= tol) {
        const bool within = abs_product_max<K>(mt, tv) <= tol;
        if (within && opt_.confirm) [[unlikely]] {
          // Confirm mode, as solve_general: the exact devices (no far-reverse skip) at the
          // point, whose residual must be below tol_v plus the row's rounding allowance.
          detail::port_currents kc[K];
          ++evals;
          if (!confirmed_at<K>(dev, vnv, p, al, f, tol, kc)) {
            ++stats_.bound_misses;
          } else {
#pragma GCC unroll 16
            for (int r = 0; r < R; ++r) {
              store_rows<NP>(trial.v.data(), r, vn[r]);
              vacc[r] = vn[r];
            }
#pragma GCC unroll 16
            for (int j = 0; j < K; ++j) {
              trial.i[3 * j] = kc[j].igs_a;
              trial.i[3 * j + 1] = kc[j].igd_a;
              trial.i[3 * j + 2] = kc[j].id_a;
              put_block(trial.jf, j, kc[j]);
            }
            accepted = true;
            break;
          }
        } else if (within) {
          // The correction (detail::correction_floor says why), where the remainders move
          // the point by more than a thousandth of tol_v and its own bound holds.
          if (conducting != 0 && opt_.correct_junctions &&
              wide_correct<K>(lc, cl, gs, ds, dgs, dds, sr[0], sr[1], sr[6], vn, mt, f, fa, excess, tol, off_gs, off_gd,
                              pair_out{trial.v.data(), trial.i.data()})) [[unlikely]] {
            take_corrected();
            break;
          }
#pragma GCC unroll 16
          for (int r = 0; r < R; ++r) {
            store_rows<NP>(trial.v.data(), r, vn[r]);
            vacc[r] = vn[r];
          }
          double* i = trial.i.data();
#pragma GCC unroll 16
          for (int j = 0; j < K; ++j) {
            i[3 * j] = cur[0][j] + cur[3][j] * dd[2 * j];
            i[3 * j + 1] = cur[1][j] + cur[4][j] * (dd[2 * j] - dd[2 * j + 1]);
            i[3 * j + 2] = cur[2][j] + sr[6][j];
            put_block_of(trial.jf, j, cur[3][j], cur[4][j], cur[5][j], cur[6][j]);
          }
          accepted = true;
          break;
        }
      }
      // Missed: one more step with the same M from the currents' remainders at vn (the
      // junctions' from their series, the channel's exactly), where its own bound holds
      // (remainder_step); else the next Newton iteration, from vn.
      if (opt_.rescue_steps && hmax_abs(tmax) <= rescue_reach * tol &&
          remainder_step<K, true>(lc, cl, gs, ds, dgs, dds, sr[0], sr[1], sr[6], sr[7], vn, mt, f, fa, excess, tol, off_gs, off_gd,
                                  pair_out{trial.v.data(), trial.i.data()})) {
        bool ok = true;
        if (opt_.confirm) [[unlikely]] {
          // As above (the rescued point's own rounding allowance not counted: the main
          // step's, al).
          detail::port_currents kc[K];
          ++evals;
          ok = confirmed_at<K>(dev, trial.v.data(), p, al, f, tol, kc);
          if (!ok) ++stats_.bound_misses;
        }
        if (ok) {
          ++stats_.rescued;
          rescued = true;
          take_corrected();
          break;
        }
      }
    }
    rn_base = rn;
    may_damp = !limited;
    halvings = 0;
#pragma GCC unroll 16
    for (int r = 0; r < R; ++r) {
      base[r] = v[r];
      step[r] = d[r];
      v[r] = vn[r];
      restart[r] = vn[r];
    }
  }
  if (accepted) [[likely]] {
    // The point's I - F Jf is formed from its Jf where something reads its factors
    // (ensure_factors); M is in the ring.
    trial.stale = true;
    trial.pending = false;
    trial.blocked = false;
    trial.torn = false;
    g.ring_rescued[slot] = rescued;
  } else {
    g.ring_rescued[slot] = false;
    // Where the inline iterations stopped (see above): solve_general goes on from there,
    // at this sample's p.
#pragma GCC unroll 16
    for (int r = 0; r < R; ++r) {
      store_rows<NP>(g.p.data(), r, p[r]);
      store_rows<NP>(g.guess.data(), r, restart[r]);
    }
    // All of max_iterations made here: the attempt has failed, as solve_general's would.
    wide_rest<K>(evals, it == opt_.max_iterations);
#pragma GCC unroll 16
    for (int r = 0; r < R; ++r) vacc[r] = load_rows<NP>(trial.v.data(), r);
  }

  g.head = slot;
#pragma GCC unroll 16
  for (int r = 0; r < R; ++r) {
    store_rows<NP>(g.p_last.data(), r, p[r]);
    // The next sample's warm start reads these whole packets (a masked store is not
    // forwarded to a load).
    _mm256_store_pd(pads + 3 * P + 4 * r, vacc[r]);
    _mm256_store_pd(pads + 4 * P + 4 * r, p[r]);
  }
  combine_warm<P * NP>(P * NP);

  // The current columns of W times i - i_dc, onto the pre-computed part.
  {
    const double* __restrict i_dc = g.dc.i.data();
    const double* __restrict il = g.last().i.data();
#pragma GCC unroll 16
    for (int q = 0; q < NI; ++q) x_in[ns + 2 + q] = il[q] - i_dc[q];
    // The next sample's q (D x, its p less the DC and generator parts) first, on its own:
    // the next sample waits for it, not for the states (their rows of the product below
    // feed only the next sample's `pre`, done beside its Newton). Three sums, whole
    // packets into `pads` for the next sample's loads.
    {
      const double* wq = g.wq.data();
      __m256d q0[R], q1[R], q2[R];
#pragma GCC unroll 16
      for (int r = 0; r < R; ++r) {
        q0[r] = load_rows<NP>(g.pre.data() + ns, r);
        q1[r] = q2[r] = _mm256_setzero_pd();
      }
#pragma GCC unroll 16
      for (int j = 0; j < K; ++j) {
        const double* xj = x_in + ns + 2 + 3 * j;
        // (A JFET's junction columns passed over where both offsets are zero, as
        // update_currents_block.)
        if (xj[0] != 0.0 || xj[1] != 0.0) {
          const __m256d x0 = _mm256_broadcast_sd(xj), x1 = _mm256_broadcast_sd(xj + 1);
#pragma GCC unroll 16
          for (int r = 0; r < R; ++r) {
            q0[r] = _mm256_fmadd_pd(_mm256_load_pd(wq + 3 * j * P + 4 * r), x0, q0[r]);
            q1[r] = _mm256_fmadd_pd(_mm256_load_pd(wq + (3 * j + 1) * P + 4 * r), x1, q1[r]);
          }
        }
        const __m256d x2 = _mm256_broadcast_sd(xj + 2);
#pragma GCC unroll 16
        for (int r = 0; r < R; ++r) q2[r] = _mm256_fmadd_pd(_mm256_load_pd(wq + (3 * j + 2) * P + 4 * r), x2, q2[r]);
      }
#pragma GCC unroll 16
      for (int r = 0; r < R; ++r) {
        const __m256d qr = _mm256_add_pd(q0[r], _mm256_add_pd(q1[r], q2[r]));
        _mm256_store_pd(pads + 5 * P + 4 * r, qr);  // (g.q, which the other loops read, not kept)
      }
    }
    update_currents_wide<K>(g.w.data() + static_cast<std::ptrdiff_t>(ns + 2) * rows, rows, g.pre.data(), x_in + ns + 2,
                            g.out.data(), x_in, ns);
  }
  ++stats_.samples;
  stats_.evaluations += evals;
  stats_.max_evaluations = std::max(stats_.max_evaluations, evals);
  return sign_ * (g.y_dc + g.out.data()[ns + NP]);
}

template <int K>
__attribute__((PINCHOFF_DK_FLATTEN target("avx2,fma"))) void general_solver::block_n(const double* in, double* out,
                                                                                           std::size_t n) noexcept {
  for (std::size_t k = 0; k < n; ++k) out[k] = process_n<K>(in[k]);
}
#endif

void general_solver::process(const double* in, double* out, std::size_t n) noexcept {
#if PINCHOFF_DK_PAIR
  if (pair_) return block_pair(in, out, n);
  if (full_) {
    switch (m_.devices) {
      case 3: return block_n<3>(in, out, n);
      case 4: return block_n<4>(in, out, n);
      case 5: return block_n<5>(in, out, n);
      case 6: return block_n<6>(in, out, n);
      default: break;
    }
  }
#endif
#if PINCHOFF_DK_GENERAL_WIDE
  // (Two JFETs with AVX2 + FMA take the pair loop above, unless the factors are to be
  // pivoted always: then the portable loop.)
  if (wide_) {
    switch (m_.devices) {
      case 3: return block_wide<3>(in, out, n);
      case 4: return block_wide<4>(in, out, n);
      case 5: return block_wide<5>(in, out, n);
      case 6: return block_wide<6>(in, out, n);
      default: break;
    }
  }
#endif
  switch (m_.devices) {
#if !defined(PINCHOFF_RUNTIME_SIZES)
    case 2: return block_k<2>(in, out, n);
    case 3: return block_k<3>(in, out, n);
    case 4: return block_k<4>(in, out, n);
    case 5: return block_k<5>(in, out, n);
    case 6: return block_k<6>(in, out, n);
#endif
    // Sanitizer builds (PINCHOFF_RUNTIME_SIZES, set by the build) run every number of JFETs
    // at run-time size: the same Newton code, the torn step included (torn_at_runtime_size).
    default: return block_k<0>(in, out, n);
  }
}

}  // namespace pinchoff::model
