#include "model/analysis/tune.hpp"

#include <algorithm>
#include <cmath>
#include <optional>

#include "base/error.hpp"
#include "base/units.hpp"
#include "model/circuit/network.hpp"
#include "model/analysis/small_signal.hpp"

#include <Eigen/Dense>

namespace pinchoff::model {
namespace {

double quantity(const tune_target& t, const tune_point& p) {
  switch (t.kind) {
    case target_kind::vd: return p.at.vd_v;
    case target_kind::id: return p.at.id_a;
    case target_kind::vds: return p.at.vds_v;
    case target_kind::vs: return p.at.vs_v;
    case target_kind::center: return p.headroom.symmetric_output_vpk;
    case target_kind::gain: return p.gain_db;
  }
  return 0.0;
}

const char* quantity_unit(target_kind k) { return k == target_kind::id ? "A" : (k == target_kind::gain ? "dB" : "V"); }
const char* quantity_name(target_kind k) {
  switch (k) {
    case target_kind::vd: return "vd";
    case target_kind::id: return "id";
    case target_kind::vds: return "vds";
    case target_kind::vs: return "vs";
    case target_kind::center: return "center";
    case target_kind::gain: return "gain";
  }
  return "";
}

double gain_db_of(const network& net, const operating_point& op) {
  return base::db_from_ratio(std::fabs(analyse_small_signal(net, op).gain_midband));
}

tune_point evaluate_point(const stage& s, std::string_view adjust_key, double value_ohm, bool with_headroom, int at_stage,
                          bool with_gain) {
  stage copy = s;
  *resistor_field(copy, adjust_key) = value_ohm;
  const network net = build_network(copy);
  const operating_point op = solve_operating_point(net);
  tune_point p{value_ohm, at_stage == 0 ? op.at : terminals_of(net, op.x, at_stage), {}};
  if (with_headroom) p.headroom = analyse_headroom(net, op, headroom_detail::swing_only);
  if (with_gain) p.gain_db = gain_db_of(net, op);
  return p;
}

}  // namespace

std::string target_text(const tune_target& t) {
  if (t.kind == target_kind::center) return "center (largest symmetric clean swing)";
  const std::string who = t.stage >= 0 ? "stage" + std::to_string(t.stage + 1) + "." : std::string();
  if (t.kind == target_kind::gain) return "gain = " + base::format_number(t.value, 4) + " dB (mid-band)";
  return who + quantity_name(t.kind) + " = " + base::format_si(t.value, quantity_unit(t.kind), 4);
}

tune_point evaluate_with(const stage& s, std::string_view adjust_key, double value_ohm, int at_stage) {
  return evaluate_point(s, adjust_key, value_ohm, true, at_stage, true);
}

int target_stage(const stage& s, std::string_view adjust_key, const tune_target& target) {
  if (target.stage >= 0) {
    if (target.stage >= s.stage_count())
      throw setting_error("target", s.is_chain() ? "the chain has " + std::to_string(s.stage_count()) +
                                                       " stages, so there is no stage " + std::to_string(target.stage + 1)
                                                 : "the file describes one stage, so there is no stage " +
                                                       std::to_string(target.stage + 1));
    return target.stage;
  }
  if (!s.is_chain()) return 0;
  for (int k = 0; k < s.stage_count(); ++k)
    if (adjust_key.substr(0, stage_key(s, k, "").size()) == stage_key(s, k, "")) return k;
  throw setting_error("target", "in a chain, name the stage whose bias is the target, such as stage1." +
                                    std::string(target.kind == target_kind::center ? "center" : "vd=4.5"));
}

double solve_resistor(const stage& s, std::string_view adjust_key, const tune_target& target) {
  stage probe = s;
  if (resistor_field(probe, adjust_key) == nullptr) {
    std::string keys;
    for (const std::string& k : adjustable_resistor_keys(s)) keys += (keys.empty() ? "" : ", ") + k;
    throw setting_error("adjust_key",
                        "'" + std::string(adjust_key) + "' is not an adjustable resistor (choose one of " + keys + ")");
  }
  const int at_stage = target_stage(s, adjust_key, target);
  // Removing or adding some resistors changes the topology; keep the stage valid.
  const bool is_divider = adjust_key.ends_with("gate.bias_top") || adjust_key.ends_with("gate.bias_bottom");
  if (is_divider && *resistor_field(probe, adjust_key) == 0.0)
    throw setting_error("adjust_key", "the stage has no bias divider, so " + std::string(adjust_key) + " cannot be adjusted");

  const bool want_center = target.kind == target_kind::center;
  auto eval = [&](double r) -> std::optional<tune_point> {
    try {
      stage t = s;
      *resistor_field(t, adjust_key) = r;
      validate(t);
      return evaluate_point(s, adjust_key, r, want_center, at_stage, target.kind == target_kind::gain);
    } catch (const std::exception&) {
      return std::nullopt;
    }
  };

  // Coarse log grid over the whole range, then refinement.
  constexpr int grid = 97;  // 12 points per decade over 8 decades
  std::vector<double> rs;
  std::vector<std::optional<tune_point>> pts;
  for (int k = 0; k < grid; ++k) {
    const double r = tune_min_ohm * std::pow(tune_max_ohm / tune_min_ohm, double(k) / (grid - 1));
    rs.push_back(r);
    pts.push_back(eval(r));
  }
  double lo_q = INFINITY, hi_q = -INFINITY;
  for (const auto& p : pts)
    if (p) {
      lo_q = std::min(lo_q, quantity(target, *p));
      hi_q = std::max(hi_q, quantity(target, *p));
    }
  if (!std::isfinite(lo_q)) throw input_error("no operating point found for any " + std::string(adjust_key) + " value");

  double exact = 0.0;
  if (want_center) {
    int best = -1;
    for (int k = 0; k < grid; ++k)
      if (pts[k] && (best < 0 || quantity(target, *pts[k]) > quantity(target, *pts[best]))) best = k;
    // Golden-section search on log R around the best grid point.
    double a = std::log(rs[std::max(best - 1, 0)]), b = std::log(rs[std::min(best + 1, grid - 1)]);
    const double g = (std::sqrt(5.0) - 1.0) / 2.0;
    auto f = [&](double lr) {
      auto p = eval(std::exp(lr));
      return p ? quantity(target, *p) : -INFINITY;
    };
    double c = b - g * (b - a), d = a + g * (b - a);
    double fc = f(c), fd = f(d);
    for (int it = 0; it < 60 && (b - a) > 1e-10; ++it) {
      if (fc > fd) {
        b = d; d = c; fd = fc; c = b - g * (b - a); fc = f(c);
      } else {
        a = c; c = d; fc = fd; d = a + g * (b - a); fd = f(d);
      }
    }
    exact = std::exp(0.5 * (a + b));
  } else {
    int bracket = -1;
    for (int k = 0; k + 1 < grid; ++k) {
      if (!pts[k] || !pts[k + 1]) continue;
      const double e0 = quantity(target, *pts[k]) - target.value, e1 = quantity(target, *pts[k + 1]) - target.value;
      if (e0 == 0.0 || (e0 < 0) != (e1 < 0)) {
        bracket = k;
        break;
      }
    }
    if (bracket < 0) {
      const char* u = quantity_unit(target.kind);
      throw input_error(target_text(target) + " is out of reach: " + std::string(adjust_key) + " from " +
                        base::format_si(tune_min_ohm, "Ω") + " to " + base::format_si(tune_max_ohm, "Ω") + " gives " +
                        quantity_name(target.kind) + " from " + base::format_si(lo_q, u, 4) + " to " +
                        base::format_si(hi_q, u, 4));
    }
    // Bisection on log R (the quantity is continuous in R).
    double a = std::log(rs[bracket]), b = std::log(rs[bracket + 1]);
    double ea = quantity(target, *pts[bracket]) - target.value;
    for (int it = 0; it < 200 && (b - a) > 1e-13; ++it) {
      const double m = 0.5 * (a + b);
      auto p = eval(std::exp(m));
      if (!p) break;
      const double em = quantity(target, *p) - target.value;
      if ((em < 0) == (ea < 0)) {
        a = m;
        ea = em;
      } else {
        b = m;
      }
    }
    exact = std::exp(0.5 * (a + b));
  }
  return exact;
}

double joint_tolerance(const tune_target& t) noexcept {
  // A gain within 1e-5 dB: a ratio within about 1 ppm, as the bias targets.
  if (t.kind == target_kind::gain) return 1e-5;
  return 1e-6 * std::fabs(t.value) + (t.kind == target_kind::id ? 1e-9 : 1e-6);
}

double midband_gain_db(const stage& s) {
  const network net = build_network(s);
  return gain_db_of(net, solve_operating_point(net));
}

void validate_pairs(const stage& s, const std::vector<tune_pair>& pairs) {
  for (std::size_t i = 0; i < pairs.size(); ++i) {
    stage probe = s;
    if (resistor_field(probe, pairs[i].adjust) == nullptr) continue;  // solve_resistor names it
    if (pairs.size() > 1 && pairs[i].target.kind == target_kind::center)
      throw setting_error("target", "several resistors are solved together for bias targets such as vd=4.5 or id=1m; "
                                    "center is a search of its own: give it alone");
    for (std::size_t j = 0; j < i; ++j) {
      if (pairs[j].adjust == pairs[i].adjust)
        throw setting_error("adjust_key", pairs[i].adjust + " is adjusted twice: give each resistor once");
      const int si = target_stage(s, pairs[i].adjust, pairs[i].target);
      const int sj = target_stage(s, pairs[j].adjust, pairs[j].target);
      if (si == sj && pairs[i].target.kind == pairs[j].target.kind) {
        const std::string what = s.is_chain() ? stage_key(s, si, quantity_name(pairs[i].target.kind))
                                              : std::string(quantity_name(pairs[i].target.kind));
        throw setting_error("target", what + " is the target of two resistors (" + pairs[j].adjust + " and " +
                                          pairs[i].adjust + "): give one resistor per target");
      }
    }
  }
}

namespace {

// One pair's resistor near `hint` (ohm), for the rounds of a joint solve, where every value
// is close to the last: a bracket grown geometrically on log R from the hint, then the
// Illinois variant of regula falsi (Dowell & Jarratt 1971) on log R until the target is
// within a thousandth of joint_tolerance. Empty where the search leaves the range, meets a
// value the stage refuses, or finds no sign change: the caller then takes the full search.
std::optional<double> solve_near(const stage& s, std::string_view key, const tune_target& target, int at_stage,
                                 double hint) {
  const double lo = std::log(tune_min_ohm), hi = std::log(tune_max_ohm);
  auto error = [&](double lr) -> std::optional<double> {
    if (!(lr >= lo && lr <= hi)) return std::nullopt;
    try {
      stage t = s;
      *resistor_field(t, key) = std::exp(lr);
      validate(t);
      return quantity(target, evaluate_point(s, key, std::exp(lr), false, at_stage, target.kind == target_kind::gain)) -
             target.value;
    } catch (const std::exception&) {
      return std::nullopt;
    }
  };
  const double ftol = 1e-3 * joint_tolerance(target);
  double a = std::log(hint);
  std::optional<double> fa = error(a);
  if (!fa) return std::nullopt;
  if (std::fabs(*fa) <= ftol) return hint;
  double step = 0.02;
  std::optional<double> fb = error(a + step);
  if (!fb) return std::nullopt;
  double b = a + step;
  const double dir = std::fabs(*fb) < std::fabs(*fa) ? 1.0 : -1.0;
  for (int tries = 0; (*fa < 0) == (*fb < 0); ++tries) {
    if (tries > 40) return std::nullopt;
    if (dir > 0) {
      a = b;
      fa = fb;
    }
    step *= 2;
    b = a + dir * step;
    fb = error(b);
    if (!fb) return std::nullopt;
  }
  // a and b bracket the root (fa, fb of opposite signs).
  for (int it = 0; it < 100; ++it) {
    const double c = (a * *fb - b * *fa) / (*fb - *fa);
    const std::optional<double> fc = error(c);
    if (!fc) return std::nullopt;
    if (std::fabs(*fc) <= ftol || std::fabs(b - a) < 1e-12) return std::exp(c);
    if ((*fc < 0) != (*fb < 0)) {
      a = b;
      fa = fb;
    } else {
      *fa *= 0.5;
    }
    b = c;
    fb = fc;
  }
  return std::nullopt;
}

}  // namespace

namespace {

joint_solution solve_one_at_a_time(const stage& s, const std::vector<tune_pair>& pairs);

// Every pair's target quantity with the resistors at `ohm`; empty when the stage refuses the
// values or has no operating point there.
std::optional<std::vector<double>> joint_quantities(const stage& s, const std::vector<tune_pair>& pairs,
                                                     const std::vector<int>& at, const std::vector<double>& ohm) {
  try {
    stage t = s;
    for (std::size_t i = 0; i < pairs.size(); ++i) {
      if (!(ohm[i] >= tune_min_ohm && ohm[i] <= tune_max_ohm)) return std::nullopt;
      *resistor_field(t, pairs[i].adjust) = ohm[i];
    }
    validate(t);
    const network net = build_network(t);
    const operating_point op = solve_operating_point(net);
    const bool any_gain = std::any_of(pairs.begin(), pairs.end(), [](const tune_pair& p) { return p.target.kind == target_kind::gain; });
    const double gain = any_gain ? gain_db_of(net, op) : NAN;
    std::vector<double> q;
    for (std::size_t i = 0; i < pairs.size(); ++i)
      q.push_back(quantity(pairs[i].target, tune_point{ohm[i], at[i] == 0 ? op.at : terminals_of(net, op.x, at[i]), {}, gain}));
    return q;
  } catch (const std::exception&) {
    return std::nullopt;
  }
}

// All pairs at once: damped Newton on log R with a finite-difference Jacobian, the errors
// scaled to 1 V, 1 mA or 1 dB. Taken where solving one resistor at a time cannot start (a
// target out of reach of its resistor while the others sit at the file's values) or does not
// settle.
joint_solution solve_jointly(const stage& s, const std::vector<tune_pair>& pairs, const std::vector<int>& at,
                             std::vector<double> ohm) {
  const std::size_t n = pairs.size();
  auto scaled = [&](const std::vector<double>& q) {
    Eigen::VectorXd e(static_cast<Eigen::Index>(n));
    for (std::size_t i = 0; i < n; ++i)
      e[static_cast<Eigen::Index>(i)] = (q[i] - pairs[i].target.value) / (pairs[i].target.kind == target_kind::id ? 1e-3 : 1.0);
    return e;
  };
  joint_solution sol;
  sol.ohm = ohm;
  sol.all_at_once = true;
  std::optional<std::vector<double>> q = joint_quantities(s, pairs, at, ohm);
  if (!q) return sol;
  Eigen::VectorXd e = scaled(*q);
  for (sol.rounds = 1; sol.rounds <= 100; ++sol.rounds) {
    bool settled = true;
    for (std::size_t i = 0; i < n; ++i) settled = settled && std::fabs((*q)[i] - pairs[i].target.value) <= joint_tolerance(pairs[i].target);
    if (settled) {
      sol.ohm = ohm;
      sol.settled = true;
      return sol;
    }
    Eigen::MatrixXd jm(static_cast<Eigen::Index>(n), static_cast<Eigen::Index>(n));
    for (std::size_t k = 0; k < n; ++k) {
      std::vector<double> bumped = ohm;
      const double h = 1e-5;
      bumped[k] *= std::exp(h);
      const std::optional<std::vector<double>> qb = joint_quantities(s, pairs, at, bumped);
      if (!qb) return sol;
      jm.col(static_cast<Eigen::Index>(k)) = (scaled(*qb) - e) / h;
    }
    const Eigen::VectorXd step = jm.colPivHouseholderQr().solve(-e);
    if (!step.allFinite()) return sol;
    // Damped: at most a factor e (2.7) per resistor a step, halved until the error falls.
    double damp = std::min(1.0, 1.0 / std::max(1e-300, step.cwiseAbs().maxCoeff()));
    bool moved = false;
    for (int tries = 0; tries < 30 && !moved; ++tries, damp *= 0.5) {
      std::vector<double> trial = ohm;
      for (std::size_t k = 0; k < n; ++k) trial[k] *= std::exp(damp * step[static_cast<Eigen::Index>(k)]);
      const std::optional<std::vector<double>> qt = joint_quantities(s, pairs, at, trial);
      if (!qt) continue;
      const Eigen::VectorXd et = scaled(*qt);
      if (et.norm() < e.norm()) {
        ohm = trial;
        q = qt;
        e = et;
        moved = true;
      }
    }
    if (!moved) return sol;
  }
  return sol;
}

}  // namespace

joint_solution solve_resistors(const stage& s, const std::vector<tune_pair>& pairs) {
  validate_pairs(s, pairs);
  if (pairs.size() > 1) {
    joint_solution gs;
    try {
      gs = solve_one_at_a_time(s, pairs);
    } catch (const input_error&) {
      // One resistor cannot reach its target with the others where they are: all at once,
      // from the file's values, may still find the point where every target holds.
      std::vector<int> at(pairs.size());
      std::vector<double> start;
      for (std::size_t i = 0; i < pairs.size(); ++i) {
        at[i] = target_stage(s, pairs[i].adjust, pairs[i].target);
        stage probe = s;
        const double v = *resistor_field(probe, pairs[i].adjust);
        start.push_back(v > 0 ? v : 1e3);
      }
      joint_solution nj = solve_jointly(s, pairs, at, start);
      if (nj.settled) return nj;
      throw;
    }
    if (gs.settled) return gs;
    std::vector<int> at(pairs.size());
    for (std::size_t i = 0; i < pairs.size(); ++i) at[i] = target_stage(s, pairs[i].adjust, pairs[i].target);
    joint_solution nj = solve_jointly(s, pairs, at, gs.ohm);
    return nj.settled ? nj : gs;
  }
  return solve_one_at_a_time(s, pairs);
}

namespace {

// Each resistor in turn with the others held at their latest values (block Gauss-Seidel).
joint_solution solve_one_at_a_time(const stage& s, const std::vector<tune_pair>& pairs) {
  joint_solution sol;
  stage t = s;
  sol.ohm.assign(pairs.size(), NAN);
  if (pairs.size() == 1) {
    sol.ohm[0] = solve_resistor(t, pairs[0].adjust, pairs[0].target);
    sol.rounds = 1;
    sol.settled = true;
    return sol;
  }
  std::vector<int> at(pairs.size());
  for (std::size_t i = 0; i < pairs.size(); ++i) at[i] = target_stage(s, pairs[i].adjust, pairs[i].target);
  for (sol.rounds = 1; sol.rounds <= joint_max_rounds; ++sol.rounds) {
    for (std::size_t i = 0; i < pairs.size(); ++i) {
      // Near the value in place (the design's, then the last round's); else the full search.
      double* field = resistor_field(t, pairs[i].adjust);
      std::optional<double> near;
      if (field != nullptr && *field > 0) near = solve_near(t, pairs[i].adjust, pairs[i].target, at[i], *field);
      sol.ohm[i] = near ? *near : solve_resistor(t, pairs[i].adjust, pairs[i].target);
      *resistor_field(t, pairs[i].adjust) = sol.ohm[i];
    }
    // Settled when every target holds with every value in place (the last pair's solve may
    // have moved the others').
    const network net = build_network(t);
    const operating_point op = solve_operating_point(net);
    bool settled = true;
    const bool any_gain = std::any_of(pairs.begin(), pairs.end(), [](const tune_pair& p) { return p.target.kind == target_kind::gain; });
    const double gain = any_gain ? gain_db_of(net, op) : NAN;
    for (std::size_t i = 0; i < pairs.size(); ++i) {
      const tune_point p{sol.ohm[i], at[i] == 0 ? op.at : terminals_of(net, op.x, at[i]), {}, gain};
      settled = settled && std::fabs(quantity(pairs[i].target, p) - pairs[i].target.value) <= joint_tolerance(pairs[i].target);
    }
    if (settled) {
      sol.settled = true;
      return sol;
    }
  }
  sol.rounds = joint_max_rounds;
  return sol;
}

}  // namespace

std::vector<joint_candidate> joint_candidates(const stage& s, const std::vector<tune_pair>& pairs, const joint_solution& sol,
                                              base::eseries series) {
  std::vector<int> at(pairs.size());
  for (std::size_t i = 0; i < pairs.size(); ++i) at[i] = target_stage(s, pairs[i].adjust, pairs[i].target);
  // Each resistor's choices: the series values at or below and at or above its exact value.
  std::vector<std::vector<double>> choices(pairs.size());
  for (std::size_t i = 0; i < pairs.size(); ++i) {
    const double below = base::series_at_or_below(series, sol.ohm[i]);
    const double above = base::series_at_or_above(series, sol.ohm[i]);
    choices[i] = below == above ? std::vector<double>{below} : std::vector<double>{below, above};
  }
  std::vector<joint_candidate> out;
  std::vector<std::size_t> pick(pairs.size(), 0);
  for (;;) {
    joint_candidate c;
    stage t = s;
    for (std::size_t i = 0; i < pairs.size(); ++i) {
      c.ohm.push_back(choices[i][pick[i]]);
      *resistor_field(t, pairs[i].adjust) = c.ohm.back();
    }
    try {
      validate(t);
      const network net = build_network(t);
      const operating_point op = solve_operating_point(net);
      c.gain_db = gain_db_of(net, op);
      for (std::size_t i = 0; i < pairs.size(); ++i) {
        const tune_point p{c.ohm[i], at[i] == 0 ? op.at : terminals_of(net, op.x, at[i]), {}, c.gain_db};
        c.at.push_back(p.at);
        const double got = quantity(pairs[i].target, p), want = pairs[i].target.value;
        c.achieved.push_back(got);
        const double rel = pairs[i].target.kind == target_kind::gain ? base::ratio_from_db(got - want) - 1.0
                                                                      : (got - want) / std::max(std::fabs(want), 1e-12);
        c.error += rel * rel;
      }
      out.push_back(std::move(c));
    } catch (const std::exception&) {
      // A combination the stage refuses or cannot bias is simply not offered.
    }
    std::size_t i = 0;
    while (i < pick.size() && ++pick[i] == choices[i].size()) pick[i++] = 0;
    if (i == pick.size()) break;
  }
  std::stable_sort(out.begin(), out.end(), [](const joint_candidate& a, const joint_candidate& b) { return a.error < b.error; });
  return out;
}

tune_result tune_resistor(const stage& s, std::string_view adjust_key, const tune_target& target, base::eseries series) {
  const double exact = solve_resistor(s, adjust_key, target);
  tune_result res;
  res.adjust = std::string(adjust_key);
  res.exact_ohm = exact;
  const int at_stage = target_stage(s, adjust_key, target);
  res.exact = evaluate_with(s, adjust_key, exact, at_stage);
  const double below = base::series_at_or_below(series, exact);
  const double above = base::series_at_or_above(series, exact);
  for (double v : {below, above}) {
    if (!res.candidates.empty() && res.candidates.back().point.value_ohm == v) continue;
    try {
      res.candidates.push_back({std::string(base::series_name(series)), evaluate_with(s, adjust_key, v, at_stage)});
    } catch (const std::exception&) {
      // A series value outside what the stage allows is simply not offered.
    }
  }
  return res;
}

}  // namespace pinchoff::model
