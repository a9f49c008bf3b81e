#include "model/analysis/spread.hpp"
#include "model/device/fit.hpp"

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
  if (!s.parts.empty()) {
    if (s.idss_a || s.vp_v)
      throw setting_error("parts", "measured parts take the place of the IDSS and VP ranges: give one or the other");
    if (!s.parts_drawn && s.runs != static_cast<int>(s.parts.size()))
      throw setting_error("runs", "every part once is " + std::to_string(s.parts.size()) + " runs, got " + std::to_string(s.runs));
    for (const bag_part& p : s.parts)
      if (!(sign * p.vp_v < 0))
        throw setting_error("parts", "part '" + p.name + "' is " + (sign > 0 ? "p" : "n") + "-channel and the stage is not");
  }
}

std::vector<bag_part> parts_for_spread(const std::vector<part_figures>& parts, const stage& st) {
  std::vector<bag_part> out;
  const double sign = polarity_sign(st);
  for (const part_figures& p : parts) {
    if ((p.p_channel ? -1.0 : 1.0) != sign)
      throw setting_error("parts", "part '" + p.name + "' is " + (p.p_channel ? "p" : "n") + "-channel and the stage is not");
    bag_part b;
    b.name = p.name;
    // A fitted lambda is the part's own; else the stage's lambda carries IDSS from the VDS
    // it was measured at to the model's VDS = 0.
    const double lambda = p.lambda_per_v > 0.0 ? p.lambda_per_v : st.jfet.lambda_per_v;
    b.idss_a = p.idss_a / (1.0 + lambda * p.idss_vds_v);
    b.vp_v = p.vp_v;
    if (p.lambda_per_v > 0.0) b.lambda_per_v = p.lambda_per_v;
    out.push_back(std::move(b));
  }
  return out;
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
  // Measured parts: every part once (in a chain stage k takes the part k further on), or
  // drawn from the bag.
  const std::size_t bag = s.parts.size();
  auto take_part = [&](int stage_index, double& idss, double& vp, double& lambda, int& at) {
    at = s.parts_drawn ? static_cast<int>(std::min<double>(static_cast<double>(bag) - 1, std::floor(g.unit() * static_cast<double>(bag))))
                       : static_cast<int>((static_cast<std::size_t>(index) + static_cast<std::size_t>(stage_index)) % bag);
    const bag_part& p = s.parts[static_cast<std::size_t>(at)];
    idss = p.idss_a;
    vp = p.vp_v;
    lambda = p.lambda_per_v;
  };
  if (bag > 0) take_part(0, d.idss_a, d.vp_v, d.lambda_per_v, d.bag_index);
  else draw_jfet(st, d.idss_a, d.vp_v);
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
    if (bag > 0) take_part(static_cast<int>(d.later.size()), q.idss_a, q.vp_v, q.lambda_per_v, q.bag_index);
    else draw_jfet(p, q.idss_a, q.vp_v);
  }
  return d;
}

stage apply_draw(const stage& st, const spread_draw& d) {
  stage s = st;
  s.jfet.idss_a = d.idss_a;
  s.jfet.vp_v = d.vp_v;
  if (!std::isnan(d.lambda_per_v)) s.jfet.lambda_per_v = d.lambda_per_v;
  s.supply.volts_v = d.supply_v;
  for (std::size_t k = 0; k < d.later.size() && k < s.later.size(); ++k) {
    s.later[k].jfet.idss_a = d.later[k].idss_a;
    s.later[k].jfet.vp_v = d.later[k].vp_v;
    if (!std::isnan(d.later[k].lambda_per_v)) s.later[k].jfet.lambda_per_v = d.later[k].lambda_per_v;
  }
  const auto keys = adjustable_resistor_keys(s);
  for (std::size_t k = 0; k < keys.size(); ++k) *resistor_field(s, keys[k]) *= d.resistor_factors[k];
  return s;
}

const std::vector<quantity_def>& spread_quantities() {
  static const std::vector<quantity_def> q{
      {"id", "id_a", "A", true},          {"vd", "vd_v", "V", true},        {"vs", "vs_v", "V", true},
      {"vds", "vds_v", "V", true},        {"vgs", "vgs_v", "V", true},      {"gain", "gain_db", "dB", false},
      {"swing", "swing_vpk", "V", false}, {"thd", "thd_percent", "%", false},
      // The noise at the load over 20 Hz to 20 kHz and the EIN (model/analysis/noise.hpp),
      // measured by a run_extra as thd is.
      {"noise", "output_noise_v", "V", false}, {"noise_a", "output_noise_a_v", "V", false},
      {"ein", "ein_dbu", "dBu", false},     {"ein_a", "ein_a_dbu", "dBu", false},
  };
  return q;
}

