#include "model/analysis/spread.hpp"

#include <algorithm>
#include <cmath>
#include <numbers>
#include <thread>

#include "base/error.hpp"
#include "base/threads.hpp"
#include "model/analysis/headroom.hpp"
#include "model/circuit/network.hpp"
#include "model/analysis/small_signal.hpp"

namespace pinchoff::model {
namespace {

// SplitMix64 (Steele, Lea & Flood, "Fast splittable pseudorandom number generators",
// OOPSLA 2014): a fixed, portable mixer, so run i always gets the same numbers.
struct splitmix64 {
  std::uint64_t state;
  std::uint64_t next() noexcept {
    std::uint64_t z = (state += 0x9E3779B97F4A7C15ull);
    z = (z ^ (z >> 30)) * 0xBF58476D1CE4E5B9ull;
    z = (z ^ (z >> 27)) * 0x94D049BB133111EBull;
    return z ^ (z >> 31);
  }
  double unit() noexcept { return static_cast<double>(next() >> 11) * 0x1.0p-53; }  // [0, 1)
  // Box & Muller 1958.
  double gauss() noexcept {
    const double u1 = 1.0 - unit(), u2 = unit();
    return std::sqrt(-2.0 * std::log(u1)) * std::cos(2.0 * std::numbers::pi * u2);
  }
};

double normal_cdf(double z) noexcept { return 0.5 * std::erfc(-z / std::numbers::sqrt2); }

// Maps a standard normal draw onto a range: uniform (through its CDF, a Gaussian copula
// that keeps the correlation structure) or normal (mean at the centre, the range = +-3 sigma).
double to_range(double z, const base::value_range& r, spread_distribution d) noexcept {
  if (d == spread_distribution::uniform) return r.lo + (r.hi - r.lo) * normal_cdf(z);
  return 0.5 * (r.lo + r.hi) + (r.hi - r.lo) / 6.0 * z;
}

}  // namespace

void validate(const spread_settings& s, const stage& st) {
  using base::format_number;
  using base::format_si;
  const double sign = polarity_sign(st);
  if (s.idss_a && !(s.idss_a->lo > 0))
    throw setting_error("idss_a", "the IDSS range must be above 0 A, got " + format_si(s.idss_a->lo, "A") + " at its low end");
  if (s.vp_v && !(sign * s.vp_v->hi < 0 && sign * s.vp_v->lo < 0))
    throw setting_error("vp_v", std::string("pinch-off voltages must be ") +
                                    (sign > 0 ? "negative for an n-channel part" : "positive for a p-channel part"));
  if (s.supply_v && !(sign * s.supply_v->lo > 0 && sign * s.supply_v->hi > 0))
    throw setting_error("supply_v", std::string("the supply range must be ") + (sign > 0 ? "positive" : "negative") +
                                        " like the stage's supply");
  if (!(s.correlation >= -1 && s.correlation <= 1))
    throw setting_error("correlation", "the correlation must be -1 to 1, got " + format_number(s.correlation));
  if (!(s.resistor_tolerance >= 0 && s.resistor_tolerance < 0.5))
    throw setting_error("resistor_tolerance",
                        "the resistor tolerance must be below 50 %, got " + format_number(100 * s.resistor_tolerance) + " %");
  if (s.runs < 1 || s.runs > max_spread_runs)
    throw setting_error("runs", "the number of runs must be 1 to " + std::to_string(max_spread_runs) + ", got " +
                                    std::to_string(s.runs) +
                                    " (100,000 runs give the yield to within 0.16 %; each run takes about 0.5 ms and "
                                    "1 KB, so more would take minutes and gigabytes for no better answer)");
  base::check_thread_count(s.threads);
}

spread_draw draw_part(const spread_settings& s, const stage& st, int index) {
  splitmix64 g{s.seed * 0xD1B54A32D192ED03ull + static_cast<std::uint64_t>(index) * 0x9E3779B97F4A7C15ull};
  g.next();
  spread_draw d;
  auto draw_jfet = [&](const stage_parts& p, double& idss, double& vp) {
    // Correlated pair (z1, z2): corr(z1, z2) = rho. For the normal form, redraw the pair
    // until both lie within +-3 sigma, so every part stays inside its range.
    double z1 = 0, z2 = 0;
    for (int tries = 0; tries < 1000; ++tries) {
      z1 = g.gauss();
      z2 = s.correlation * z1 + std::sqrt(std::max(0.0, 1.0 - s.correlation * s.correlation)) * g.gauss();
      if (s.distribution == spread_distribution::uniform || (std::fabs(z1) <= 3 && std::fabs(z2) <= 3)) break;
    }
    idss = s.idss_a ? to_range(z1, *s.idss_a, s.distribution) : p.jfet.idss_a;
    if (s.vp_v) {
      // Correlate IDSS with |VP|: draw the magnitude.
      const base::value_range mag{std::min(std::fabs(s.vp_v->lo), std::fabs(s.vp_v->hi)),
                                 std::max(std::fabs(s.vp_v->lo), std::fabs(s.vp_v->hi))};
      vp = (st.pol == polarity::p ? 1.0 : -1.0) * to_range(z2, mag, s.distribution);
    } else {
      vp = p.jfet.vp_v;
    }
  };
  draw_jfet(st, d.idss_a, d.vp_v);
  const double us = g.unit();
  d.supply_v = s.supply_v ? s.supply_v->lo + (s.supply_v->hi - s.supply_v->lo) * us : st.supply.volts_v;
  const std::size_t resistors = adjustable_resistor_keys(st).size();
  for (std::size_t k = 0; k < resistors; ++k) {
    double f = 1.0;
    if (s.resistor_tolerance > 0) {
      if (s.distribution == spread_distribution::uniform) {
        f = 1.0 + s.resistor_tolerance * (2.0 * g.unit() - 1.0);
      } else {
        double z = g.gauss();
        while (std::fabs(z) > 3) z = g.gauss();
        f = 1.0 + s.resistor_tolerance / 3.0 * z;
      }
    } else {
      g.unit();  // keep the stream aligned whatever the tolerance
    }
    d.resistor_factors.push_back(f);
  }
  // A chain's later parts come after, so a single stage draws what it always drew.
  for (const stage_parts& p : st.later) {
    spread_draw::part& q = d.later.emplace_back();
    draw_jfet(p, q.idss_a, q.vp_v);
  }
  return d;
}

stage apply_draw(const stage& st, const spread_draw& d) {
  stage s = st;
  s.jfet.idss_a = d.idss_a;
  s.jfet.vp_v = d.vp_v;
  s.supply.volts_v = d.supply_v;
  for (std::size_t k = 0; k < d.later.size() && k < s.later.size(); ++k) {
    s.later[k].jfet.idss_a = d.later[k].idss_a;
    s.later[k].jfet.vp_v = d.later[k].vp_v;
  }
  const auto keys = adjustable_resistor_keys(s);
  for (std::size_t k = 0; k < keys.size(); ++k) *resistor_field(s, keys[k]) *= d.resistor_factors[k];
  return s;
}

const std::vector<quantity_def>& spread_quantities() {
  static const std::vector<quantity_def> q{
      {"id", "id_a", "A"},         {"vd", "vd_v", "V"},       {"vs", "vs_v", "V"},
      {"vds", "vds_v", "V"},       {"vgs", "vgs_v", "V"},     {"gain", "gain_db", "dB"},
      {"swing", "swing_vpk", "V"}, {"thd", "thd_percent", "%"},
  };
  return q;
}

double percentile_sorted(const std::vector<double>& v, double p) {
  if (v.empty()) return NAN;
  const double h = (static_cast<double>(v.size()) - 1.0) * p / 100.0;
  const std::size_t lo = static_cast<std::size_t>(std::floor(h));
  const std::size_t hi = std::min(lo + 1, v.size() - 1);
  return v[lo] + (h - static_cast<double>(lo)) * (v[hi] - v[lo]);
}

spread_result run_spread(const stage& st, const spread_settings& s, const std::vector<requirement>& reqs,
                         const run_extra& extra) {
  validate(s, st);
  spread_result res;
  res.runs.resize(static_cast<std::size_t>(s.runs));
  base::parallel_for(s.runs, s.threads, [&](int i) {
    spread_run& run = res.runs[static_cast<std::size_t>(i)];
    run.index = i;
    run.draw = draw_part(s, st, i);
    try {
      const stage drawn = apply_draw(st, run.draw);
      const network net = build_network(drawn);
      const operating_point op = solve_operating_point(net);
      const small_signal_figures ss = analyse_small_signal(net, op);
      const headroom_figures h = analyse_headroom(net, op);
      run.values["id"] = op.at.id_a;
      run.values["vd"] = op.at.vd_v;
      run.values["vs"] = op.at.vs_v;
      run.values["vds"] = op.at.vds_v;
      run.values["vgs"] = op.at.vgs_v;
      run.values["gain"] = base::db_from_ratio(std::fabs(ss.gain_midband));
      run.values["swing"] = h.symmetric_output_vpk;
      if (extra) extra(drawn, run.values);
      run.solved = true;
      run.meets = op.at.region == jfet_region::saturation;
      for (const requirement& r : reqs) {
        const auto it = run.values.find(r.quantity);
        if (it == run.values.end() || !(it->second >= r.lo && it->second <= r.hi)) run.meets = false;
      }
    } catch (const std::exception& e) {
      run.failure = e.what();
    }
  });
  int meets = 0;
  for (const spread_run& r : res.runs) {
    if (!r.solved) ++res.unsolved;
    if (r.meets) ++meets;
  }
  res.yield = static_cast<double>(meets) / s.runs;
  for (const quantity_def& q : spread_quantities()) {
    std::vector<double> v;
    for (const spread_run& r : res.runs)
      if (auto it = r.values.find(q.name); it != r.values.end() && std::isfinite(it->second)) v.push_back(it->second);
    if (v.empty()) continue;
    std::sort(v.begin(), v.end());
    res.stats[q.name] = {percentile_sorted(v, 5), percentile_sorted(v, 50), percentile_sorted(v, 95), v.front(),
                         v.back(), static_cast<int>(v.size())};
  }
  return res;
}

const std::vector<double>& standard_trimmers_ohm() {
  static const std::vector<double> t{100, 200, 500, 1e3, 2e3, 5e3, 10e3, 20e3, 50e3, 100e3, 200e3, 500e3, 1e6};
  return t;
}

trim_result size_trimmer(const stage& st, std::string_view adjust_key, const tune_target& target,
                         const spread_settings& s, base::eseries series) {
  validate(s, st);
  if (target.kind == target_kind::center)
    throw setting_error("target", "sizing a trimmer over a batch needs a bias target such as vd=4.5 or id=1m, not center");
  trim_result res;
  res.adjust = std::string(adjust_key);
  res.exact_ohm.assign(static_cast<std::size_t>(s.runs), NAN);
  // The adjusted resistor itself is what the trimmer sets: its tolerance does not apply.
  base::parallel_for(s.runs, s.threads, [&](int i) {
    const spread_draw d = draw_part(s, st, i);
    try {
      res.exact_ohm[static_cast<std::size_t>(i)] = solve_resistor(apply_draw(st, d), adjust_key, target);
    } catch (const input_error&) {
      // Unreachable for this part: counted below.
    }
  });
  std::vector<double> ok;
  for (double r : res.exact_ohm)
    if (std::isfinite(r)) ok.push_back(r);
  res.reachable = static_cast<int>(ok.size());
  if (ok.empty()) throw input_error("no part of the spread can reach " + target_text(target) + " by adjusting " + res.adjust);
  std::sort(ok.begin(), ok.end());
  res.r_min = ok.front();
  res.r_max = ok.back();
  res.r_p5 = percentile_sorted(ok, 5);
  res.r_p95 = percentile_sorted(ok, 95);
  // Fixed part: the largest standard value not above the smallest needed; trimmer: the
  // smallest standard trimmer that spans the rest.
  res.fixed_ohm = base::series_at_or_below(series, res.r_min);
  if (res.fixed_ohm > res.r_min) res.fixed_ohm = 0.0;
  res.trimmer_ohm = standard_trimmers_ohm().back();
  for (double t : standard_trimmers_ohm())
    if (res.fixed_ohm + t >= res.r_max) {
      res.trimmer_ohm = t;
      break;
    }
  int covered = 0;
  for (double r : ok)
    if (r >= res.fixed_ohm && r <= res.fixed_ohm + res.trimmer_ohm) ++covered;
  res.coverage = static_cast<double>(covered) / s.runs;
  return res;
}

}  // namespace pinchoff::model
