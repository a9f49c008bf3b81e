#pragma once
// The small languages of option values, read into the structured values the model takes:
//   --set KEY=VALUE          -> model::stage_override   ("drain.resistor=4.7k", "name=Boost")
//   --target vd=4.5          -> model::tune_target      (vd, id, vds, vs = a value; gain=20dB; or center)
//   --require vd=3.5..5.5    -> model::requirement      (either end may be left open)
//   --set 2:KEY=VALUE        -> design_set              (compare: one design's override)
//   --by idss,vp | vgs@1m    -> match_by                (match: what makes parts alike)
//   --tolerance 2%,20mV      -> the match_settings tolerances
//   --level -10dBFS          -> a number of dB with its unit word   (parse_db_value)
//   --steps -40dBFS..0dBFS:6 -> a staircase of levels               (tone --steps, measure --drive)
// Each throws input_error naming the option and the text given, with an example.
// Header-only: the fuzz targets, which link only the libraries below cli/, call these too.
#include <algorithm>
#include <cctype>
#include <cmath>
#include <charconv>
#include <cstddef>
#include <system_error>
#include <string>
#include <string_view>

#include "base/error.hpp"
#include "base/units.hpp"
#include "model/analysis/spread.hpp"
#include "model/analysis/tune.hpp"
#include "model/circuit/stage_file.hpp"
#include "model/device/match.hpp"