std::string spread_quantity_name(const stage& st, int k, const quantity_def& q) {
  return q.per_stage ? stage_key(st, k, q.name) : std::string(q.name);
}

std::vector<std::string> spread_quantity_names(const stage& st) {
  std::vector<std::string> names;
  for (int k = 0; k < st.stage_count(); ++k)
    for (const quantity_def& q : spread_quantities())
      if (q.per_stage) names.push_back(spread_quantity_name(st, k, q));
  for (const quantity_def& q : spread_quantities())
    if (!q.per_stage) names.push_back(q.name);
  return names;
}

named_quantity split_quantity_name(std::string_view name) {
  named_quantity n;
  if (name.size() > 6 && name.substr(0, 5) == "stage" && name[5] >= '1' && name[5] <= '9') {
    std::size_t digits = 5;
    while (digits < name.size() && name[digits] >= '0' && name[digits] <= '9') ++digits;
    if (digits < name.size() && name[digits] == '.' && digits - 5 <= 2) {
      n.stage = std::stoi(std::string(name.substr(5, digits - 5))) - 1;
      name = name.substr(digits + 1);
    }
  }
  for (const quantity_def& q : spread_quantities())
    if (name == q.name) n.def = &q;
  return n;
}

std::vector<requirement> resolve_requirements(const stage& st, const std::vector<requirement>& reqs) {
  std::vector<requirement> out;
  for (const requirement& r : reqs) {
    const named_quantity n = split_quantity_name(r.quantity);
    if (n.def == nullptr) throw setting_error("requirements", "'" + r.quantity + "' is not a quantity a run measures");
    const std::string plain = n.def->name;
    if (n.stage >= 0 && !n.def->per_stage)
      throw setting_error("requirements", r.quantity + ": " + plain +
                                              " is the whole design's, from the generator to the load: write " + plain +
                                              "=LO..HI without a stage");
    if (n.stage >= st.stage_count())
      throw setting_error("requirements", r.quantity + ": " +
                                              (st.is_chain() ? "the chain has " + std::to_string(st.stage_count()) +
                                                                   " stages, so there is no stage " + std::to_string(n.stage + 1)
                                                             : "the file describes one stage, so there is no stage " +
                                                                   std::to_string(n.stage + 1)));
    if (st.is_chain() && n.def->per_stage && n.stage < 0) {
      std::string choices;
      for (int k = 0; k < st.stage_count(); ++k)
        choices += (k == 0 ? "" : k + 1 == st.stage_count() ? " or " : ", ") + spread_quantity_name(st, k, *n.def);
      throw setting_error("requirements", r.quantity + ": the file is a chain of " + std::to_string(st.stage_count()) +
                                              " stages, so name the stage whose " + plain + " it is: " + choices +
                                              " (gain, swing and thd are the chain's, from the generator to the load, and so are noise and ein)");
    }
    requirement q = r;
    q.quantity = spread_quantity_name(st, std::max(n.stage, 0), *n.def);
    out.push_back(q);
  }
  return out;
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
  const std::vector<requirement> resolved = resolve_requirements(st, reqs);
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
      const headroom_figures h = analyse_headroom(net, op, headroom_detail::swing_only);
      // Every stage's own terminals; "in saturation" must hold for each of them.
      bool saturated = true;
      for (int k = 0; k < st.stage_count(); ++k) {
        const int device = net.stages.empty() ? k : net.stages[static_cast<std::size_t>(k)].jfet;
        const terminal_point at = k == 0 && device == 0 ? op.at : terminals_of(net, op.x, device);
        run.values[stage_key(st, k, "id")] = at.id_a;
        run.values[stage_key(st, k, "vd")] = at.vd_v;
        run.values[stage_key(st, k, "vs")] = at.vs_v;
        run.values[stage_key(st, k, "vds")] = at.vds_v;
        run.values[stage_key(st, k, "vgs")] = at.vgs_v;
        saturated = saturated && at.region == jfet_region::saturation;
      }
      run.values["gain"] = base::db_from_ratio(std::fabs(ss.gain_midband));
      run.values["swing"] = h.symmetric_output_vpk;
      if (extra) extra(drawn, run.values);
      run.solved = true;
      run.meets = saturated;
      for (const requirement& r : resolved) {
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
  for (const std::string& name : spread_quantity_names(st)) {
    std::vector<double> v;
    for (const spread_run& r : res.runs)
      if (auto it = r.values.find(name); it != r.values.end() && std::isfinite(it->second)) v.push_back(it->second);
    if (v.empty()) continue;
    std::sort(v.begin(), v.end());
    res.stats[name] = {percentile_sorted(v, 5), percentile_sorted(v, 50), percentile_sorted(v, 95), v.front(),
                         v.back(), static_cast<int>(v.size())};
  }
  return res;
}

const std::vector<double>& standard_trimmers_ohm() {
  static const std::vector<double> t{100, 200, 500, 1e3, 2e3, 5e3, 10e3, 20e3, 50e3, 100e3, 200e3, 500e3, 1e6};
  return t;
}

namespace {

bool covers(const trim_result& t, double r) noexcept { return r >= t.fixed_ohm && r <= t.fixed_ohm + t.trimmer_ohm; }

// The fixed resistor and trimmer that cover a pair's exact values.
void fit_trimmer(trim_result& res, base::eseries series, int runs) {
  std::vector<double> ok;
  for (double r : res.exact_ohm)
    if (std::isfinite(r)) ok.push_back(r);
  res.reachable = static_cast<int>(ok.size());
  if (ok.empty()) return;
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
    if (covers(res, r)) ++covered;
  res.coverage = static_cast<double>(covered) / runs;
}

}  // namespace

trim_set size_trimmers(const stage& st, const std::vector<tune_pair>& pairs, const spread_settings& s,
                       base::eseries series) {
  validate(s, st);
  if (pairs.empty()) throw setting_error("target", "give a target to size a trimmer for");
  for (const tune_pair& p : pairs)
    if (p.target.kind == target_kind::center)
      throw setting_error("target", "sizing a trimmer over a batch needs a bias target such as vd=4.5 or id=1m, not center");
  validate_pairs(st, pairs);
  // Named keys and stages are checked once on the design, before any part is drawn.
  for (const tune_pair& p : pairs) {
    stage probe = st;
    if (resistor_field(probe, p.adjust) == nullptr) (void)solve_resistor(st, p.adjust, p.target);
    (void)target_stage(st, p.adjust, p.target);
  }
  trim_set set;
  set.trims.resize(pairs.size());
  for (std::size_t k = 0; k < pairs.size(); ++k) {
    set.trims[k].adjust = pairs[k].adjust;
    set.trims[k].exact_ohm.assign(static_cast<std::size_t>(s.runs), NAN);
  }
  std::vector<int> rounds(static_cast<std::size_t>(s.runs), 0);
  std::vector<char> unsettled(static_cast<std::size_t>(s.runs), 0);
  // The adjusted resistors themselves are what the trimmers set: their tolerance does not apply.
  base::parallel_for(s.runs, s.threads, [&](int i) {
    const spread_draw d = draw_part(s, st, i);
    try {
      const joint_solution sol = solve_resistors(apply_draw(st, d), pairs);
      rounds[static_cast<std::size_t>(i)] = sol.rounds;
      if (!sol.settled) {
        unsettled[static_cast<std::size_t>(i)] = 1;
        return;
      }
      for (std::size_t k = 0; k < pairs.size(); ++k) set.trims[k].exact_ohm[static_cast<std::size_t>(i)] = sol.ohm[k];
    } catch (const input_error&) {
      // Unreachable for this part: counted below.
    }
  });
  for (int i = 0; i < s.runs; ++i) {
    set.most_rounds = std::max(set.most_rounds, rounds[static_cast<std::size_t>(i)]);
    set.unsettled += unsettled[static_cast<std::size_t>(i)];
    if (std::isfinite(set.trims[0].exact_ohm[static_cast<std::size_t>(i)])) ++set.settled;
  }
  if (set.settled == 0) {
    if (pairs.size() == 1)
      throw input_error("no part of the spread can reach " + target_text(pairs[0].target) + " by adjusting " +
                        pairs[0].adjust);
    std::string what;
    for (const tune_pair& p : pairs) what += (what.empty() ? "" : ", ") + target_text(p.target) + " by " + p.adjust;
    throw input_error("no part of the spread can reach every target together (" + what + ")" +
                      (set.unsettled > 0 ? ": the adjustments of " + std::to_string(set.unsettled) +
                                               " parts did not settle in " + std::to_string(joint_max_rounds) + " rounds"
                                         : std::string()));
  }
  for (trim_result& t : set.trims) fit_trimmer(t, series, s.runs);
  int all = 0;
  for (int i = 0; i < s.runs; ++i) {
    bool every = true;
    for (const trim_result& t : set.trims) {
      const double r = t.exact_ohm[static_cast<std::size_t>(i)];
      every = every && std::isfinite(r) && covers(t, r);
    }
    if (every) ++all;
  }
  set.coverage_all = static_cast<double>(all) / s.runs;
  return set;
}

trim_result size_trimmer(const stage& st, std::string_view adjust_key, const tune_target& target,
                         const spread_settings& s, base::eseries series) {
  return size_trimmers(st, {tune_pair{std::string(adjust_key), target}}, s, series).trims.front();
}

}  // namespace pinchoff::model
