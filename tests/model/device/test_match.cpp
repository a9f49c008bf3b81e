// Matched sets from a bag of parts.
#include <algorithm>
#include <cmath>
#include <random>
#include <string>
#include <vector>

#include <doctest/doctest.h>

#include "base/error.hpp"
#include "model/device/match.hpp"

namespace test_match {

using namespace pinchoff;
using namespace pinchoff::model;

namespace {
part_figures part(std::string name, double idss, double vp) {
  part_figures p;
  p.name = std::move(name);
  p.idss_a = idss;
  p.vp_v = vp;
  return p;
}
// "p3a": a made part's name (appended, not added, which gcc 12 warns of wrongly).
std::string label(char kind, std::size_t k, const std::string& tail) {
  std::string s(1, kind);
  s += std::to_string(k);
  s += tail;
  return s;
}
std::vector<std::string> names(const matched_set& m, const std::vector<part_figures>& parts) {
  std::vector<std::string> n;
  for (int k : m.parts) n.push_back(parts[static_cast<std::size_t>(k)].name);
  std::sort(n.begin(), n.end());
  return n;
}
// Each set's stated spread is the max - min of its members (checked from the parts
// themselves), so every member lies within it.
void check_spreads(const match_result& r, const std::vector<part_figures>& parts) {
  for (const matched_set& m : r.sets) {
    double imin = 1e300, imax = 0, vmin = 1e300, vmax = -1e300;
    for (int k : m.parts) {
      imin = std::min(imin, parts[static_cast<std::size_t>(k)].idss_a);
      imax = std::max(imax, parts[static_cast<std::size_t>(k)].idss_a);
      vmin = std::min(vmin, parts[static_cast<std::size_t>(k)].vp_v);
      vmax = std::max(vmax, parts[static_cast<std::size_t>(k)].vp_v);
    }
    CHECK(m.idss_spread_a == imax - imin);
    CHECK(m.vp_spread_v == vmax - vmin);
  }
}
}  // namespace

TEST_CASE("a made batch with known pairs comes out paired, tightest first") {
  // Ten pairs: each pair's two parts differ by under 0.3 % in IDSS and 3 mV in VP; pairs lie
  // at least 5 % and 50 mV apart. Shuffled, the grouping must find the pairs as made.
  std::vector<part_figures> parts;
  std::mt19937_64 g(5);
  for (int k = 0; k < 10; ++k) {
    const double idss = 2e-3 * std::pow(1.06, k), vp = -0.8 - 0.05 * k - 0.001 * (k % 3);
    const double di = 1.0 + 0.0003 * (k + 1), dv = 0.0003 * (k + 1);  // pair k spreads by (k+1) units: a known order
    parts.push_back(part(label('p', static_cast<std::size_t>(k), "a"), idss, vp));
    parts.push_back(part(label('p', static_cast<std::size_t>(k), "b"), idss * di, vp - dv));
  }
  std::shuffle(parts.begin(), parts.end(), g);
  const match_result r = match_parts(parts, {});
  REQUIRE(r.sets.size() == 10);
  CHECK(r.left_over.empty());
  for (std::size_t s = 0; s < r.sets.size(); ++s) {
    const std::vector<std::string> n = names(r.sets[s], parts);
    CAPTURE(n[0]);
    CHECK(n[0].substr(0, n[0].size() - 1) == n[1].substr(0, n[1].size() - 1));  // the pair as made
    CHECK(n[0] == label('p', s, "a"));                               // best (smallest spread) first
    if (s > 0) CHECK(r.sets[s].score >= r.sets[s - 1].score);
  }
  check_spreads(r, parts);

  // With a tolerance of 0.2 % and 2 mV only the pairs made within it form: pairs 0 to 5
  // spread 0.03 % to 0.18 % and 0.3 to 1.8 mV.
  match_settings tight;
  tight.idss_tolerance_ratio = std::log1p(0.002);
  tight.vp_tolerance_v = 0.002;
  const match_result t = match_parts(parts, tight);
  CHECK(t.sets.size() == 6);
  CHECK(t.left_over.size() == 8);
  for (const matched_set& m : t.sets) {
    CHECK(m.score <= 1.0);
    CHECK(m.vp_spread_v <= 0.002);
  }
  check_spreads(t, parts);
}

TEST_CASE("sets of four from a batch made of quads") {
  std::vector<part_figures> parts;
  for (int k = 0; k < 5; ++k)
    for (int j = 0; j < 4; ++j)
      parts.push_back(part(label('q', static_cast<std::size_t>(k), std::to_string(j)), 3e-3 * (1 + 0.1 * k) * (1 + 0.001 * j), -1.0 - 0.1 * k - 0.002 * j));
  parts.push_back(part("odd", 9e-3, -3.0));
  std::mt19937_64 g(11);
  std::shuffle(parts.begin(), parts.end(), g);
  match_settings s;
  s.set_size = 4;
  const match_result r = match_parts(parts, s);
  REQUIRE(r.sets.size() == 5);
  for (const matched_set& m : r.sets) {
    const std::vector<std::string> n = names(m, parts);
    REQUIRE(n.size() == 4);
    for (const std::string& x : n) CHECK(x.substr(0, 2) == n[0].substr(0, 2));
  }
  REQUIRE(r.left_over.size() == 1);
  CHECK(parts[static_cast<std::size_t>(r.left_over[0])].name == "odd");
  check_spreads(r, parts);
}

TEST_CASE("VGS at a drain current: the square law's closed form, and pairs by it") {
  // vgs = vp (1 - sqrt(id / idss)) (Shockley); at id = idss / 4 it is vp / 2.
  CHECK(vgs_at_current(part("x", 4e-3, -2.0), 1e-3) == doctest::Approx(-1.0).epsilon(1e-15));
  CHECK(std::isnan(vgs_at_current(part("x", 0.5e-3, -2.0), 1e-3)));
  // Two parts of different IDSS and VP chosen to share VGS at 1 mA (-1 V): A (4 mA, -2 V),
  // B (9 mA, -1.5 V: -1.5 (1 - 1/3) = -1 V). By IDSS and VP they are far apart, by VGS at
  // 1 mA they are a perfect pair; C and D are a close pair in both.
  const std::vector<part_figures> parts{part("A", 4e-3, -2.0), part("C", 5e-3, -1.2), part("B", 9e-3, -1.5),
                                        part("D", 5.01e-3, -1.201), part("low", 0.8e-3, -1.0)};
  match_settings s;
  s.basis = match_basis::vgs_at_current;
  s.current_a = 1e-3;
  const match_result r = match_parts(parts, s);
  REQUIRE(r.sets.size() == 2);
  CHECK(names(r.sets[0], parts) == std::vector<std::string>{"A", "B"});
  CHECK(std::fabs(r.sets[0].vgs_spread_v) <= 1e-12);  // volts, absolute: the pair's VGS agree exactly
  CHECK(names(r.sets[1], parts) == std::vector<std::string>{"C", "D"});
  REQUIRE(r.left_over.size() == 1);
  CHECK(parts[static_cast<std::size_t>(r.left_over[0])].name == "low");  // cannot carry 1 mA
  CHECK(std::isnan(r.vgs_v[4]));
}

TEST_CASE("match settings out of range name their field") {
  const std::vector<part_figures> parts{part("A", 4e-3, -2.0), part("B", 4e-3, -2.0)};
  match_settings s;
  s.set_size = 1;
  CHECK_THROWS_AS(match_parts(parts, s), setting_error);
  s.set_size = 2;
  s.basis = match_basis::vgs_at_current;
  s.current_a = 0;
  CHECK_THROWS_AS(match_parts(parts, s), setting_error);
  std::vector<part_figures> mixed = parts;
  mixed[1].p_channel = true;
  CHECK_THROWS_WITH_AS(match_parts(mixed, {}), doctest::Contains("one polarity"), input_error);
  // Fewer parts than a set: no set, every part left over.
  s = {};
  s.set_size = 3;
  const match_result r = match_parts(parts, s);
  CHECK(r.sets.empty());
  CHECK(r.left_over.size() == 2);
}

}  // namespace test_match
