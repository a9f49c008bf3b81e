#include "model/engine/steady_state.hpp"

#include <algorithm>
#include <cmath>
#include <limits>
#include <numbers>

#include "base/error.hpp"

namespace pinchoff::model {
namespace {

struct period_run {
  Eigen::VectorXd end_state;
  double sum_vgs_v{0}, sum_vds_v{0};
  bool finite{true};
};

// One period from the engine's current state; the monodromy into `m` when given, every
// JFET's port voltages (network frame) into `ports` when given.
period_run run_period(dk_engine& eng, const std::vector<double>& drive, double* out, Eigen::MatrixXd* m,
                      double* ports = nullptr) {
  period_run r;
  if (m) m->setIdentity();
  const int nd = eng.devices();
  for (std::size_t n = 0; n < drive.size(); ++n) {
    const double y = m ? eng.process_tracked(drive[n], *m) : eng.process(drive[n]);
    if (out) out[n] = y;
    if (ports)
      for (int j = 0; j < nd; ++j) {
        const Eigen::Vector2d v = eng.ports_network_v(j);
        ports[(n * static_cast<std::size_t>(nd) + static_cast<std::size_t>(j)) * 2] = v[0];
        ports[(n * static_cast<std::size_t>(nd) + static_cast<std::size_t>(j)) * 2 + 1] = v[1];
      }
    if (!std::isfinite(y)) r.finite = false;
    const Eigen::Vector2d v = eng.ports_v();
    r.sum_vgs_v += v[0];
    r.sum_vds_v += v[1];
  }
  r.end_state = eng.state();
  if (!r.end_state.allFinite()) r.finite = false;
  return r;
}

double max_abs(const Eigen::VectorXd& v) { return v.size() ? v.cwiseAbs().maxCoeff() : 0.0; }

// The monodromy matrix M of the last tracked period and the factorisation of M - I that
// gives Newton corrections: solves (M - I) dx = -(phi - x0) in the least-squares, minimum-
// norm sense. Directions where M - I is singular are left alone: they are the undamped
// alternating modes the trapezoidal rule gives a loop of capacitors and ideal sources
// (eigenvalue -1 per sample, +1 per even period), which the drive does not excite.
struct period_jacobian {
  Eigen::MatrixXd m;         // tracked into by a period run
  Eigen::MatrixXd factored;  // the monodromy whose M - I cod holds
  Eigen::CompleteOrthogonalDecomposition<Eigen::MatrixXd> cod;

