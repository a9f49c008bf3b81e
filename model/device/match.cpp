#include "model/device/match.hpp"

#include <algorithm>
#include <cmath>
#include <limits>
#include <numeric>

#include "base/error.hpp"
#include "base/units.hpp"

namespace pinchoff::model {
namespace {

constexpr double nan = std::numeric_limits<double>::quiet_NaN();

struct scales {
  double idss{default_idss_scale}, vp{default_vp_scale_v}, vgs{default_vgs_scale_v};
};

// The set's spread in the ranking's scales: the larger of its spreads, each over its scale.
double set_score(const std::vector<int>& set, const std::vector<part_figures>& parts, const std::vector<double>& vgs,
                 match_basis basis, const scales& sc) {
  double imin = 1e300, imax = 0.0, vmin = 1e300, vmax = -1e300;
  for (const int k : set) {
    const part_figures& p = parts[static_cast<std::size_t>(k)];
    if (basis == match_basis::idss_and_vp) {
      imin = std::min(imin, p.idss_a);
      imax = std::max(imax, p.idss_a);
      vmin = std::min(vmin, p.vp_v);
      vmax = std::max(vmax, p.vp_v);
    } else {
      vmin = std::min(vmin, vgs[static_cast<std::size_t>(k)]);
      vmax = std::max(vmax, vgs[static_cast<std::size_t>(k)]);
    }
  }
  if (basis == match_basis::vgs_at_current) return (vmax - vmin) / sc.vgs;
  return std::max(std::log(imax / imin) / sc.idss, (vmax - vmin) / sc.vp);
}

matched_set describe(std::vector<int> set, const std::vector<part_figures>& parts, const std::vector<double>& vgs,
                     match_basis basis, const scales& sc) {
  std::sort(set.begin(), set.end());
  matched_set m;
  m.score = set_score(set, parts, vgs, basis, sc);
  double imin = 1e300, imax = 0.0, pmin = 1e300, pmax = -1e300, gmin = 1e300, gmax = -1e300;
  for (const int k : set) {
    const part_figures& p = parts[static_cast<std::size_t>(k)];
    imin = std::min(imin, p.idss_a);
    imax = std::max(imax, p.idss_a);
    pmin = std::min(pmin, p.vp_v);
    pmax = std::max(pmax, p.vp_v);
    if (basis == match_basis::vgs_at_current) {
      gmin = std::min(gmin, vgs[static_cast<std::size_t>(k)]);
      gmax = std::max(gmax, vgs[static_cast<std::size_t>(k)]);
    }
  }
  m.idss_spread_a = imax - imin;
  m.vp_spread_v = pmax - pmin;
  m.vgs_spread_v = basis == match_basis::vgs_at_current ? gmax - gmin : nan;
  m.parts = std::move(set);
  return m;
}

}  // namespace

double vgs_at_current(const part_figures& p, double current_a) noexcept {
  // Square law in saturation: id = idss (1 - vgs / vp)^2, so vgs = vp (1 - sqrt(id / idss)).
  if (!(current_a <= p.idss_a)) return nan;
  return p.vp_v * (1.0 - std::sqrt(current_a / p.idss_a));
}

match_result match_parts(const std::vector<part_figures>& parts, const match_settings& s) {
  if (s.set_size < 2 || s.set_size > max_set_size)
    throw setting_error("set_size", "a set is 2 to " + std::to_string(max_set_size) + " parts, got " + std::to_string(s.set_size));
  if (s.basis == match_basis::vgs_at_current && !(s.current_a > 0.0 && s.current_a <= 2.0))
    throw setting_error("current", "the drain current to match VGS at must be above 0 and at most 2 A, got " +
                                       base::format_si(s.current_a, "A"));
  for (const std::optional<double>& t : {s.idss_tolerance_ratio, s.vp_tolerance_v, s.vgs_tolerance_v})
    if (t && !(*t > 0.0 && std::isfinite(*t)))
      throw setting_error("tolerance", "a tolerance must be above 0, got " + base::format_number(*t));
  if (parts.size() > static_cast<std::size_t>(max_match_parts))
    throw input_error(std::to_string(parts.size()) + " parts: a match takes at most " + std::to_string(max_match_parts) +
                      " (split the bag)");
  for (const part_figures& p : parts)
    if (p.p_channel != parts.front().p_channel)
      throw input_error("part '" + p.name + "' is " + (p.p_channel ? "p" : "n") + "-channel and part '" + parts.front().name +
                        "' is not: a matched set is of one polarity");

  scales sc;
  if (s.idss_tolerance_ratio) sc.idss = *s.idss_tolerance_ratio;
  if (s.vp_tolerance_v) sc.vp = *s.vp_tolerance_v;
  if (s.vgs_tolerance_v) sc.vgs = *s.vgs_tolerance_v;
  const bool bounded = s.basis == match_basis::vgs_at_current ? s.vgs_tolerance_v.has_value()
                                                               : (s.idss_tolerance_ratio || s.vp_tolerance_v);
  // With one tolerance of the two given, the other does not bound the set.
  if (s.basis == match_basis::idss_and_vp && bounded) {
    if (!s.idss_tolerance_ratio) sc.idss = 1e300;
    if (!s.vp_tolerance_v) sc.vp = 1e300;
  }

  match_result res;
  const int n = static_cast<int>(parts.size());
  std::vector<bool> free(static_cast<std::size_t>(n), true);
  if (s.basis == match_basis::vgs_at_current) {
    res.vgs_v.resize(static_cast<std::size_t>(n));
    for (int k = 0; k < n; ++k) {
      res.vgs_v[static_cast<std::size_t>(k)] = vgs_at_current(parts[static_cast<std::size_t>(k)], s.current_a);
      if (std::isnan(res.vgs_v[static_cast<std::size_t>(k)])) free[static_cast<std::size_t>(k)] = false;
    }
  }
  // Pair scores once; each part's neighbours nearest first (ties by index, so the result
  // is a function of the parts and their order alone).
  std::vector<double> d(static_cast<std::size_t>(n) * static_cast<std::size_t>(n), 0.0);
  for (int a = 0; a < n; ++a)
    for (int b = a + 1; b < n; ++b)
      if (free[static_cast<std::size_t>(a)] && free[static_cast<std::size_t>(b)])
        d[static_cast<std::size_t>(a) * n + b] = d[static_cast<std::size_t>(b) * n + a] =
            set_score({a, b}, parts, res.vgs_v, s.basis, sc);
  std::vector<std::vector<int>> near(static_cast<std::size_t>(n));
  for (int a = 0; a < n; ++a) {
    if (!free[static_cast<std::size_t>(a)]) continue;
    for (int b = 0; b < n; ++b)
      if (b != a && free[static_cast<std::size_t>(b)]) near[static_cast<std::size_t>(a)].push_back(b);
    std::stable_sort(near[static_cast<std::size_t>(a)].begin(), near[static_cast<std::size_t>(a)].end(),
                     [&](int x, int y) { return d[static_cast<std::size_t>(a) * n + x] < d[static_cast<std::size_t>(a) * n + y]; });
  }

  const int k = s.set_size;
  // Each part's first neighbour still free: the lists only lose parts, so the pointers
  // only move on, and the whole grouping walks each list once.
  std::vector<std::size_t> first_free(static_cast<std::size_t>(n), 0);
  for (;;) {
    std::vector<int> best;
    double best_score = std::numeric_limits<double>::infinity();
    for (int a = 0; a < n; ++a) {
      if (!free[static_cast<std::size_t>(a)]) continue;
      const std::vector<int>& na = near[static_cast<std::size_t>(a)];
      std::size_t& at = first_free[static_cast<std::size_t>(a)];
      while (at < na.size() && !free[static_cast<std::size_t>(na[at])]) ++at;
      // The part with its k - 1 nearest free neighbours. For pairs this is exact: the
      // tightest pair is some part with its nearest neighbour.
      std::vector<int> set{a};
      for (std::size_t j = at; j < na.size() && static_cast<int>(set.size()) < k; ++j)
        if (free[static_cast<std::size_t>(na[j])]) set.push_back(na[j]);
      if (static_cast<int>(set.size()) < k) continue;
      const double score = set_score(set, parts, res.vgs_v, s.basis, sc);
      std::sort(set.begin(), set.end());
      if (score < best_score || (score == best_score && set < best)) {
        best_score = score;
        best = set;
      }
    }
    if (best.empty() || (bounded && best_score > 1.0)) break;
    for (const int p : best) free[static_cast<std::size_t>(p)] = false;
    res.sets.push_back(describe(best, parts, res.vgs_v, s.basis, sc));
  }
  std::vector<bool> used(static_cast<std::size_t>(n), false);
  for (const matched_set& m : res.sets)
    for (const int p : m.parts) used[static_cast<std::size_t>(p)] = true;
  for (int p = 0; p < n; ++p)
    if (!used[static_cast<std::size_t>(p)]) res.left_over.push_back(p);
  return res;
}

}  // namespace pinchoff::model