namespace pinchoff::cli {

/// "SECTION.KEY=VALUE" or "KEY=VALUE" (a top-level key such as name); in a chain
/// "stageN.SECTION.KEY=VALUE" or "stageN.KEY=VALUE" (N from 1). The value is kept as text:
/// the stage reader checks it as it checks the file's own values.
inline model::stage_override parse_set(std::string_view spec) {
  const std::string text(spec);
  const auto eq = text.find('=');
  if (eq == std::string::npos || eq == 0)
    throw input_error("--set '" + text + "': expected KEY=VALUE, for example --set drain.resistor=4.7k");
  std::string key = text.substr(0, eq);
  model::stage_override o;
  o.value = text.substr(eq + 1);
  // A leading "stageN." names a stage of a chain.
  if (key.size() > 6 && key.compare(0, 5, "stage") == 0 && key[5] >= '1' && key[5] <= '9') {
    std::size_t digits = 5;
    while (digits < key.size() && key[digits] >= '0' && key[digits] <= '9') ++digits;
    if (digits < key.size() && key[digits] == '.' && digits - 5 <= 2) {
      o.stage = std::stoi(key.substr(5, digits - 5));
      key = key.substr(digits + 1);
    }
  }
  const auto dot = key.find('.');
  if (dot == std::string::npos) {
    if (key.empty()) throw input_error("--set '" + text + "': expected stageN.SECTION.KEY=VALUE, for example --set stage2.drain.resistor=4.7k");
    o.key = key;
    return o;
  }
  o.section = key.substr(0, dot);
  o.key = key.substr(dot + 1);
  // A chain stage's between element: "between.2.position" (the reader checks the rest).
  if (o.stage > 0 && o.section == "between" && !o.key.empty()) return o;
  if (o.section.empty() || o.key.empty() || o.key.find('.') != std::string::npos)
    throw input_error("--set '" + text + "': expected SECTION.KEY=VALUE, for example --set drain.resistor=4.7k" +
                      " (or stageN.SECTION.KEY=VALUE in a chain)");
  return o;
}

/// compare's "--set N:KEY=VALUE" (design N of `designs`, counted from 1) or "--set KEY=VALUE"
/// (every design: design 0). The KEY=VALUE part is read later by parse_set.
struct design_set {
  std::size_t design{0};
  std::string set;
};
inline design_set parse_design_set(std::string_view spec, std::size_t designs) {
  std::size_t digits = 0;
  while (digits < spec.size() && spec[digits] >= '0' && spec[digits] <= '9') ++digits;
  if (digits == 0 || digits >= spec.size() || spec[digits] != ':') return {0, std::string(spec)};
  std::size_t n = 0;
  const auto [ptr, ec] = std::from_chars(spec.data(), spec.data() + digits, n);
  // A number too large for any count of designs is no design either (it once escaped as
  // an internal failure).
  if (ec != std::errc{} || ptr != spec.data() + digits || n < 1 || n > designs)
    throw input_error("--set " + std::string(spec) + ": there is no design " + std::string(spec.substr(0, digits)) +
                      " (designs are numbered 1 to " + std::to_string(designs) + " in the order given)");
  return {n, std::string(spec.substr(digits + 1))};
}

/// "vd=4.5", "id=1m", "vds=3.2", "vs=0.9" (real signs, SI values) or "center".
inline model::tune_target parse_target(std::string_view full) {
  // "stageN." names the stage of a chain whose terminals are the target.
  int stage = -1;
  std::string_view text = full;
  if (text.size() > 6 && text.substr(0, 5) == "stage" && text[5] >= '1' && text[5] <= '9') {
    std::size_t digits = 5;
    while (digits < text.size() && text[digits] >= '0' && text[digits] <= '9') ++digits;
    if (digits < text.size() && text[digits] == '.' && digits - 5 <= 2) {
      stage = std::stoi(std::string(text.substr(5, digits - 5))) - 1;
      text = text.substr(digits + 1);
    }
  }
  if (text == "center") return {model::target_kind::center, 0.0, stage};
  const auto eq = text.find('=');
  const std::string_view name = text.substr(0, eq);
  model::tune_target t;
  t.stage = stage;
  if (name == "gain") {
    // Mid-band gain in dB: "gain=20dB" or "gain=20".
    t.kind = model::target_kind::gain;
    if (eq == std::string_view::npos) throw input_error("--target 'gain': give a value, for example --target gain=20dB");
    std::string_view v = text.substr(eq + 1);
    if (v.size() > 2 && (v.substr(v.size() - 2) == "dB" || v.substr(v.size() - 2) == "db")) v.remove_suffix(2);
    const auto db = base::try_parse_value(v);
    if (!db || !(std::fabs(*db) <= 200.0))
      throw input_error("--target gain: cannot read '" + std::string(text.substr(eq + 1)) +
                        "' as a gain in dB from -200 to 200 (for example --target gain=20dB)");
    t.value = *db;
    return t;
  }
  if (name == "vd") t.kind = model::target_kind::vd;
  else if (name == "id") t.kind = model::target_kind::id;
  else if (name == "vds") t.kind = model::target_kind::vds;
  else if (name == "vs") t.kind = model::target_kind::vs;
  else
    throw input_error("--target '" + std::string(text) +
                      "': expected vd=VOLTS, id=AMPS, vds=VOLTS, vs=VOLTS, gain=DB or center (for example --target vd=4.5)");
  if (eq == std::string_view::npos)
    throw input_error("--target '" + std::string(text) + "': give a value, for example --target " + std::string(name) +
                      (t.kind == model::target_kind::id ? "=1m" : "=4.5"));
  t.value = base::parse_value(text.substr(eq + 1), t.kind == model::target_kind::id ? base::unit::ampere : base::unit::volt,
                             "--target " + std::string(name));
  return t;
}

/// "vd=3.5..5.5", "gain=15..", "swing=2.." with QUANTITY a model::spread_quantities() name
/// (SI values; gain in dB, thd in %); in a chain a stage's own quantity names its stage,
/// "stage2.vd=3.5..5.5" (which stages there are is the model's to check).
inline model::requirement parse_requirement(std::string_view text) {
  const auto eq = text.find('=');
  const std::string name(text.substr(0, eq));
  const model::named_quantity n = model::split_quantity_name(name);
  const auto& qs = model::spread_quantities();
  if (eq == std::string_view::npos || n.def == nullptr) {
    std::string names;
    for (const auto& d : qs) names += (names.empty() ? "" : ", ") + std::string(d.name);
    throw input_error("--require '" + std::string(text) + "': expected QUANTITY=LO..HI with QUANTITY one of " + names +
                      " (for example --require vd=3.5..5.5 or --require gain=15..; in a chain a stage's own, "
                      "--require stage2.vd=3.5..5.5)");
  }
  const model::quantity_def* q = n.def;
  model::requirement r;
  r.quantity = name;
  const std::string_view range = text.substr(eq + 1);
  const auto dots = range.find("..");
  const base::unit u = std::string_view(q->unit) == "A"   ? base::unit::ampere
                       : std::string_view(q->unit) == "V" ? base::unit::volt
                                                          : base::unit::none;
  const std::string what = "--require " + name;
  if (dots == std::string_view::npos) throw input_error(what + ": give a range LO..HI (either end may be left open)");
  const std::string_view a = range.substr(0, dots), b = range.substr(dots + 2);
  if (!a.empty()) r.lo = base::parse_value(a, u, what);
  if (!b.empty()) r.hi = base::parse_value(b, u, what);
  if (a.empty() && b.empty()) throw input_error(what + ": give at least one end of the range");
  if (r.lo > r.hi) throw input_error(what + ": the range has its minimum above its maximum");
  return r;
}

/// match's "--by": "idss,vp" (either order) or "vgs@CURRENT" ("vgs@1m", "vgs@1mA").
struct match_by {
  model::match_basis basis{model::match_basis::idss_and_vp};
  double current_a{};
};
inline match_by parse_match_by(std::string_view text) {
  if (text == "idss,vp" || text == "vp,idss") return {};
  if (text.substr(0, 4) == "vgs@") {
    const double i = base::parse_value(text.substr(4), base::unit::ampere, "--by vgs@");
    if (!(i > 0)) throw input_error("--by " + std::string(text) + ": the drain current must be above 0, for example --by vgs@1m");
    return {model::match_basis::vgs_at_current, i};
  }
  throw input_error("--by '" + std::string(text) + "': expected idss,vp or vgs@CURRENT (for example --by vgs@1m)");
}

/// match's "--tolerance": with --by idss,vp a percentage of IDSS, a voltage of VP, or both
/// ("2%", "20mV", "2%,20mV"); with --by vgs@I a voltage of VGS ("5mV").
inline void parse_match_tolerance(std::string_view text, model::match_basis basis, model::match_settings& s) {
  const std::string all(text);
  const std::string example = basis == model::match_basis::idss_and_vp ? "2%,20mV" : "5mV";
  std::size_t from = 0;
  int pieces = 0;
  while (from <= text.size()) {
    const std::size_t comma = std::min(text.find(',', from), text.size());
    std::string_view piece = text.substr(from, comma - from);
    while (!piece.empty() && piece.front() == ' ') piece.remove_prefix(1);
    while (!piece.empty() && piece.back() == ' ') piece.remove_suffix(1);
    ++pieces;
    if (!piece.empty() && piece.back() == '%' && basis == model::match_basis::idss_and_vp && !s.idss_tolerance_ratio) {
      const auto v = base::try_parse_value(piece.substr(0, piece.size() - 1));
      if (!v || !(*v > 0 && *v < 100)) throw input_error("--tolerance '" + all + "': the IDSS tolerance is a percentage above 0 and below 100, for example " + example);
      s.idss_tolerance_ratio = std::log1p(*v / 100.0);
    } else if (!piece.empty() && piece.back() == 'V') {
      const auto v = base::try_parse_value(piece, base::unit::volt);
      if (!v || !(*v > 0 && *v <= 10)) throw input_error("--tolerance '" + all + "': a voltage tolerance is above 0 and at most 10 V, for example " + example);
      if (basis == model::match_basis::vgs_at_current && !s.vgs_tolerance_v) s.vgs_tolerance_v = *v;
      else if (basis == model::match_basis::idss_and_vp && !s.vp_tolerance_v) s.vp_tolerance_v = *v;
      else throw input_error("--tolerance '" + all + "': give each tolerance once, for example " + example);
    } else {
      throw input_error("--tolerance '" + all + "': expected " +
                        (basis == model::match_basis::idss_and_vp ? std::string("a percentage of IDSS and/or a voltage of VP (with V), for example 2%,20mV")
                                                                  : std::string("a voltage of VGS (with V), for example 5mV")));
    }
    if (comma == text.size()) break;
    from = comma + 1;
  }
  if (pieces > 2) throw input_error("--tolerance '" + all + "': at most two tolerances, for example " + example);
}

/// "-10dBFS", "-10 dBFS", "-10" (the unit understood): a number of dB, `suffix` being the
/// unit word accepted (any case). `what` names the option in the error.
inline double parse_db_value(std::string_view text, std::string_view suffix, std::string_view what) {
  const auto trim = [](std::string_view t) {
    while (!t.empty() && std::isspace(static_cast<unsigned char>(t.front()))) t.remove_prefix(1);
    while (!t.empty() && std::isspace(static_cast<unsigned char>(t.back()))) t.remove_suffix(1);
    return t;
  };
  std::string_view t = trim(text);
  const auto ends_with_unit = [&] {
    if (t.size() < suffix.size()) return false;
    for (std::size_t i = 0; i < suffix.size(); ++i)
      if (std::tolower(static_cast<unsigned char>(t[t.size() - suffix.size() + i])) !=
          std::tolower(static_cast<unsigned char>(suffix[i])))
        return false;
    return true;
  };
  if (ends_with_unit()) t = trim(t.substr(0, t.size() - suffix.size()));
  if (!t.empty() && t.front() == '+') t.remove_prefix(1);
  double v = 0.0;
  const auto [end, ec] = std::from_chars(t.data(), t.data() + t.size(), v);
  if (t.empty() || ec != std::errc() || end != t.data() + t.size() || !std::isfinite(v))
    throw input_error(std::string(what) + " '" + std::string(text) + "' is not a level; expected a number of " +
                      std::string(suffix) + ", e.g. -10" + std::string(suffix));
  return v;
}

/// FROM..TO:STEP, levels in dBFS and the step in dB ("-40dBFS..0dBFS:6", "-40..0:6dB"): the
/// three numbers as written; dsp::level_staircase makes the levels of them.
struct staircase_text {
  double from_dbfs{}, to_dbfs{}, step_db{};
};
inline bool looks_like_staircase(std::string_view text) {
  const std::size_t dots = text.find("..");
  return dots != std::string_view::npos && text.rfind(':') != std::string_view::npos && text.rfind(':') > dots;
}
inline staircase_text parse_staircase(std::string_view text, std::string_view option) {
  const std::string all(text);
  if (!looks_like_staircase(text))
    throw input_error(std::string(option) + " '" + all +
                      "' is not FROM..TO:STEP, e.g. -40dBFS..0dBFS:10 (levels in dBFS, step in dB)");
  const std::size_t dots = text.find(".."), colon = text.rfind(':');
  const std::string o(option);
  return {parse_db_value(text.substr(0, dots), "dBFS", o + " start"),
          parse_db_value(text.substr(dots + 2, colon - dots - 2), "dBFS", o + " end"),
          parse_db_value(text.substr(colon + 1), "dB", o + " step")};
}

}  // namespace pinchoff::cli
