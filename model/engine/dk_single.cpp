// The DK engine's one-JFET solver (model/engine/dk_single.hpp): the port equations are
// two, so each Newton iteration is a closed-form 2x2 solve, and the sample loop is laid
// out for the path nearly every sample takes (read step_t and block_wide before changing
// anything here: code layout alone moves the loop by 2-3 %).
#include "model/engine/dk_single.hpp"

#include <algorithm>
#include <cmath>
#include <limits>

#include "base/error.hpp"
#include "model/engine/dk_acceptance.hpp"
#include "model/engine/dk_steps.hpp"

#if defined(__x86_64__) && (defined(__GNUC__) || defined(__clang__))
#include <immintrin.h>
#define PINCHOFF_DK_WIDE 1
#else
#define PINCHOFF_DK_WIDE 0
#endif

namespace pinchoff::model {
namespace {


// The stacked state update W [x; u; i] in two parts, with compile-time sizes where the
// state count allows: the x and u columns before the sample's Newton solve (independent
// of it, so the processor overlaps the two), the three current columns after it (a short
// chain to the next sample's p). Column-major, rows padded to whole SIMD packets.
//
// Two kernel sets, chosen once per engine from what the processor offers: portable ones
// (Eigen on the compile's baseline, SSE2 on x86-64: packets of 2) and, on x86-64 processors
// with AVX2 and FMA, ones written with intrinsics (packets of 4 and fused multiply-adds:
// about a third of the instructions of the update), inlined into a sample loop compiled
// for those units as a whole, the Newton solve included (about a third fewer instructions
// a sample than the portable loop). The two round differently (a fused multiply-add rounds
// once), so their samples differ in the last bits, but a given processor always takes the
// same set: results repeat run to run and thread to thread. dk_options::wide_kernels =
// false forces the portable set.
constexpr int padded_rows(int ns, int packet) noexcept { return (ns + 3 + packet - 1) / packet * packet; }

// Column by column (o += W(:, j) x_j): each x_j is broadcast once and the column runs in
// whole SIMD packets; the same sums in the same order as the row-by-column product. The
// supply column is constant: it enters as the vector k (W's supply column times the supply).
template <int NS>
void update_before_fixed(const double* w, const double* k, const double* in, double* pre, int) noexcept {
  constexpr int rows = padded_rows(NS, 2);
  using col_type = Eigen::Matrix<double, rows, 1>;
  // A local accumulator, so it stays in registers (a Map could alias w and in).
  col_type o = Eigen::Map<const col_type>(k);
  for (int j = 0; j < NS; ++j) o += Eigen::Map<const col_type>(w + j * rows) * in[j];
  o += Eigen::Map<const col_type>(w + (NS + 1) * rows) * in[NS + 1];
  Eigen::Map<col_type>{pre} = o;
}

template <int NS>
void update_after_fixed(const double* w, double* in, const double* pre, double* out, int) noexcept {
  constexpr int rows = padded_rows(NS, 2);
  using col_type = Eigen::Matrix<double, rows, 1>;
  col_type o = Eigen::Map<const col_type>(pre);
  for (int j = NS + 2; j < NS + 5; ++j) o += Eigen::Map<const col_type>(w + j * rows) * in[j];
  Eigen::Map<col_type>{out} = o;
  Eigen::Map<Eigen::Matrix<double, NS, 1>>(in) += o.template head<NS>();
}

void update_before_dynamic(const double* w, const double* k, const double* in, double* pre, int ns) noexcept {
  const Eigen::Map<const Eigen::MatrixXd> wm(w, padded_rows(ns, 2), ns + 5);
  const Eigen::Map<const Eigen::VectorXd> x(in, ns);
  Eigen::Map<Eigen::VectorXd> o(pre, padded_rows(ns, 2));
  o = Eigen::Map<const Eigen::VectorXd>(k, padded_rows(ns, 2));
  o.noalias() += wm.leftCols(ns) * x;
  o += wm.col(ns + 1) * in[ns + 1];
}

void update_after_dynamic(const double* w, double* in, const double* pre, double* out, int ns) noexcept {
  const Eigen::Map<const Eigen::MatrixXd> wm(w, padded_rows(ns, 2), ns + 5);
  Eigen::Map<Eigen::VectorXd> x(in, ns + 5);
  const Eigen::Map<const Eigen::VectorXd> b(pre, padded_rows(ns, 2));
  Eigen::Map<Eigen::VectorXd> o(out, padded_rows(ns, 2));
  o.noalias() = b + wm.rightCols(3) * x.tail(3);
  x.head(ns) += o.head(ns);
}

#if PINCHOFF_DK_WIDE
// AVX2 + FMA kernels: rows padded to a multiple of 4; the same column order as above.
template <int NS>
__attribute__((target("avx2,fma"))) void update_before_wide(const double* w, const double* kc, const double* in,
                                                             double* pre, int) noexcept {
  constexpr int packets = padded_rows(NS, 4) / 4;
  constexpr int rows = 4 * packets;
  __m256d o[packets];
  for (int k = 0; k < packets; ++k) o[k] = _mm256_loadu_pd(kc + 4 * k);
  for (int j = 0; j < NS + 2; ++j) {
    if (j == NS) continue;  // the supply: in kc
    const __m256d xj = _mm256_broadcast_sd(in + j);
    for (int k = 0; k < packets; ++k) o[k] = _mm256_fmadd_pd(_mm256_loadu_pd(w + j * rows + 4 * k), xj, o[k]);
  }
  for (int k = 0; k < packets; ++k) _mm256_storeu_pd(pre + 4 * k, o[k]);
}

template <int NS>
__attribute__((target("avx2,fma"))) void update_after_wide(const double* w, double* in, const double* pre,
                                                            double* out, int) noexcept {
  constexpr int packets = padded_rows(NS, 4) / 4;
  constexpr int rows = 4 * packets;
  __m256d o[packets];
  for (int k = 0; k < packets; ++k) o[k] = _mm256_loadu_pd(pre + 4 * k);
  for (int j = NS + 2; j < NS + 5; ++j) {
    const __m256d xj = _mm256_broadcast_sd(in + j);
    for (int k = 0; k < packets; ++k) o[k] = _mm256_fmadd_pd(_mm256_loadu_pd(w + j * rows + 4 * k), xj, o[k]);
  }
  for (int k = 0; k < packets; ++k) _mm256_storeu_pd(out + 4 * k, o[k]);
  for (int k = 0; k < NS; ++k) in[k] += out[k];
}
#endif

}  // namespace

single_solver::single_solver(const network& net, const operating_point& op, dk_matrices m, const dk_options& opt)
    : dk_solver_base(std::move(m), opt, net) {
  warm_ = detail::warm_start_weights(opt_.predictor_order);
  dev_ = detail::device_consts::of(net.jfet().device, net.vt_v);
  f1_ = m_.f;
  e1_ = m_.e;
  f_abs_ = f1_.cwiseAbs();
  const int ns = m_.states;

  // Far-reverse junctions. Below v / (n Vt) = skip_arg the device takes a junction as -is
  // with no conductance, leaving out at most is exp(skip_arg); in a Newton step that starts
  // there and ends at most 0.01 n Vt higher, the remainder is at most e^0.01 times that.
  // Both, for both junctions, go through F into the acceptance bound (skip_t_), and
  // skip_arg is set so that they stay below a thousandth of tol_v (and never above
  // exp(-16), 0.41 V of reverse bias at n = 1 and room temperature). At rest the gate-source
  // junction of a biased stage sits there, and its exponential lies on the path from one
  // sample to the next.
  {
    const Eigen::Array2d fa = f_abs_.col(0).array() + f_abs_.col(1).array();
    const double per_amp = 2.02 * fa.maxCoeff();
    if (dev_.is_a > 0.0 && per_amp > 0.0) {
      const double arg = std::log(1e-3 * opt_.tol_v / (per_amp * dev_.is_a));
      dev_.skip_arg = std::clamp(arg, detail::junction_deep_reverse, -16.0);
    }
    skip_t_ = fa * (2.02 * dev_.is_a * std::exp(dev_.skip_arg));
  }

  // The stacked update (stacked_update), its rows padded to whole packets.
  wide_ = opt_.wide_kernels && ns <= 8 && detail::wide_kernels_available();
  const int rows = padded_rows(ns, wide_ ? 4 : 2);
  {
    const Eigen::MatrixXd w = stacked_update(m_, rows);
    w_ = detail::aligned_doubles(static_cast<std::size_t>(w.size()));
    std::copy_n(w.data(), w.size(), w_.data());
    w_const_ = detail::aligned_doubles(static_cast<std::size_t>(rows));
    // The states and currents are carried as offsets from the DC point, where the supply
    // does not change: its column adds nothing.
    Eigen::Map<Eigen::VectorXd>(w_const_.data(), rows).setZero();
  }
  in_ = Eigen::VectorXd::Zero(ns + 5);
  out_ = Eigen::VectorXd::Zero(rows);
  pre_ = Eigen::VectorXd::Zero(rows);

  cj_.resize(ns, 2);
  md_.resize(2, ns);

  // DC point: states from the operating point, the port voltages refined on the engine's
  // own port equations (detail::refine_dc_ports), with the device as this loop evaluates
  // it (its skip_arg); the states are carried as offsets from these (dk_engine.hpp).
  Eigen::VectorXd q = dc_states(net, op.x);
  const net_jfet& jf0 = net.jfet();
  Eigen::VectorXd v(2);
  v << node_v(op.x, jf0.gate) - node_v(op.x, jf0.source), node_v(op.x, jf0.drain) - node_v(op.x, jf0.source);
  detail::refine_dc_ports(m_, {&dev_, 1}, supply_v_, q, v);
  const Eigen::Vector2d u(supply_v_, 0.0);
  x_dc_ = q;
  dc_point_ = point_at(v);
  p_dc_ = m_.d * q + e1_ * u;
  y_dc_net_ = m_.d_out.dot(q) + m_.e_out.dot(u) + m_.f_out.dot(dc_point_.i);
  y_dc_ = sign_ * y_dc_net_;
  reset();
}

single_solver::port_point single_solver::point_at(const Eigen::Vector2d& v) const noexcept {
  const detail::port_currents c = detail::evaluate_ports(dev_, v[0], v[1]);
  port_point pt;
  pt.v = v;
  pt.i << c.igs_a, c.igd_a, c.id_a;
  pt.g << c.ggs_s, c.ggd_s, c.gm_s, c.gds_s;
  const Eigen::Matrix2d j = Eigen::Matrix2d::Identity() - f1_ * pt.jf();
  pt.m = j.inverse();
  return pt;
}

void single_solver::reset() {
  inputs_at_dc(3);
  ls_.q.setZero();
  ls_.last = dc_point_;
  ls_.p_last = p_dc_;
  ls_.m_prev = dc_point_.m;
  ls_.m_prev2 = dc_point_.m;
  stats_ = {};
}

void single_solver::set_state(const Eigen::Ref<const Eigen::VectorXd>& x) {
  in_.head(m_.states) = x - x_dc_;
  ls_.q = m_.d * in_.head(m_.states);
}

// An accepted point, element by element (no comma initialiser: a call the wide block loops,
// compiled for other units, would not inline).
__attribute__((always_inline)) inline void single_solver::store_point(port_point& out, const Eigen::Array2d& v,
                                                                  double igs, double igd, double id,
                                                                  const detail::port_currents& c, const Eigen::Array2d& mc0,
                                                                  const Eigen::Array2d& mc1) noexcept {
  out.v[0] = v[0];
  out.v[1] = v[1];
  out.i[0] = igs;
  out.i[1] = igd;
  out.i[2] = id;
  out.g[0] = c.ggs_s;
  out.g[1] = c.ggd_s;
  out.g[2] = c.gm_s;
  out.g[3] = c.gds_s;
  out.m(0, 0) = mc0[0];
  out.m(1, 0) = mc0[1];
  out.m(0, 1) = mc1[0];
  out.m(1, 1) = mc1[1];
}

// One Newton iteration on r(v) = p + F i(v) - v = 0 from st.v.
//
// Acceptance (both the step and the residual): after the step dv computed at v, the
// device currents at v + dv differ from their linearisation i(v) + Jf dv by R: for a
// junction R is is e^(v/nVt)(e^x - 1 - x), x = dv/nVt, which is below 0.505 g dv^2 / nVt
// for |x| <= 0.01; for the channel R is computed exactly, from the (cheap, polynomial)
// channel current at v + dv, plus a margin for its rounding. The residual at v + dv is then at most |F| R and the distance to the
// exact solution at most |(I - F Jf)^-1| |F| R (the Newton-Kantorovich argument; Ortega &
// Rheinboldt 1970, 12.6). Both bounds must be below tol_v; the accepted currents are the
// linearised ones, which satisfy v + dv = p + F i exactly. This is the "accept on a tiny
// step" of quadratic convergence with the step size made precise, not a looser test.
__attribute__((always_inline)) inline single_solver::newton_outcome single_solver::newton_iteration(newton_state& st,
                                                                                        const Eigen::Vector2d& p_in,
                                                                                        port_point& out,
                                                                                        int& evals) noexcept {
  // Both rows of every port quantity side by side (packets of two): the columns of F and
  // |F| are contiguous pairs, so each row pair costs one packed operation.
  using a2 = Eigen::Array2d;
  using detail::rounding_allowance_v;
  const a2 fc0 = f1_.col(0).array(), fc1 = f1_.col(1).array(), fc2 = f1_.col(2).array();
  const a2 p = p_in.array();
  const double tol = opt_.tol_v;
  a2& v = st.v;
  const detail::port_currents c = detail::evaluate_ports(dev_, v[0], v[1]);
  ++evals;
  const a2 r = p + fc0 * c.igs_a + fc1 * c.igd_a + fc2 * c.id_a - v;
  const double rn = r.abs().maxCoeff();
  // Damped Newton: halve a step that made the residual grow (or not finite).
  if (detail::halve_step(st.may_damp, rn, st.rn_base, tol, st.halvings)) {
    st.step *= 0.5;
    v = st.base + st.step;
    ++st.halvings;
    return newton_outcome::go_on;
  }
  if (!std::isfinite(rn)) return newton_outcome::failed;

  // J = F Jf - I with Jf = [[ggs, 0], [ggd, -ggd], [gm, gds]], by columns; M = -J^-1 = (I - F Jf)^-1.
  const a2 jc0 = fc0 * c.ggs_s + fc1 * c.ggd_s + fc2 * c.gm_s;
  const a2 jc1 = fc2 * c.gds_s - fc1 * c.ggd_s;
  const double j00 = jc0[0] - 1.0, j10 = jc0[1], j01 = jc1[0], j11 = jc1[1] - 1.0;
  const double det = j00 * j11 - j01 * j10;
  if (!(std::fabs(det) > 1e-200)) return newton_outcome::failed;
  const double inv = 1.0 / det;
  const a2 mc0 = a2(-j11, j10) * inv, mc1 = a2(j01, -j00) * inv;  // the columns of M
  a2 d = mc0 * r[0] + mc1 * r[1];

  // Junction-voltage limiting (Nagel 1975, SPICE2 pnjlim) scales the whole step; only
  // a junction landing above vcrit can be limited.
  bool limited = false;
  if (v[0] + d[0] > dev_.vcrit_v || (v[0] - v[1]) + (d[0] - d[1]) > dev_.vcrit_v) {
    const double alpha = detail::junction_step_scale(dev_, v[0], v[1], d[0], d[1]);
    if (alpha < 1.0) {
      d *= alpha;
      limited = true;
    }
  }
  const double dgs = d[0], dgd = d[0] - d[1];
  if (!limited && detail::small_junction_steps(dev_, dgs, dgd)) {
    const a2 vn = v + d;
    // The remainders (rgs, rgd, rd) and the terms' magnitudes (shared with the general
    // solver, dk_acceptance.hpp). Rounding: the linearised equation v + dv = p + F (i + Jf
    // dv) holds only to the rounding of its terms, a few eps of their magnitudes.
    // Negligible at any sane point (1e-14 V for terms of 10 V), it rejects points where
    // currents are so large (a junction far beyond exp(80)) that the equation cannot be
    // resolved in doubles.
    const detail::step_remainders sr = detail::remainders_of(dev_, c, vn[0], vn[1], d[0], d[1]);
    const double rgs = sr.rem[0], rgd = sr.rem[1], rd = sr.rem[2], id_lin_d = sr.id_lin_d;
    const a2 fa0 = f_abs_.col(0).array(), fa1 = f_abs_.col(1).array(), fa2 = f_abs_.col(2).array();
    const a2 round =
        detail::acceptance_round_k * (fa0 * sr.mag[0] + fa1 * sr.mag[1] + fa2 * sr.mag[2] + p.abs() + vn.abs());
    // The bound on the residual is t = fa0 rgs + fa1 rgd + fa2 rd + round + skip_t_, and
    // on the error |M| t. The rounding part of each row is allowed on top of tol_v up to
    // rounding_allowance_v: where a large transimpedance meets a large current (megohms
    // and tens of mA: terms of tens of kV cancelling to a port voltage of a few volts) the
    // equation resolves the port voltages only to about 1e-10 V, and no point could meet
    // tol_v alone. A point resolved more coarsely than the allowance is still never
    // accepted. Both tests as t - allowed <= tol_v and |M| (t - allowed) <= tol_v, with
    // t - allowed = fa0 rgs + fa1 rgd + fa2 rd + skip_t_ + max(round - allowance, 0).
    const a2 allowed = round.min(rounding_allowance_v);
    const a2 u = fa0 * rgs + fa1 * rgd + fa2 * rd + skip_t_ + (round - rounding_allowance_v).max(0.0);
    const a2 e = mc0.abs() * u[0] + mc1.abs() * u[1];
    if ((u <= tol).all() && (e <= tol).all()) {
      if (opt_.confirm) {
        // The exact device (no far-reverse skip), so the check covers the skip's bound too.
        detail::device_consts exact = dev_;
        exact.skip_arg = detail::junction_deep_reverse;
        const detail::port_currents cc = detail::evaluate_ports(exact, vn[0], vn[1]);
        ++evals;
        const a2 q = p + fc0 * cc.igs_a + fc1 * cc.igd_a + fc2 * cc.id_a - vn;
        if (!(q.abs() <= tol + allowed).all()) {
          ++stats_.bound_misses;
        } else {
          store_point(out, vn, cc.igs_a, cc.igd_a, cc.id_a, cc, mc0, mc1);
          return newton_outcome::accepted;
        }
      } else {
        store_point(out, vn, c.igs_a + c.ggs_s * dgs, c.igd_a + c.ggd_s * dgd, c.id_a + id_lin_d, c, mc0, mc1);
        return newton_outcome::accepted;
      }
    }
  }
  st.base = v;
  st.step = d;
  st.rn_base = rn;
  st.may_damp = !limited;
  st.halvings = 0;
  v += d;
  return newton_outcome::go_on;
}

// Newton on st, up to max_iterations iterations in all (`done` of them already made). Out
// of line: the sample loop makes the first two iterations itself and comes here (through
// rest_of_sample) only when they were not accepted.
__attribute__((noinline)) bool single_solver::newton_rest(newton_state& st, const Eigen::Vector2d& p, port_point& out,
                                                      int& evals, int done) noexcept {
  for (int k = done; k < opt_.max_iterations; ++k) {
    switch (newton_iteration(st, p, out, evals)) {
      case newton_outcome::accepted: return true;
      case newton_outcome::failed: return false;
      case newton_outcome::go_on: break;
    }
  }
  return false;
}

// The rest of a sample whose inline Newton iterations were not accepted: the other
// iterations, then sub-steps from the last sample's solution if they fail.
__attribute__((noinline)) single_solver::port_point single_solver::rest_of_sample(newton_state st, int done, bool failed,
                                                                          Eigen::Vector2d p, port_point last,
                                                                          Eigen::Vector2d p_last, int& evals) noexcept {
  port_point pt;
  if (failed || !newton_rest(st, p, pt, evals, done)) substep(p, last, p_last, pt, evals);
  return pt;
}

bool single_solver::solve_ports(const Eigen::Vector2d& p, const Eigen::Vector2d& guess, port_point& out,
                                int& evals) noexcept {
  newton_state st(guess);
  return newton_rest(st, p, out, evals, 0);
}

// A sample whose Newton did not converge: sub-steps from the last sample's solution
// (detail::substep), each part solved by the same Newton from the last part's point moved
// by its dv/dp.
__attribute__((noinline)) void single_solver::substep(const Eigen::Vector2d& p, const port_point& from,
                                                      const Eigen::Vector2d& p_from, port_point& out,
                                                      int& evals) noexcept {
  struct path {
    single_solver& s;
    const Eigen::Vector2d& p;
    const port_point& from;
    const Eigen::Vector2d& p_from;
    port_point& out;
    port_point cur;
    Eigen::Vector2d pc;
    void restart() noexcept {
      cur = from;
      pc = p_from;
    }
    bool step_to(double frac, bool last, int& evals) noexcept {
      const Eigen::Vector2d pj = last ? p : Eigen::Vector2d(p_from + (p - p_from) * frac);
      const Eigen::Vector2d guess = cur.v + cur.m * (pj - pc);
      port_point next;
      if (!s.solve_ports(pj, guess, next, evals)) return false;
      cur = next;
      pc = pj;
      return true;
    }
    void take() noexcept { out = cur; }
    void hold() noexcept { out = from; }
  } path_{*this, p, from, p_from, out, {}, {}};
  detail::substep(path_, opt_.max_substep_levels, stats_, evals);
}

// One sample, for NS states (0: any number, at run time) with the portable or the wide
// (AVX2 + FMA) update kernels, on the loop state s and the buffers xin ([x; u; i]), pre and
// outv (W's products). Always inlined into the block loops below, so each loop is compiled
// once per state count and kernel set, with no dispatch per sample; the wide loops are
// compiled for AVX2 + FMA as a whole, the first two Newton iterations inlined into them.
// The rest of a sample that needs more (rest_of_sample: further iterations, sub-steps) is
// out of line and portable: kept out of the loop, it leaves the loop's registers to the
// path nearly every sample takes (with the Newton loop inlined, the compiler spilled the
// loop's constants to the stack every sample: 8 % of the time; a third inline iteration
// was slower again).
template <int NS, bool Wide>
__attribute__((always_inline)) inline int single_solver::step_t(loop_state& s, double* xin, double* pre, double* outv,
                                                            double generator_v, double& y) noexcept {
  const int ns = NS > 0 ? NS : m_.states;
  const double ug = sign_ * generator_v;
  xin[ns + 1] = ug;
  if constexpr (NS == 0) {
    update_before_dynamic(w_.data(), w_const_.data(), xin, pre, ns);
  } else if constexpr (Wide) {
#if PINCHOFF_DK_WIDE
    update_before_wide<NS>(w_.data(), w_const_.data(), xin, pre, ns);
#endif
  } else {
    update_before_fixed<NS>(w_.data(), w_const_.data(), xin, pre, ns);
  }
  const Eigen::Vector2d p = p_dc_ + s.q + e1_.col(1) * ug;

  // Warm start: in the DK form v = v(p) is a static map (the port equations at the new p),
  // solved at the last sample for p_last, where last.m = dv/dp. Along the step dl to the
  // new p, v changes by the integral of dv/dp; the guess takes it by the Adams-Bashforth
  // rule on dv/dp at the last three samples (weights 23/12, -16/12, 5/12 for the default
  // order 3; Hairer, Norsett & Wanner, Solving ODEs I, sec. III.1, from memory), as if the
  // steps of p were equal, which at 8x oversampling they nearly are. It needs no
  // extrapolation of v or p in time: the trapezoidal rule's alternating (z near -1)
  // components of p, which defeat polynomial extrapolation, only move the point where the
  // map is sampled. On the presets at 1 and 10 V, 4-6 % fewer evaluations than the cubic
  // extrapolation of v corrected to first order in p it replaced, and a shorter chain from
  // p to the guess (the matrix is formed off it).
  const Eigen::Vector2d dl = p - s.p_last;
  const Eigen::Matrix2d mg = warm_[0] * s.last.m + warm_[1] * s.m_prev + warm_[2] * s.m_prev2;
  Eigen::Vector2d guess = s.last.v + mg * dl;
  // Across a kink (cutoff, the triode edge, a junction turning on) the warm start can
  // overshoot by volts; a junction pushed far forward by it would start Newton where its
  // exponential (or the linear continuation beyond exp(80)) swamps everything else. The
  // warm start is limited like a Newton step from the last solution (only a junction
  // landing above vcrit can be limited).
  if (guess[0] > dev_.vcrit_v || guess[0] - guess[1] > dev_.vcrit_v) {
    const double alpha =
        detail::junction_step_scale(dev_, s.last.v[0], s.last.v[1], guess[0] - s.last.v[0], guess[1] - s.last.v[1]);
    if (alpha < 1.0) guess = s.last.v + alpha * (guess - s.last.v);
  }

  // The first two Newton iterations inline, writing the accepted point straight into the
  // loop state; what they did not settle goes out of line, on copies (so that nothing of
  // the hot path has its address taken and has to live in memory).
  int evals = 0;
  s.m_prev2 = s.m_prev;
  s.m_prev = s.last.m;
  newton_state st(guess);
  newton_outcome o = newton_iteration(st, p, s.last, evals);
  int done = 1;
  if (o == newton_outcome::go_on && opt_.max_iterations > 1) {
    o = newton_iteration(st, p, s.last, evals);
    done = 2;
  }
  if (o != newton_outcome::accepted) [[unlikely]]
    s.last = rest_of_sample(st, done, o == newton_outcome::failed, p, s.last, s.p_last, evals);
  const port_point& pt = s.last;

  s.p_last = p;

  xin[ns + 2] = pt.i[0] - dc_point_.i[0];
  xin[ns + 3] = pt.i[1] - dc_point_.i[1];
  xin[ns + 4] = pt.i[2] - dc_point_.i[2];
  if constexpr (NS == 0) {
    update_after_dynamic(w_.data(), xin, pre, outv, ns);
  } else if constexpr (Wide) {
#if PINCHOFF_DK_WIDE
    update_after_wide<NS>(w_.data(), xin, pre, outv, ns);
#endif
  } else {
    update_after_fixed<NS>(w_.data(), xin, pre, outv, ns);
  }
  s.q[0] = outv[ns];
  s.q[1] = outv[ns + 1];
  y = sign_ * (y_dc_net_ + outv[ns + 2]);
  return evals;
}

// The block loop: the loop state, and for a fixed state count the update's buffers, are
// copied into locals for the block and back after it; the statistics are kept in locals
// and stored once a block. Always inlined into the two entry points below, the wide one
// compiled for AVX2 + FMA.
template <int NS, bool Wide>
__attribute__((always_inline)) inline void single_solver::block_t(const double* in, double* out, std::size_t n) noexcept {
  long long evaluations = 0;
  int most = stats_.max_evaluations;
  loop_state s = ls_;
  if constexpr (NS == 0) {
    for (std::size_t k = 0; k < n; ++k) {
      const int e = step_t<NS, Wide>(s, in_.data(), pre_.data(), out_.data(), in[k], out[k]);
      evaluations += e;
      most = std::max(most, e);
    }
  } else {
    constexpr int rows = padded_rows(NS, Wide ? 4 : 2);
    alignas(32) double xin[NS + 5];
    alignas(32) double pre[rows];
    alignas(32) double outv[rows];
    for (int j = 0; j < NS + 5; ++j) xin[j] = in_[j];
    for (std::size_t k = 0; k < n; ++k) {
      const int e = step_t<NS, Wide>(s, xin, pre, outv, in[k], out[k]);
      evaluations += e;
      most = std::max(most, e);
    }
    for (int j = 0; j < NS + 5; ++j) in_[j] = xin[j];
  }
  ls_ = s;
  stats_.samples += static_cast<long long>(n);
  stats_.evaluations += evaluations;
  stats_.max_evaluations = most;
}

template <int NS>
void single_solver::block_portable(const double* in, double* out, std::size_t n) noexcept {
  block_t<NS, false>(in, out, n);
}

// The wide loop is flattened: everything it calls is inlined into it except what is
// marked noinline (the rare rest of a sample: newton_rest, rest_of_sample, substep,
// junction_step_scale). Left to its heuristics the compiler had put small parts of the
// hot path out of line (an Eigen expression of the acceptance, the device's channel
// current in the second iteration), and which ones changed with unrelated edits: up to 4 %
// of the time at 10 V.
//
// Sanitizer builds (PINCHOFF_NO_FLATTEN, set by the build) leave the inlining to the
// compiler: the same code, checked the same way, but flattening 8 wide loops under
// AddressSanitizer was a third of that tree's compile time.
#if defined(PINCHOFF_NO_FLATTEN)
#define PINCHOFF_DK_FLATTEN
#else
#define PINCHOFF_DK_FLATTEN flatten,
#endif
#if PINCHOFF_DK_WIDE
template <int NS>
__attribute__((PINCHOFF_DK_FLATTEN target("avx2,fma"))) void single_solver::block_wide(const double* in, double* out,
                                                                         std::size_t n) noexcept {
  block_t<NS, true>(in, out, n);
}
#endif

void single_solver::process(const double* in, double* out, std::size_t n) noexcept {
#if PINCHOFF_DK_WIDE
#define PINCHOFF_DK_WIDE_CASE(N) \
  if (wide_) return block_wide<N>(in, out, n);
#else
#define PINCHOFF_DK_WIDE_CASE(N)
#endif
#define PINCHOFF_DK_WIDE_ONLY(N) \
  case N:                        \
    PINCHOFF_DK_WIDE_CASE(N)     \
    break;
#define PINCHOFF_DK_CASE(N)   \
  case N:                     \
    PINCHOFF_DK_WIDE_CASE(N)  \
    return block_portable<N>(in, out, n);
#if defined(PINCHOFF_RUNTIME_SIZES)
  // Sanitizer builds (set by the build): the wide loop at every state count, the portable
  // one at run-time size only. The portable fixed-count loops are the same Newton code with
  // fixed-size buffers and update kernels; the Release suite runs them.
  if (wide_) {
    switch (m_.states) {
      PINCHOFF_DK_WIDE_ONLY(1)
      PINCHOFF_DK_WIDE_ONLY(2)
      PINCHOFF_DK_WIDE_ONLY(3)
      PINCHOFF_DK_WIDE_ONLY(4)
      PINCHOFF_DK_WIDE_ONLY(5)
      PINCHOFF_DK_WIDE_ONLY(6)
      PINCHOFF_DK_WIDE_ONLY(7)
      PINCHOFF_DK_WIDE_ONLY(8)
      default: break;
    }
  }
  return block_portable<0>(in, out, n);
#else
  switch (m_.states) {
    PINCHOFF_DK_CASE(1)
    PINCHOFF_DK_CASE(2)
    PINCHOFF_DK_CASE(3)
    PINCHOFF_DK_CASE(4)
    PINCHOFF_DK_CASE(5)
    PINCHOFF_DK_CASE(6)
    PINCHOFF_DK_CASE(7)
    PINCHOFF_DK_CASE(8)
    default: return block_portable<0>(in, out, n);
  }
#endif
#undef PINCHOFF_DK_CASE
#undef PINCHOFF_DK_WIDE_ONLY
#undef PINCHOFF_DK_WIDE_CASE
}

void single_solver::track(Eigen::MatrixXd& sensitivity) {
  cj_.noalias() = m_.c * ls_.last.jf();
  md_.noalias() = ls_.last.m * m_.d;
  apply_factor(cj_, md_, sensitivity);
}

}  // namespace pinchoff::model
