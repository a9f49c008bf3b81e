#include "model/analysis/compare.hpp"

#include <algorithm>
#include <cmath>
#include <functional>
#include <optional>

#include "base/error.hpp"
#include "base/threads.hpp"
#include "base/units.hpp"
#include "model/analysis/headroom.hpp"
#include "model/circuit/network.hpp"
#include "model/analysis/small_signal.hpp"
#include "model/analysis/spread.hpp"

namespace pinchoff::model {
namespace {

using base::format_number;
using base::format_si;

std::string vpk_text(double v) { return format_si(v, "Vpk") + " (" + format_number(base::dbu_from_vpk(v), 4) + " dBu)"; }

// One steady state at one drive.
struct evaluator {
  const stage& st;
  const compare_settings& s;
  int evaluations{0};
  sweep_point operator()(double drive_vpk) {
    ++evaluations;
    return run_sweep(st, point_settings(s, drive_vpk)).points.front();
  }
};

// Illinois-modified regula falsi (Dowell & Jarratt 1971) on g(x), x = ln(drive), within a
// bracket [a, b] where g changes sign; falls back to bisection when the secant point is not
// finite or not strictly inside. Stops when |g| <= tol. Returns the best point (smallest |g|).
struct probe {
  double x{}, g{};
  sweep_point p;
};

probe refine(probe a, probe b, double tol, const std::function<double(const sweep_point&)>& residual, evaluator& eval) {
  if (a.x > b.x) std::swap(a, b);
  probe best = std::fabs(a.g) < std::fabs(b.g) ? a : b;
  int kept = 0;  // -1: a was kept by the last step, +1: b was
  for (int it = 0; it < 100 && std::fabs(best.g) > tol && b.x - a.x > 1e-13; ++it) {
    double x = (a.x * b.g - b.x * a.g) / (b.g - a.g);
    if (!std::isfinite(x) || !(x > a.x && x < b.x)) x = 0.5 * (a.x + b.x);
    probe m;
    m.x = x;
    m.p = eval(std::exp(x));
    m.g = residual(m.p);
    if (std::fabs(m.g) < std::fabs(best.g)) best = m;
    if ((m.g < 0) == (a.g < 0)) {
      a = m;
      if (kept == 1) b.g *= 0.5;  // b kept twice in a row: Illinois halving
      kept = 1;
    } else {
      b = m;
      if (kept == -1) a.g *= 0.5;
      kept = -1;
    }
  }
  return best;
}

double neper_from_db(double db) { return db * std::log(10.0) / 20.0; }

}  // namespace

void validate(const compare_settings& s) {
  // The level is a drive in one mode and an output in the other: the field says which.
  const char* level_field = s.mode == compare_mode::at_drive ? "drive_level_vpk" : "output_level_vpk";
  if (!(s.level_vpk > 0) || !std::isfinite(s.level_vpk))
    throw setting_error(level_field, "the comparison level must be above 0 V, got " + format_si(s.level_vpk, "Vpk"));
  if (s.harmonics < 2 || s.harmonics > 100)
    throw setting_error("harmonics", "the highest harmonic must be 2 to 100, got " + std::to_string(s.harmonics));
  if (!(s.max_drive_vpk > 0)) throw setting_error("max_drive_vpk", "the largest drive must be above 0 V");
  if (s.drive_db_spl) {
    if (s.mode != compare_mode::at_drive)
      throw internal_error("a sound pressure level is a drive: it needs the at-drive mode");
    if (!(*s.drive_db_spl >= 0 && *s.drive_db_spl <= 194))
      throw setting_error(level_field, "a sound pressure level must be 0 to 194 dB SPL, got " + format_number(*s.drive_db_spl, 4));
  }
  if (s.mode == compare_mode::at_drive && !s.drive_db_spl && s.level_vpk > s.max_drive_vpk)
    throw setting_error(level_field, "the drive " + format_si(s.level_vpk, "Vpk") + " is above the " +
                                         format_si(s.max_drive_vpk, "Vpk") + " limit of a comparison");
  if (!(s.output_tolerance_db > 0) || !(s.thd_tolerance > 0) || !(s.thd_search_from_vpk > 0) ||
      !(s.thd_search_from_vpk < s.max_drive_vpk) || !(s.max_thd_percent > 0))
    throw internal_error("comparison search settings out of range");
  base::check_thread_count(s.threads);
  validate(point_settings(s, std::min(s.level_vpk, s.max_drive_vpk)));
}

sweep_settings point_settings(const compare_settings& s, double drive_vpk) {
  sweep_settings p;
  p.frequency_hz = s.frequency_hz;
  p.drives_vpk = {drive_vpk};
  p.oversample = s.automatic_oversample ? automatic_oversampling(s.frequency_hz, s.base_rate_hz, s.bandwidth_hz) : s.oversample;
  p.base_rate_hz = s.base_rate_hz;
  p.harmonics = std::max(s.harmonics, 10);
  p.bandwidth_hz = s.bandwidth_hz;
  p.threads = 1;
  return p;
}

drive_search find_drive_for_output(const stage& st, const compare_settings& s, double target_vpk) {
  evaluator eval{st, s};
  const double tol = neper_from_db(s.output_tolerance_db);
  const double x_max = std::log(s.max_drive_vpk);
  auto residual = [&](const sweep_point& p) { return std::log(std::max(p.output_vpk, 1e-300) / target_vpk); };
  drive_search res;
  auto finish = [&](const probe& at, bool found, std::string why) {
    res.found = found;
    res.drive_vpk = at.p.drive_vpk;
    res.point = at.p;
    res.evaluations = eval.evaluations;
    res.reason = std::move(why);
    return res;
  };

  // Grow a bracket by secant steps in log-log (slope 1 to start: the stage is linear at
  // first), each step limited to a factor of 16 in drive.
  probe cur;
  cur.x = std::min(std::log(target_vpk), x_max);
  cur.p = eval(std::exp(cur.x));
  cur.g = residual(cur.p);
  std::optional<probe> lo, hi;
  probe prev = cur;
  bool has_prev = false;
  for (int it = 0; it < 60; ++it) {
    if (std::fabs(cur.g) <= tol) break;
    if (cur.g < 0) {
      lo = cur;
      if (cur.p.thd_percent > s.max_thd_percent)
        return finish(cur, false,
                      "its THD passes " + format_number(s.max_thd_percent, 3) + " % below the target: at drive " +
                          vpk_text(cur.p.drive_vpk) + " the THD is " + format_number(cur.p.thd_percent, 3) +
                          " % and the output only " + vpk_text(cur.p.output_vpk));
      if (cur.x >= x_max)
        return finish(cur, false,
                      "at the " + format_si(s.max_drive_vpk, "Vpk") + " drive limit its output is only " +
                          vpk_text(cur.p.output_vpk));
    } else {
      hi = cur;
    }
    if (lo && hi) break;
    double slope = 1.0;
    if (has_prev && cur.x != prev.x) slope = std::clamp((cur.g - prev.g) / (cur.x - prev.x), 0.02, 5.0);
    const double step = std::clamp(-cur.g / slope, -std::log(16.0), std::log(16.0));
    prev = cur;
    has_prev = true;
    cur.x = std::min(cur.x + step, x_max);
    cur.p = eval(std::exp(cur.x));
    cur.g = residual(cur.p);
  }
  probe best = cur;
  if (std::fabs(cur.g) > tol) {
    if (!(lo && hi)) return finish(cur, false, "the search for the drive did not close in on the target");
    best = refine(*lo, *hi, tol, residual, eval);
    if (std::fabs(best.g) > tol)
      return finish(best, false,
                    "its output does not settle to the target within " + format_number(s.output_tolerance_db, 2) +
                        " dB (closest " + vpk_text(best.p.output_vpk) + ")");
  }
  if (best.p.thd_percent > s.max_thd_percent)
    return finish(best, false,
                  "it reaches the output only at THD " + format_number(best.p.thd_percent, 3) + " %, beyond " +
                      format_number(s.max_thd_percent, 3) + " % (drive " + vpk_text(best.p.drive_vpk) + ")");
  return finish(best, true, {});
}

drive_search find_drive_for_thd(const stage& st, const compare_settings& s, double thd_percent) {
  evaluator eval{st, s};
  const double tol = std::log1p(s.thd_tolerance);
  auto residual = [&](const sweep_point& p) { return std::log(std::max(p.thd_percent, 1e-300) / thd_percent); };
  drive_search res;
  auto finish = [&](const probe& at, bool found, std::string why) {
    res.found = found;
    res.drive_vpk = at.p.drive_vpk;
    res.point = at.p;
    res.evaluations = eval.evaluations;
    res.reason = std::move(why);
    return res;
  };
  probe lo;
  lo.x = std::log(s.thd_search_from_vpk);
  lo.p = eval(s.thd_search_from_vpk);
  lo.g = residual(lo.p);
  if (lo.g >= 0)
    return finish(lo, false,
                  "THD is already " + format_number(lo.p.thd_percent, 3) + " % at the lowest drive tried, " +
                      vpk_text(s.thd_search_from_vpk));
  // Scan up in octaves: the first crossing from below is the one a rising level meets.
  for (;;) {
    probe hi;
    hi.x = std::min(lo.x + std::log(2.0), std::log(s.max_drive_vpk));
    hi.p = eval(std::exp(hi.x));
    hi.g = residual(hi.p);
    if (hi.g >= 0) return finish(refine(lo, hi, tol, residual, eval), true, {});
    if (hi.x >= std::log(s.max_drive_vpk))
      return finish(hi, false,
                    "THD stays below " + format_number(thd_percent, 3) + " % up to the " + format_si(s.max_drive_vpk, "Vpk") +
                        " drive limit (" + format_number(hi.p.thd_percent, 3) + " % there)");
    lo = hi;
  }
}

max_spl_figures find_max_spl(const stage& st, const compare_settings& s) {
  if (!st.has_capsule()) throw internal_error("find_max_spl: the stage has no capsule");
  max_spl_figures m;
  m.half_percent = find_drive_for_thd(st, s, 0.5);
  m.one_percent = find_drive_for_thd(st, s, 1.0);
  m.half_percent_db_spl = capsule_level_db_spl(st.capsule, m.half_percent.drive_vpk);
  m.one_percent_db_spl = capsule_level_db_spl(st.capsule, m.one_percent.drive_vpk);
  return m;
}

compare_plan plan_compare(const compare_settings& s) {
  validate(s);
  compare_plan p;
  p.settings_ = s;
  return p;
}

compare_result compare_designs(std::span<const stage> stages, const compare_settings& s) {
  return compare_designs(stages, plan_compare(s));
}

compare_result compare_designs(std::span<const stage> stages, const compare_plan& plan) {
  const compare_settings& s = plan.settings();
  compare_result res;
  {
    const sweep_settings p = point_settings(s, s.level_vpk);
    res.requested_hz = s.frequency_hz;
    res.sample_rate_hz = p.base_rate_hz * p.oversample;
    res.frequency_hz = plan_sweep(p).frequency_hz();
    res.thd_harmonics = p.harmonics;
    res.oversample = p.oversample;
  }
  res.harmonics = s.harmonics;
  res.mode = s.mode;
  res.level_vpk = s.level_vpk;
  res.drive_db_spl = s.drive_db_spl;
  res.designs.resize(stages.size());
  // A sound pressure level: each design's own capsule voltage, every one checked first.
  std::vector<double> drive(stages.size(), s.level_vpk);
  if (s.drive_db_spl)
    for (std::size_t k = 0; k < stages.size(); ++k) {
      const std::string which = "design " + std::to_string(k + 1) + " (" + stages[k].name + ")";
      if (!stages[k].has_capsule())
        throw setting_error("drive_level_vpk", format_number(*s.drive_db_spl, 4) + " dB SPL needs every design to have a capsule "
                                               "source ([signal] kind = \"capsule\" with its sensitivity); " + which + " has none");
      drive[k] = capsule_drive_vpk(stages[k].capsule, *s.drive_db_spl);
      if (drive[k] > s.max_drive_vpk)
        throw setting_error("drive_level_vpk", format_number(*s.drive_db_spl, 4) + " dB SPL gives " + which + " a drive of " +
                                               format_si(drive[k], "Vpk") + ", above the " + format_si(s.max_drive_vpk, "Vpk") +
                                               " limit of a comparison");
    }
  std::vector<std::vector<std::string>> trouble(stages.size());

  // Each design runs one point at a time; designs run at once only as many as fit in memory.
  const int threads = concurrent_points(s.threads, plan_sweep(point_settings(s, s.level_vpk)).samples_per_record());
  base::parallel_for(static_cast<int>(stages.size()), threads, [&](int i) {
    const std::size_t k = static_cast<std::size_t>(i);
    const stage& st = stages[k];
    design_figures& d = res.designs[k];
    const network net = build_network(st);
    const operating_point op = solve_operating_point(net);
    d.at = op.at;
    if (net.stages.size() > 1)
      for (const net_stage& ns : net.stages) {
        d.stage_labels.push_back(ns.label);
        d.stages_at.push_back(terminals_of(net, op.x, ns.jfet));
      }
    const small_signal_figures ss = analyse_small_signal(net, op);
    d.gain_midband = ss.gain_midband;
    d.gain_midband_db = base::db_from_ratio(std::fabs(ss.gain_midband));
    const headroom_figures h = analyse_headroom(net, op, headroom_detail::swing_only);
    d.clean_swing_vpk = h.symmetric_output_vpk;
    d.clean_drive_vpk = h.clean_drive_vpk;

    if (s.mode == compare_mode::at_drive) {
      evaluator eval{st, s};
      d.point = eval(drive[k]);
      d.drive_evaluations = 1;
    } else {
      const drive_search f = find_drive_for_output(st, s, s.level_vpk);
      d.point = f.point;
      d.reached = f.found;
      d.unreached_reason = f.reason;
      d.drive_evaluations = f.evaluations;
    }
    if (d.reached && d.point.output_vpk > d.clean_swing_vpk) {
      d.beyond_clean_swing = true;
      trouble[k].push_back("compared at " + format_si(d.point.output_vpk, "Vpk") + " at the load (" +
                           format_si(d.point.drive_vpk, "Vpk") + " drive), beyond its clean swing of " +
                           format_si(d.clean_swing_vpk, "Vpk") + ": its figures are those of a stage already out of its clean region (THD " +
                           base::format_number(d.point.thd_percent, 3) + " %); compare at a level within every design's clean swing");
    }
    d.thd_1_percent = find_drive_for_thd(st, s, 1.0);
    if (st.has_capsule()) d.thd_half_percent = find_drive_for_thd(st, s, 0.5);

    std::vector<const sweep_point*> points{&d.point, &d.thd_1_percent.point};
    if (d.thd_half_percent) points.push_back(&d.thd_half_percent->point);
    for (const sweep_point* p : points) {
      if (p->newton.failed > 0)
        trouble[k].push_back("at " + format_si(p->drive_vpk, "Vpk") + ", " + std::to_string(p->newton.failed) +
                             " samples did not converge even sub-stepped");
      if (!p->converged)
        trouble[k].push_back("at " + format_si(p->drive_vpk, "Vpk") + " the steady state was not reached (state still changes " +
                             format_si(p->state_change_v, "V") + " a period)");
    }
  });
  for (std::size_t k = 0; k < trouble.size(); ++k)
    for (const std::string& t : trouble[k]) res.warnings.push_back("design " + std::to_string(k + 1) + ": " + t);
  return res;
}

}  // namespace pinchoff::model