  explicit period_jacobian(int ns) : m(ns, ns) { cod.setThreshold(1e-11); }
  void factor() {
    factored = m;
    refactor();
  }
  void refactor() {
    if (factored.rows() == 0) return;
    cod.compute(factored - Eigen::MatrixXd::Identity(factored.rows(), factored.cols()));
  }
  // Broyden's rank-one update of the monodromy from a step s whose residual is r_new
  // after a full chord step (where (M - I) s = -r_old, so the secant condition
  // (M' - I) s = r_new - r_old gives M' = M + r_new s^T / (s^T s)).
  void broyden(const Eigen::VectorXd& s, const Eigen::VectorXd& r_new) {
    const double ss = s.squaredNorm();
    if (!(ss > 0) || factored.rows() == 0) return;
    factored.noalias() += r_new * (s.transpose() / ss);
    refactor();
  }
  Eigen::VectorXd correction(const Eigen::VectorXd& residual) const {
    if (m.rows() == 0) return Eigen::VectorXd(0);
    return cod.solve(-residual);
  }
};

}  // namespace

steady_state_result periodic_steady_state(dk_engine& eng, double amplitude_v, int samples_per_period,
                                          const steady_state_options& opt) {
  if (samples_per_period < 4) throw internal_error("periodic_steady_state: a period needs at least 4 samples");
  if (!std::isfinite(amplitude_v)) throw internal_error("periodic_steady_state: the amplitude must be finite");
  const int p = samples_per_period;
  std::vector<double> drive(static_cast<std::size_t>(p));
  if (opt.cycles < 1 || 2 * opt.cycles >= p) throw internal_error("periodic_steady_state: cycles must be in [1, samples/2)");
  for (int n = 0; n < p; ++n)
    drive[static_cast<std::size_t>(n)] = amplitude_v * std::sin(2.0 * std::numbers::pi * double(opt.cycles) * n / p);
  steady_state_result res = periodic_steady_state(eng, drive, opt);
  res.frequency_hz = eng.sample_rate_hz() * opt.cycles / p;
  return res;
}

steady_state_result periodic_steady_state(dk_engine& eng, const std::vector<double>& drive,
                                          const steady_state_options& opt) {
  if (drive.size() < 4) throw internal_error("periodic_steady_state: a period needs at least 4 samples");
  if (opt.periods_out < 1) throw internal_error("periodic_steady_state: periods_out must be at least 1");
  for (double d : drive)
    if (!std::isfinite(d)) throw internal_error("periodic_steady_state: the drive must be finite");
  const int p = static_cast<int>(drive.size());
  const int ns = eng.states();

  steady_state_result res;
  res.frequency_hz = eng.sample_rate_hz() / p;
  res.samples_per_period = p;
  res.output_v.assign(static_cast<std::size_t>(p) * static_cast<std::size_t>(opt.periods_out), 0.0);
  // Each period run records into the first period of the buffer, so it holds the returned one.
  const std::size_t ports_per_sample = 2 * static_cast<std::size_t>(eng.devices());
  if (opt.record_ports) res.ports_network_v.assign(res.output_v.size() * ports_per_sample, 0.0);
  double* const ports = opt.record_ports ? res.ports_network_v.data() : nullptr;

  eng.reset();
  if (opt.start_from.size() != 0 && opt.start_from.size() != ns)
    throw internal_error("periodic_steady_state: the start state has the wrong size");
  Eigen::VectorXd x0 = opt.start_from.size() != 0 ? opt.start_from : eng.dc_state();
  period_jacobian jac(ns);
  bool factored = false;  // jac holds a factored monodromy
  // A monodromy given (a nearby drive's): shooting starts with chord steps on it.
  const bool given = opt.reuse_monodromy && opt.start_monodromy.size() != 0;
  if (given) {
    if (opt.start_monodromy.rows() != ns || opt.start_monodromy.cols() != ns)
      throw internal_error("periodic_steady_state: the start monodromy has the wrong size");
    jac.m = opt.start_monodromy;
    jac.factor();
    factored = true;
  }
  Eigen::VectorXd best_x0 = x0;
  double best_distance = std::numeric_limits<double>::infinity();
  period_run run;
  constexpr double inf = std::numeric_limits<double>::infinity();

  // One period from `start`: the residual r = phi(start) - start and the correction dx.
  // With `track` the monodromy is accumulated over this period (an ns x ns product a
  // sample, most of a chain's cost); without, the correction comes from the last one
  // tracked: a chord step (Ortega & Rheinboldt, Iterative Solution of Nonlinear Equations
  // in Several Variables, 1970, 7.1), a plain period's cost. Returns max |dx|.
  auto shoot = [&](const Eigen::VectorXd& start, bool track, Eigen::VectorXd& r, Eigen::VectorXd& dx) {
    eng.set_state(start);
    if (ports) res.start_state = start;
    res.periodic_state = start;
    run = run_period(eng, drive, res.output_v.data(), track ? &jac.m : nullptr, ports);
    ++res.periods_simulated;
    if (track) ++res.periods_tracked;
    if (!run.finite) return inf;
    if (track) {
      jac.factor();
      factored = true;
    }
    r = run.end_state - start;
    dx = jac.correction(r);
    return dx.allFinite() ? max_abs(dx) : inf;
  };

  // Newton on x0 from its value, at most opt.max_shooting_iterations Newton updates.
  // `damped`: step halving where a full step does not shorten the estimated distance to
  // the periodic solution (hard drive makes the period map strongly nonlinear: gate
  // conduction recharges the coupling capacitors within a period).
  //
  // Once a Newton step has shortened the distance at least tenfold (its quadratic
  // convergence shows), the monodromy of the last tracked period serves the following
  // steps as long as each shortens the distance at least threefold (chord_ratio: tracking
  // again costs 3-6 plain periods, callgrind on one to four JFETs); a slower step tracks
  // again. The acceptance stays the Newton estimate's: with a fresh monodromy the
  // distance |(M - I)^-1 r| <= tol_v as before; with one of a chord step of contraction
  // rho the bound |dx| / (1 - rho) on the start's distance (Ortega & Rheinboldt 12.1)
  // <= tol_v, which is not looser.
  //
  // A chord step's period also updates the monodromy by Broyden's rank-one secant
  // correction (Broyden, "A class of methods for solving nonlinear simultaneous
  // equations", Math. Comp. 19, 1965; Kelley, Iterative Methods for Linear and Nonlinear
  // Equations, 1995, 7.2): an ns x ns refactoring, nothing beside a period, and the chord
  // steps contract faster. The full Newton step after a tracked period is tried first on a
  // plain period, as such a chord step: near the solution it is fast, and it saves the
  // tracked trial.
  //
  // `chord_start`: the first period is a chord step on the monodromy given; nothing is
  // accepted before a second one has measured its contraction.
  constexpr double fast_ratio = 0.1;
  constexpr double chord_ratio = 0.3;
  Eigen::VectorXd r(ns), dx(ns), r_try(ns), dx_try(ns);
  auto newton = [&](bool damped, bool chord_start) {
    bool fresh = !chord_start, chord = chord_start, measured = !chord_start;
    double rho = 0.0;
    int newton_steps = 0, chord_steps = 0;
    int periods_left = opt.max_shooting_iterations * 3;
    double distance = shoot(x0, !chord_start, r, dx);
    // After a plain period from x0 + dx (r_try its residual): Broyden's update of the
    // monodromy, and the distance of the Newton estimate on it (inf when not finite).
    auto broyden_distance = [&] {
      jac.broyden(dx, r_try);
      dx_try = jac.correction(r_try);
      return dx_try.allFinite() ? max_abs(dx_try) : inf;
    };
    // Takes the trial x_new as the start, with its residual and step (r_try, dx_try) and its
    // distance d_new: `tracked`, a fresh monodromy's estimate, else a chord step's of
    // contraction d_new / distance.
    auto take = [&](const Eigen::VectorXd& x_new, double d_new, bool tracked) {
      ++res.shooting_iterations;
      if (!tracked) rho = d_new / distance;
      x0 = x_new;
      r = r_try;
      dx = dx_try;
      distance = d_new;
      fresh = tracked;
      measured = true;
    };
    while (std::isfinite(distance)) {
      res.state_change_v = max_abs(r);
      res.distance_v = distance;
      if (distance < best_distance) {
        best_distance = distance;
        best_x0 = x0;
      }
      if (res.state_change_v == 0.0) return true;
      if (measured && (fresh ? distance : distance / (1.0 - rho)) <= opt.tol_v) return true;
      if (newton_steps >= opt.max_shooting_iterations) return false;
      if (chord && chord_steps < 3 * opt.max_shooting_iterations) {
        const Eigen::VectorXd x_try = x0 + dx;
        double d_try = shoot(x_try, false, r_try, dx_try);
        ++chord_steps;
        if (std::isfinite(d_try)) d_try = broyden_distance();
        if (std::isfinite(d_try) && d_try < distance) {  // progress: kept
          const bool fast = d_try <= chord_ratio * distance;
          take(x_try, d_try, false);
          if (fast) continue;
        }
        // Too slow: the monodromy is tracked again, from the start kept.
        chord = false;
        distance = shoot(x0, true, r, dx);
        fresh = true;
        measured = true;
        continue;
      }
      if (periods_left <= 0) return false;
      double lambda = 1.0, d_try = inf;
      Eigen::VectorXd x_try = x0;
      // The full step is tried first on a plain period, as a chord step on the monodromy
      // just tracked; a step that is not fast is run again tracked, as every damped trial
      // is, and Newton goes on as before.
      if (opt.reuse_monodromy) {
        x_try = x0 + dx;
        d_try = shoot(x_try, false, r_try, dx_try);
        if (std::isfinite(d_try) && d_try <= fast_ratio * distance) d_try = broyden_distance();
        if (std::isfinite(d_try) && d_try <= fast_ratio * distance) {
          ++newton_steps;
          chord = true;
          take(x_try, d_try, false);
          continue;
        }
      }
      for (int h = 0; h < (damped ? 6 : 1) && periods_left > 0; ++h, lambda *= 0.5) {
        x_try = x0 + lambda * dx;
        d_try = shoot(x_try, true, r_try, dx_try);
        --periods_left;
        if (d_try < distance) break;
      }
      ++newton_steps;
      // Without a shorter distance even at the smallest step the last trial is kept anyway
      // (the iteration cap ends a hopeless case); a non-finite one ends it now.
      if (!std::isfinite(d_try)) {
        ++res.shooting_iterations;
        return false;
      }
      chord = opt.reuse_monodromy && d_try <= fast_ratio * distance;
      take(x_try, d_try, true);
    }
    return false;
  };
  res.converged = newton(true, given);
  // The damping can stall where full steps converge (the estimated distance growing for a
  // step or two on the way): full Newton steps from the best start found.
  if (!res.converged && opt.max_shooting_iterations > 0 && std::isfinite(best_distance)) {
    x0 = best_x0;
    res.converged = newton(false, false);
  }

  // Fallback: settle from the best start found, one period at a time, within the period
  // and sample budgets (a state that has not settled then is reported unconverged). The distance is
  // estimated with the last monodromy tracked, refreshed every 32 periods; a period whose
  // estimate passes is followed by a tracked one, whose fresh estimate decides.
  if (!res.converged) {
    res.used_settling = true;
    eng.set_state(best_x0);
    Eigen::VectorXd start = best_x0;
    bool confirm = false;
    const long long settle_periods =
        std::min<long long>(opt.max_settle_periods, std::max<long long>(1, opt.max_settle_samples / p));
    for (long long k = 0; k < settle_periods; ++k) {
      const bool track = confirm || !factored || k % 32 == 0;
      if (ports) res.start_state = start;
      res.periodic_state = start;
      run = run_period(eng, drive, res.output_v.data(), track ? &jac.m : nullptr, ports);
      ++res.periods_simulated;
      if (track) ++res.periods_tracked;
      if (!run.finite) break;
      if (track) {
        jac.factor();
        factored = true;
      }
      r = run.end_state - start;
      dx = jac.correction(r);
      res.state_change_v = max_abs(r);
      res.distance_v = dx.allFinite() ? max_abs(dx) : inf;
      start = run.end_state;
      if (res.distance_v <= opt.tol_v) {
        if (track) {
          res.converged = true;
          break;
        }
        confirm = true;
      } else {
        confirm = false;
      }
    }
  }

  // The returned periods: the first is the last one run; more follow from its end.
  double sum_vgs = run.sum_vgs_v, sum_vds = run.sum_vds_v;
  for (int k = 1; k < opt.periods_out && run.finite; ++k) {
    const period_run more = run_period(eng, drive, res.output_v.data() + static_cast<std::ptrdiff_t>(k) * p, nullptr,
                                       ports ? ports + static_cast<std::ptrdiff_t>(k) * p * static_cast<std::ptrdiff_t>(ports_per_sample)
                                             : nullptr);
    ++res.periods_simulated;
    sum_vgs += more.sum_vgs_v;
    sum_vds += more.sum_vds_v;
  }
  const double count = static_cast<double>(p) * opt.periods_out;
  res.mean_vgs_v = sum_vgs / count;
  res.mean_vds_v = sum_vds / count;
  double sum_y = 0.0;
  for (double y : res.output_v) sum_y += y;
  res.mean_output_v = sum_y / count;
  res.engine = eng.stats();
  if (factored) res.monodromy = std::move(jac.factored);
  return res;
}

steady_state_result periodic_steady_state(const network& net, const operating_point& op, double sample_rate_hz,
                                          double amplitude_v, int samples_per_period, const steady_state_options& opt) {
  dk_engine eng(net, op, sample_rate_hz, opt.engine);
  return periodic_steady_state(eng, amplitude_v, samples_per_period, opt);
}

}  // namespace pinchoff::model
