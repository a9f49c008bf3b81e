#include "model/circuit/stage_file.hpp"

#include <algorithm>
#include <array>
#include <charconv>
#include <cstdint>
#include <cstdio>
#include <optional>
#include <cerrno>
#include <cmath>
#include <cstring>
#include <fstream>
#include <limits>
#include <map>
#include <sstream>
#include <vector>

#include <toml++/toml.h>

#include "base/error.hpp"
#include "base/text_file.hpp"
#include "base/toml_depth.hpp"
#include "base/text.hpp"
#include "base/units.hpp"
#include "model/circuit/network.hpp"
#include "model/device/parameter_ranges.hpp"

namespace pinchoff::model {
namespace {

using base::unit;

// What each value must be.
enum class rule {
  positive,       // > 0
  non_negative,   // >= 0 (0 = absent where the reference says so)
  any_sign,       // sign checked later against the polarity
};

struct key_spec {
  std::string_view name;
  unit u;
  rule r;
  base::value_bounds bounds{};  // by magnitude; lo == hi == 0: a text, no bounds
};

struct section_spec {
  std::string_view name;
  std::vector<key_spec> keys;
};

// The ranges of the circuit's parts (the JFET's are in model/device/parameter_ranges.hpp).
// Each lies decades beyond what audio stages use (common practice), so that a refusal is a
// slip, and within what the solvers are checked to solve at every corner
// (tests/model/circuit/test_stage_ranges.cpp).
constexpr base::value_bounds resistor{1e-3, 1e9, false,
                                      "from a wire's resistance to a thousand times a scope probe's 1 MΩ"};
constexpr base::value_bounds optional_resistor{resistor.lo, resistor.hi, true, resistor.why};
// The gate's resistors may be far larger: capsule bias resistors of 1 to 10 GΩ.
constexpr base::value_bounds gate_resistor{1e-3, 1e11, false,
                                           "from a wire's resistance to ten times the largest capsule bias resistors"};
constexpr base::value_bounds capacitor{1e-12, 1.0, true,
                                       "from a capsule's few picofarads to a large reservoir capacitor's tens of "
                                       "millifarads"};
constexpr base::value_bounds supply_volts{0.1, 1000.0, false,
                                          "a JFET stage needs some volts across its part, and above 1 kV is no audio "
                                          "JFET stage"};
constexpr base::value_bounds temperature{200.0, 450.0, false,
                                         "JFETs are rated from -55 to 150 degrees C (218 to 423 K)"};

// A condenser capsule: small capsules of a few picofarads to large-diaphragm ones of a few
// hundred; open-circuit sensitivities of 0.1 mV/Pa (small, unpolarised) to 100 mV/Pa (common
// practice: measurement capsules 1 to 50 mV/Pa), read in V/Pa.
constexpr base::value_bounds capsule_cap{1e-12, 1e-9, false, "from a small capsule's picofarad to a nanofarad"};
constexpr base::value_bounds capsule_sensitivity{1e-5, 1.0, false,
                                                 "a capsule's open-circuit sensitivity (\"12m\" or \"12mV/Pa\" is 12 mV/Pa)"};

// A magnetic pickup and its cable: coils of 2 to 20 kΩ and 1 to 10 H, a pickup's own 50 to
// 300 pF and cables of about 100 pF a metre (common practice); the bounds lie decades beyond.
constexpr base::value_bounds pickup_resistance{1.0, 1e6, false,
                                               "from a low-impedance coil's few ohms to fifty times a heavily wound "
                                               "pickup's 20 kΩ"};
constexpr base::value_bounds pickup_inductance{1e-4, 100.0, false,
                                               "from a low-impedance coil's fraction of a millihenry to ten times a "
                                               "heavily wound pickup's 10 H"};
constexpr base::value_bounds pickup_cap{1e-12, 1e-6, false,
                                        "from a pickup's own few picofarads to a microfarad, far beyond any cable"};
// Read in metres as a plain number: "3m" would be 3 millimetres, below the range.
constexpr base::value_bounds cable_length{0.1, 300.0, true,
                                          "in metres, a plain number such as 3 (\"3m\" reads as 3 millimetres): from a "
                                          "10 cm patch lead to a 300 m run"};
constexpr base::value_bounds cable_per_metre{10e-12, 1e-9, false,
                                             "instrument and microphone cables have 50 to 200 pF per metre"};
// Bounds for a key whose range another check holds: signal.capacitance is a capsule's or a
// pickup's, held by read_source to the kind's own range (capsule_cap, pickup_cap); the
// temperature coefficients are held with their sign by build_parts (ranges::vp_drift_problem).
constexpr base::value_bounds checked_elsewhere{0.0, std::numeric_limits<double>::infinity(), false, ""};

constexpr base::value_bounds knob{0.0, 1.0, false, "a knob's rotation, from fully anticlockwise (0) to fully clockwise (1)"};

// The sections of one stage: the whole file for a single stage, one [[stage]] of a chain.
const std::vector<section_spec>& stage_schema() {
  namespace r = ranges;
  static const std::vector<section_spec> s{
      {"jfet", {{"polarity", unit::none, rule::any_sign}, {"class", unit::none, rule::any_sign},
                {"idss", unit::ampere, rule::positive, r::idss}, {"idss_vds", unit::volt, rule::non_negative, r::idss_vds},
                {"vp", unit::volt, rule::any_sign, r::vp}, {"beta", unit::none, rule::positive, r::beta},
                {"vto", unit::volt, rule::any_sign, r::vp}, {"lambda", unit::per_volt, rule::non_negative, r::lambda},
                {"is", unit::ampere, rule::non_negative, r::is}, {"n", unit::none, rule::positive, r::n},
                {"cgs", unit::farad, rule::non_negative, r::junction_cap}, {"cgd", unit::farad, rule::non_negative, r::junction_cap},
                {"vds_max", unit::volt, rule::positive, r::vds_max}, {"pd_max", unit::watt, rule::positive, r::pd_max},
                {"igf_max", unit::ampere, rule::positive, r::igf_max},
                {"flicker_coefficient", unit::none, rule::non_negative, r::flicker_coefficient},
                {"flicker_exponent", unit::none, rule::positive, r::flicker_exponent},
                {"gate_leakage", unit::ampere, rule::non_negative, r::gate_leakage},
                // Each has one sign and its range, checked together in build_parts.
                {"vp_drift", unit::volt_per_kelvin, rule::any_sign, checked_elsewhere},
                {"beta_exponent", unit::none, rule::any_sign, checked_elsewhere}}},
      {"gate", {{"coupling_cap", unit::farad, rule::non_negative, capacitor}, {"resistor", unit::ohm, rule::positive, gate_resistor},
                {"bias_top", unit::ohm, rule::positive, gate_resistor}, {"bias_bottom", unit::ohm, rule::positive, gate_resistor},
                {"bootstrap", unit::farad, rule::non_negative, capacitor}, {"feedback", unit::ohm, rule::positive, gate_resistor}}},
      {"drain", {{"resistor", unit::ohm, rule::non_negative, optional_resistor}, {"shunt_cap", unit::farad, rule::non_negative, capacitor}}},
      {"source", {{"unbypassed", unit::ohm, rule::non_negative, optional_resistor}, {"resistor", unit::ohm, rule::positive, resistor},
                  {"bypass_cap", unit::farad, rule::non_negative, capacitor}}},
      {"output", {{"coupling_cap", unit::farad, rule::non_negative, capacitor}, {"load", unit::ohm, rule::positive, resistor}}},
      {"rail", {{"resistance", unit::ohm, rule::positive, resistor}, {"capacitance", unit::farad, rule::non_negative, capacitor}}},
  };
  return s;
}

// The sections the whole design shares: a single stage's file also holds them at the top.
const std::vector<section_spec>& shared_schema() {
  static const std::vector<section_spec> s{
      {"supply", {{"volts", unit::volt, rule::any_sign, supply_volts}, {"resistance", unit::ohm, rule::non_negative, optional_resistor},
                  {"capacitance", unit::farad, rule::non_negative, capacitor}, {"phantom", unit::none, rule::any_sign}}},
      {"signal", {{"kind", unit::none, rule::any_sign}, {"impedance", unit::ohm, rule::non_negative, optional_resistor},
                  {"capacitance", unit::farad, rule::positive, checked_elsewhere}, {"stray", unit::farad, rule::non_negative, capacitor},
                  {"sensitivity", unit::volt_per_pascal, rule::positive, capsule_sensitivity},
                  {"resistance", unit::ohm, rule::positive, pickup_resistance},
                  {"inductance", unit::henry, rule::positive, pickup_inductance},
                  {"cable", unit::none, rule::non_negative, cable_length},
                  {"cable_capacitance", unit::farad, rule::positive, cable_per_metre}}},
  };
  return s;
}

const section_spec* find_section(const std::vector<section_spec>& schema, std::string_view name) {
  const auto it = std::find_if(schema.begin(), schema.end(), [&](const section_spec& s) { return s.name == name; });
  return it == schema.end() ? nullptr : &*it;
}

class reader {
 public:
  reader(std::string_view source_name) : source_(source_name) {}

  [[noreturn]] void fail_at(const toml::source_region& where, const std::string& key, const std::string& msg) const {
    // A node with no place in the text came from an override: named by its key alone.
    if (where.begin.line == 0) throw setting_error(key, msg);
    std::ostringstream os;
    os << source_ << ':' << where.begin.line << ':' << where.begin.column << ": " << msg;
    throw input_error(os.str());
  }
  /// `msg` prefixed with its place in the file, "file:line:col: "; a value with no place
  /// (an override) is named by its key, which `msg` begins with.
  std::string located(const toml::source_region& where, const std::string& msg) const {
    if (where.begin.line == 0) return msg;
    std::ostringstream os;
    os << source_ << ':' << where.begin.line << ':' << where.begin.column << ": " << msg;
    return os.str();
  }
  [[noreturn]] void fail_file(const std::string& msg) const { throw input_error(std::string(source_) + ": " + msg); }

  double number(const toml::node& node, const std::string& key, const key_spec& spec) const {
    double v = 0.0;
    if (node.is_integer()) {
      // toml++ gives no double for an integer it cannot hold exactly (above 2^53): read it
      // rounded, as a float of the same digits is, never as a missing value.
      v = static_cast<double>(*node.value<std::int64_t>());
    } else if (node.is_floating_point()) {
      v = *node.value<double>();
    } else if (node.is_string()) {
      const std::string text = *node.value<std::string>();
      auto parsed = base::try_parse_value(text, spec.u);
      if (!parsed) {
        try {
          base::parse_value(text, spec.u, key);
        } catch (const input_error& e) {
          fail_at(node.source(), key, e.what());
        }
      }
      v = *parsed;
    } else {
      fail_at(node.source(), key, key + ": expected a number or a value string such as \"4k7\", got " + type_name(node));
    }
    if (!std::isfinite(v)) fail_at(node.source(), key, key + ": value must be finite");
    if (spec.r == rule::positive && !(v > 0)) fail_at(node.source(), key, key + " must be above 0");
    if (spec.r == rule::non_negative && !(v >= 0)) fail_at(node.source(), key, key + " must not be negative");
    if (const std::string m = base::bounds_refusal(key, v, spec.bounds, spec.u); !m.empty()) fail_at(node.source(), key, m);
    return v;
  }

  static std::string type_name(const toml::node& n) {
    switch (n.type()) {
      case toml::node_type::table: return "a table";
      case toml::node_type::array: return "an array";
      case toml::node_type::string: return "a string";
      case toml::node_type::integer: return "an integer";
      case toml::node_type::floating_point: return "a number";
      case toml::node_type::boolean: return "a boolean";
      default: return "a date or time";
    }
  }

  std::string text(const toml::node& node, const std::string& key) const {
    if (!node.is_string()) fail_at(node.source(), key, key + ": expected a string, got " + type_name(node));
    return *node.value<std::string>();
  }

  std::string_view source_;
};

// A known key that is an abbreviation of `key` or that `key` abbreviates (coupling_capacitor
// for coupling_cap), when exactly one is; else empty.
std::string abbreviated_name(std::string_view key, std::span<const std::string_view> known) {
  std::string found;
  for (std::string_view k : known) {
    const std::size_t n = std::min(k.size(), key.size());
    if (n < 3 || k == key || k.substr(0, n) != key.substr(0, n)) continue;
    if (!found.empty()) return "";
    found = std::string(k);
  }
  return found;
}

std::string unknown_key_message(std::string_view key, std::string_view where, std::span<const std::string_view> known) {
  std::string m = "unknown key '" + std::string(key) + "' in " + std::string(where);
  std::string near = base::nearest_name(key, known);
  if (near.empty()) near = abbreviated_name(key, known);
  if (!near.empty()) m += "; did you mean '" + near + "'?";
  return m;
}

void set_in(toml::table& table, const stage_override& o, const std::string& shown) {
  // "between.N.KEY": a key of the N-th element of a chain stage's between (a pot's position).
  if (o.section == "between") {
    const std::size_t dot = o.key.find('.');
    std::size_t n = 0;
    const char* end = o.key.data() + (dot == std::string::npos ? o.key.size() : dot);
    const auto [ptr, ec] = std::from_chars(o.key.data(), end, n);
    if (dot == std::string::npos || ec != std::errc{} || ptr != end || dot + 1 >= o.key.size())
      throw setting_error(shown, "name an element of between by its place and a key, as between.1.position");
    toml::array* arr = table.get_as<toml::array>("between");
    if (arr == nullptr || n < 1 || n > arr->size())
      throw setting_error(shown, "there is no element " + std::to_string(n) + " in this stage's between (it has " +
                                     std::to_string(arr == nullptr ? 0 : arr->size()) + ")");
    toml::table* e = arr->get_as<toml::table>(n - 1);
    if (e == nullptr) throw setting_error(shown, "element " + std::to_string(n) + " of between is not a table");
    e->insert_or_assign(o.key.substr(dot + 1), o.value);
    return;
  }
  if (o.section.empty()) {
    table.insert_or_assign(o.key, o.value);
    return;
  }
  toml::node* sec = table.get(o.section);
  if (sec == nullptr) {
    table.insert_or_assign(o.section, toml::table{});
    sec = table.get(o.section);
  }
  if (!sec->is_table()) throw setting_error(shown, "'" + o.section + "' is not a section");
  sec->as_table()->insert_or_assign(o.key, o.value);
}

bool is_stage_section(std::string_view name) {
  return find_section(stage_schema(), name) != nullptr || name == "topology" || name == "between";
}

void apply_override(toml::table& root, const stage_override& o) {
  const std::string shown = override_key(o);
  toml::array* chain = root.get_as<toml::array>("stage");
  if (chain == nullptr) {
    if (o.stage > 1) throw setting_error(shown, "the file describes one stage, so there is no stage " + std::to_string(o.stage));
    set_in(root, o, shown);
    return;
  }
  if (o.stage == 0) {
    if (!o.section.empty() ? is_stage_section(o.section) : is_stage_section(o.key))
      throw setting_error(shown, "the file is a chain of " + std::to_string(chain->size()) +
                                     " stages: name the stage, as stage1." + shown);
    set_in(root, o, shown);
    return;
  }
  if (o.stage > static_cast<int>(chain->size()))
    throw setting_error(shown, "the chain has " + std::to_string(chain->size()) + " stages, so there is no stage " +
                                   std::to_string(o.stage));
  toml::table* t = chain->get_as<toml::table>(static_cast<std::size_t>(o.stage - 1));
  if (t == nullptr) throw setting_error(shown, "stage " + std::to_string(o.stage) + " is not a table");
  set_in(*t, o, shown);
}

// What one table of a file gives: its values by "section.key", where each was written, and
// the texts of the jfet's polarity and class.
struct gathered {
  std::map<std::string, double> values;
  std::map<std::string, toml::source_region> where;
  std::string polarity_text = "n";
  toml::source_region polarity_where;
  std::optional<std::string> class_name;
  toml::source_region class_where;
  std::optional<std::string> signal_kind;
  toml::source_region signal_kind_where;
  std::optional<std::string> phantom;
  toml::source_region phantom_where;

  bool has(const std::string& k) const { return values.count(k) > 0; }
  double get(const std::string& k, double dflt = 0.0) const { return has(k) ? values.at(k) : dflt; }
};

// Reads one section of a table into `g`. `prefix` ("stage2.") is put before every key a
// message names; `omit` lists keys the section has elsewhere but not here, with the reason.
void read_section(const reader& rd, const std::string& section, const toml::node& node, const section_spec& spec,
                  const std::string& prefix, gathered& g,
                  std::span<const std::pair<std::string_view, std::string_view>> omit = {}) {
  const std::string shown_section = prefix + section;
  if (!node.is_table())
    rd.fail_at(node.source(), shown_section,
               "'" + shown_section + "' must be a section [" + shown_section + "], got " + reader::type_name(node));
  std::vector<std::string_view> known;
  for (const key_spec& ks : spec.keys)
    if (std::none_of(omit.begin(), omit.end(), [&](const auto& o) { return o.first == ks.name; })) known.push_back(ks.name);
  for (auto&& [k2, v] : *node.as_table()) {
    const std::string name(k2.str());
    const std::string full = section + "." + name;
    const std::string shown = prefix + full;
    const toml::source_region at = k2.source().begin.line ? k2.source() : v.source();
    for (const auto& [key, why] : omit)
      if (key == name) rd.fail_at(at, shown, shown + ": " + std::string(why));
    const auto ks = std::find_if(spec.keys.begin(), spec.keys.end(), [&](const key_spec& s) { return s.name == name; });
    if (ks == spec.keys.end()) rd.fail_at(at, shown, unknown_key_message(name, "[" + shown_section + "]", known));
    if (full == "jfet.polarity") {
      g.polarity_text = rd.text(v, shown);
      g.polarity_where = v.source();
      continue;
    }
    if (full == "jfet.class") {
      g.class_name = rd.text(v, shown);
      g.class_where = v.source();
      continue;
    }
    if (full == "supply.phantom") {
      g.phantom = rd.text(v, shown);
      g.phantom_where = v.source();
      continue;
    }
    if (full == "signal.kind") {
      g.signal_kind = rd.text(v, shown);
      g.signal_kind_where = v.source();
      continue;
    }
    g.values[full] = rd.number(v, shown, *ks);
    g.where[full] = v.source();
  }
}

topology read_topology(const reader& rd, const toml::node& node, const std::string& shown) {
  const std::string t = rd.text(node, shown);
  if (t == "common-source") return topology::common_source;
  if (t == "source-follower") return topology::source_follower;
  rd.fail_at(node.source(), shown, shown + " must be \"common-source\" or \"source-follower\", not \"" + t + "\"");
}

// The `between` of a chain stage: an array of inline tables, each one element.
std::vector<between_part> read_between(const reader& rd, const toml::node& node, const std::string& shown) {
  const toml::array* arr = node.as_array();
  if (arr == nullptr)
    rd.fail_at(node.source(), shown,
               shown + ": expected an array of parts in signal order, such as [ { series = \"10k\" }, { shunt_cap = "
                       "\"4n7\" } ], got " + reader::type_name(node));
  static const std::array<std::string_view, 5> kinds{"series", "series_cap", "shunt", "shunt_cap", "pot"};
  std::vector<between_part> parts;
  int index = 0;
  for (const toml::node& e : *arr) {
    ++index;
    const std::string at = shown + "[" + std::to_string(index) + "]";
    const toml::table* t = e.as_table();
    if (t == nullptr)
      rd.fail_at(e.source(), at, at + ": expected one part such as { series = \"10k\" }, got " + reader::type_name(e));
    between_part p;
    int found = 0;
    std::optional<double> position;
    std::optional<std::string> taper;
    toml::source_region taper_where;
    for (auto&& [k, v] : *t) {
      const std::string name(k.str());
      const toml::source_region where = k.source().begin.line ? k.source() : v.source();
      const std::string key = at + "." + name;
      const auto kind = std::find(kinds.begin(), kinds.end(), name);
      if (kind != kinds.end()) {
        ++found;
        if (found > 1)
          rd.fail_at(where, key, at + ": one part per table: " + name + " follows another part (write each in its own { })");
        p.kind = static_cast<between_kind>(kind - kinds.begin());
        const bool cap = p.kind == between_kind::series_cap || p.kind == between_kind::shunt_cap;
        p.value = rd.number(v, key, {name, cap ? unit::farad : unit::ohm, rule::positive, cap ? capacitor : resistor});
      } else if (name == "position") {
        position = rd.number(v, key, {name, unit::none, rule::non_negative, knob});
      } else if (name == "taper") {
        taper = rd.text(v, key);
        taper_where = v.source();
      } else {
        std::vector<std::string_view> known(kinds.begin(), kinds.end());
        known.push_back("position");
        known.push_back("taper");
        rd.fail_at(where, key, unknown_key_message(name, at, known));
      }
    }
    if (found == 0)
      rd.fail_at(e.source(), at, at + ": give one of series, series_cap, shunt, shunt_cap or pot (with position)");
    if (p.kind == between_kind::pot) {
      if (!position) rd.fail_at(e.source(), at, at + ": a pot needs position, its knob's rotation from 0 to 1");
      p.position = *position;
      if (taper && *taper == "log") p.taper = pot_taper::log;
      else if (taper && *taper != "linear")
        rd.fail_at(taper_where, at + ".taper", at + ".taper must be \"linear\" or \"log\", not \"" + *taper + "\"");
    } else if (position || taper) {
      rd.fail_at(e.source(), at, at + ": position and taper belong to a pot");
    }
    parts.push_back(p);
  }
  return parts;
}

// The plausible ranges of small-signal JFETs (common practice: datasheets of small-signal
// parts), narrower than the physical bounds of model/device/parameter_ranges.hpp, which
// refuse. A value the file gives outside them is read, with a warning: it is most often a
// unit slip (idss = 6.037 is amperes, not milliamperes).
struct plausible_range {
  const char* key;
  double lo, hi;  // by magnitude
  const char* unit;
  const char* prefix;  // the unit prefix meant by the slip a value above the range most likely is
  double scale;        // and its factor
};
constexpr plausible_range plausible_jfet[] = {
    {"jfet.idss", 0.1e-3, 100e-3, "A", "m", 1e-3},
    {"jfet.vp", 0.2, 10.0, "V", "m", 1e-3},
    {"jfet.cgs", 0.5e-12, 50e-12, "F", "p", 1e-12},
    {"jfet.cgd", 0.5e-12, 50e-12, "F", "p", 1e-12},
};

// Warnings for the [jfet] values this stage's table gave outside the plausible range.
void plausibility_warnings(const reader& rd, gathered& g, const std::string& prefix, std::vector<std::string>& out) {
  for (const plausible_range& r : plausible_jfet) {
    const auto at = g.where.find(r.key);
    if (!g.has(r.key) || at == g.where.end()) continue;  // not given (a class's typical value is plausible)
    const double v = std::fabs(g.get(r.key));
    if (v == 0.0 && std::string_view(r.unit) == "F") continue;  // no junction capacitance: said by `response`
    if (v >= r.lo && v <= r.hi) continue;
    const std::string shown = prefix + r.key;
    std::string m = shown + " = " + base::format_si(g.get(r.key), r.unit) + " lies outside " + base::format_si(r.lo, r.unit) +
                    " to " + base::format_si(r.hi, r.unit) + ", the range of small-signal JFETs (common practice)";
    if (v > r.hi && v * r.scale >= r.lo && v * r.scale <= r.hi) {
      char n[32];
      std::snprintf(n, sizeof n, "%g", g.get(r.key));
      m += "; a bare number is in " + std::string(r.unit == std::string_view("A") ? "amperes" : r.unit == std::string_view("V") ? "volts" : "farads") +
           ": for " + n + " " + r.prefix + r.unit + " write " + n + r.prefix;
    }
    m += "; read as given";
    out.push_back(rd.located(at->second, m));
  }
}

// The parts of one stage from what its table gave. `table` locates its sections in messages.
stage_parts build_parts(const reader& rd, const toml::table& table, gathered& g, const std::string& prefix,
                        std::string_view source_name, const std::filesystem::path& devices_file) {
  stage_parts st;
  if (g.polarity_text == "p") st.pol = polarity::p;
  else if (g.polarity_text != "n")
    rd.fail_at(g.polarity_where, prefix + "jfet.polarity",
               prefix + "jfet.polarity must be \"n\" or \"p\", not \"" + g.polarity_text + "\"");
  const double sign = st.pol == polarity::p ? -1.0 : 1.0;
  const char* chan = st.pol == polarity::p ? "a p-channel" : "an n-channel";
  auto fail_section = [&](std::string_view section, const std::string& msg) {
    if (const toml::node* n = table.get(section); n != nullptr && n->source().begin.line != 0)
      rd.fail_at(n->source(), prefix + std::string(section), msg);
    if (table.source().begin.line != 0) rd.fail_at(table.source(), prefix + std::string(section), msg);
    rd.fail_file(msg);
  };

  // A named class fills in whatever the file does not give (values given win).
  if (g.class_name && g.class_name->find_first_not_of(" \t") == std::string::npos)
    rd.fail_at(g.class_where, prefix + "jfet.class",
               prefix + "jfet.class is empty: give the name of a device class, such as \"general-purpose\" (README \"Stage "
                        "file\" lists them), or leave the key out");
  if (g.class_name) {
    try {
      st.jfet_class = find_device_class(*g.class_name, device_file_for(std::filesystem::path(std::string(source_name)), devices_file));
    } catch (const input_error& e) {
      rd.fail_at(g.class_where, prefix + "jfet.class", e.what());
    }
    const device_class& c = *st.jfet_class;
    if (!g.has("jfet.beta") && !g.has("jfet.vto")) {
      if (!g.has("jfet.idss")) g.values["jfet.idss"] = c.typical_idss_a;
      if (!g.has("jfet.vp")) {
        g.values["jfet.vp"] = sign * c.typical_vp_v;
        g.where["jfet.vp"] = g.class_where;
      }
    }
    if (!g.has("jfet.lambda")) g.values["jfet.lambda"] = c.lambda_per_v;
    if (!g.has("jfet.is")) g.values["jfet.is"] = c.is_a;
    if (!g.has("jfet.n")) g.values["jfet.n"] = c.n;
    if (!g.has("jfet.cgs")) g.values["jfet.cgs"] = c.cgs_f;
    if (!g.has("jfet.cgd")) g.values["jfet.cgd"] = c.cgd_f;
    if (!g.has("jfet.vds_max") && c.vds_max_v) g.values["jfet.vds_max"] = *c.vds_max_v;
    if (!g.has("jfet.vp_drift") && c.vp_drift_v_per_k) {
      g.values["jfet.vp_drift"] = sign * *c.vp_drift_v_per_k;  // the class's n-channel sign, mirrored
      g.where["jfet.vp_drift"] = g.class_where;
    }
    if (!g.has("jfet.beta_exponent") && c.beta_exponent) {
      g.values["jfet.beta_exponent"] = *c.beta_exponent;
      g.where["jfet.beta_exponent"] = g.class_where;
    }
  }

  // Device: idss + vp, or beta + vto.
  const bool form_a = g.has("jfet.idss") || g.has("jfet.vp");
  const bool form_b = g.has("jfet.beta") || g.has("jfet.vto");
  if (!table.contains("jfet")) {
    if (prefix.empty()) rd.fail_file("the stage file needs a [jfet] section with idss and vp");
    fail_section("jfet", prefix + "jfet: each stage needs a [stage.jfet] section with idss and vp (or a class)");
  }
  const std::string jfet_section = prefix.empty() ? "[jfet]" : prefix + "jfet";
  if (form_a && form_b) fail_section("jfet", jfet_section + ": give either idss and vp, or beta and vto, not both");
  const std::string vkey = form_b ? "jfet.vto" : "jfet.vp";
  if (form_b) {
    if (!g.has("jfet.beta") || !g.has("jfet.vto")) fail_section("jfet", jfet_section + " needs both beta and vto");
  } else if (!g.has("jfet.idss") || !g.has("jfet.vp")) {
    fail_section("jfet", jfet_section + " needs idss and vp (or beta and vto, or a class)");
  }
  const double vp = g.get(vkey);
  if (!(sign * vp < 0))
    rd.fail_at(g.where[vkey], prefix + vkey,
               prefix + vkey + " must be " + (sign > 0 ? "negative" : "positive") + " for " + chan + " part" +
                   (sign > 0 ? " (for a p-channel part set jfet.polarity = \"p\")" : ""));
  st.jfet.vp_v = vp;
  st.jfet.idss_a = form_b ? g.get("jfet.beta") * vp * vp : g.get("jfet.idss");
  if (form_b) {
    const std::string m = base::bounds_refusal("the IDSS it gives (beta vto^2)", st.jfet.idss_a, ranges::idss, unit::ampere);
    if (!m.empty()) rd.fail_at(g.where["jfet.beta"], prefix + "jfet.beta", prefix + "jfet.beta: " + m);
  }
  st.jfet.lambda_per_v = g.get("jfet.lambda", 0.0);
  // IDSS measured at VDS = idss_vds: the model's current there is idss (1 + lambda vds),
  // so its own IDSS (at VDS = 0, what beta is made of) is idss / (1 + lambda idss_vds).
  if (g.has("jfet.idss_vds") && form_b)
    rd.fail_at(g.where["jfet.idss_vds"], prefix + "jfet.idss_vds",
               prefix + "jfet.idss_vds is the VDS at which idss was measured; it has no meaning beside beta and vto");
  if (!form_b) st.jfet.idss_a /= 1.0 + st.jfet.lambda_per_v * g.get("jfet.idss_vds", 0.0);
  st.jfet.is_a = g.get("jfet.is", 1e-14);
  st.jfet.n = g.get("jfet.n", 1.0);
  st.jfet.cgs_f = g.get("jfet.cgs");
  st.jfet.cgd_f = g.get("jfet.cgd");
  st.jfet.flicker_k = g.get("jfet.flicker_coefficient", 0.0);
  st.jfet.flicker_exponent = g.get("jfet.flicker_exponent", 1.0);
  st.jfet.gate_leakage_a = g.get("jfet.gate_leakage", 0.0);
  if (g.has("jfet.vds_max")) st.ratings.vds_max_v = g.get("jfet.vds_max");
  if (g.has("jfet.pd_max")) st.ratings.pd_max_w = g.get("jfet.pd_max");
  if (g.has("jfet.igf_max")) st.ratings.igf_max_a = g.get("jfet.igf_max");
  // The part's own temperature coefficients, in real signs: |VP| grows and beta falls as the
  // part warms (model/analysis/temperature_drift.hpp), so each has one sign.
  if (g.has("jfet.vp_drift")) {
    const double v = g.get("jfet.vp_drift");
    if (const std::string m = ranges::vp_drift_problem(sign * v, sign > 0 ? ranges::drift_frame::n_channel_part : ranges::drift_frame::p_channel_part); !m.empty())
      rd.fail_at(g.where["jfet.vp_drift"], prefix + "jfet.vp_drift", prefix + "jfet.vp_drift " + m);
    st.tempco.vp_drift_v_per_k = v;
  }
  if (g.has("jfet.beta_exponent")) {
    const double m = g.get("jfet.beta_exponent");
    if (const std::string why = ranges::beta_exponent_problem(m); !why.empty())
      rd.fail_at(g.where["jfet.beta_exponent"], prefix + "jfet.beta_exponent", prefix + "jfet.beta_exponent " + why);
    st.tempco.beta_exponent = m;
  }

  st.gate.coupling_cap_f = g.get("gate.coupling_cap");
  st.gate.resistor_ohm = g.get("gate.resistor");
  st.gate.bias_top_ohm = g.get("gate.bias_top");
  st.gate.bias_bottom_ohm = g.get("gate.bias_bottom");
  st.gate.bootstrap_cap_f = g.get("gate.bootstrap");
  st.gate.feedback_ohm = g.get("gate.feedback");
  st.drain_resistor_ohm = g.get("drain.resistor");
  st.drain_shunt_cap_f = g.get("drain.shunt_cap");
  st.source.unbypassed_ohm = g.get("source.unbypassed");
  st.source.resistor_ohm = g.get("source.resistor");
  st.source.bypass_cap_f = g.get("source.bypass_cap");
  st.output.coupling_cap_f = g.get("output.coupling_cap");
  st.output.load_ohm = g.get("output.load");
  st.rail.resistance_ohm = g.get("rail.resistance");
  st.rail.capacitance_f = g.get("rail.capacitance");
  return st;
}

// A gate bootstrap or feedback resistor that does not fit the stage, refused at its key
// (validate() holds stages built in code to the same).
void check_gate_extras(const reader& rd, const gathered& g, const stage_parts& p, const std::string& prefix) {
  std::string key;
  if (const std::string m = gate_extras_problem(p, prefix, key); !m.empty()) rd.fail_at(g.where.at(key), prefix + key, m);
}

// The source's kind and its parts ([signal]). A capsule connects to the first stage's gate
// directly, so that stage has no coupling capacitor, and its gate needs a DC path of its own.
void read_source(const reader& rd, const gathered& top, stage& st) {
  const std::string kind = top.signal_kind.value_or("resistive");
  if (kind == "resistive") {
    st.signal_kind = source_kind::resistive;
  } else if (kind == "capsule") {
    st.signal_kind = source_kind::capsule;
  } else if (kind == "pickup") {
    st.signal_kind = source_kind::pickup;
  } else {
    rd.fail_at(top.signal_kind_where, "signal.kind",
               "signal.kind must be \"resistive\", \"capsule\" or \"pickup\", not \"" + kind + "\"");
  }
  // Each source's own keys; `capacitance` is both a capsule's and a pickup's.
  static constexpr std::array<std::string_view, 2> capsule_only{"stray", "sensitivity"};
  static constexpr std::array<std::string_view, 4> pickup_only{"resistance", "inductance", "cable", "cable_capacitance"};
  auto where = [&](const std::string& k) { return top.where.at(k); };
  const std::string own = st.has_capsule() ? "a capsule source has signal.capacitance, signal.stray and signal.sensitivity"
                          : st.has_pickup()
                              ? "a pickup source has signal.resistance, signal.inductance, signal.capacitance, "
                                "signal.cable and signal.cable_capacitance"
                              : "a resistive source has only signal.impedance";
  // The first key in the file that belongs to another kind of source.
  std::optional<std::pair<std::string, std::string>> foreign;  // key, owner
  auto consider = [&](std::string_view k, std::string_view owner) {
    const std::string full = "signal." + std::string(k);
    if (!top.has(full)) return;
    const toml::source_position at = where(full).begin;
    if (foreign) {
      const toml::source_position was = where(foreign->first).begin;
      if (std::pair(was.line, was.column) <= std::pair(at.line, at.column)) return;
    }
    foreign = std::pair(full, std::string(owner));
  };
  if (st.signal_kind == source_kind::resistive) consider("capacitance", "capsule or a pickup");
  if (!st.has_capsule())
    for (std::string_view k : capsule_only) consider(k, "capsule");
  if (!st.has_pickup())
    for (std::string_view k : pickup_only) consider(k, "pickup");
  if (foreign) {
    const auto& [full, owner] = *foreign;
    const std::string set = owner == "capsule or a pickup" ? "\"capsule\" or \"pickup\"" : "\"" + owner + "\"";
    rd.fail_at(where(full), full, full + " belongs to a " + owner + " source: set signal.kind = " + set + " (" + own + ")");
  }
  if (st.signal_kind == source_kind::resistive) return;
  if (top.has("signal.impedance") && top.get("signal.impedance") > 0.0)
    rd.fail_at(where("signal.impedance"), "signal.impedance",
               st.has_capsule() ? "signal.impedance belongs to a resistive source: a capsule's impedance is its "
                                  "capacitance (signal.capacitance)"
                                : "signal.impedance belongs to a resistive source: a pickup's impedance is its "
                                  "signal.resistance and signal.inductance, with signal.capacitance across them");
  if (st.has_pickup()) {
    if (!top.has("signal.resistance") || !top.has("signal.inductance"))
      rd.fail_at(top.signal_kind_where, "signal.kind",
                 std::string("a pickup source needs ") +
                     (!top.has("signal.inductance") && !top.has("signal.resistance")
                          ? "signal.inductance (the coil's, such as \"2.5\" henries) and signal.resistance (its DC "
                            "resistance, such as \"6k\")"
                      : !top.has("signal.inductance") ? "signal.inductance (the coil's, such as \"2.5\" henries)"
                                                      : "signal.resistance (the coil's DC resistance, such as \"6k\")"));
    if (top.has("signal.capacitance"))
      if (const std::string m = base::bounds_refusal("signal.capacitance", top.get("signal.capacitance"), pickup_cap,
                                                     unit::farad);
          !m.empty())
        rd.fail_at(where("signal.capacitance"), "signal.capacitance", m);
    if (top.has("signal.cable_capacitance") && !(top.get("signal.cable") > 0.0))
      rd.fail_at(where("signal.cable_capacitance"), "signal.cable_capacitance",
                 "signal.cable_capacitance is per metre of signal.cable: give the cable's length too (signal.cable, "
                 "in metres, such as 3)");
    if (!top.has("signal.capacitance") && !(top.get("signal.cable") > 0.0))
      rd.fail_at(top.signal_kind_where, "signal.kind",
                 "a pickup source needs a capacitance across its output: signal.capacitance (the pickup's own and "
                 "its cable's, such as \"500p\") or signal.cable (in metres, at signal.cable_capacitance per metre)");
    st.pickup.resistance_ohm = top.get("signal.resistance");
    st.pickup.inductance_h = top.get("signal.inductance");
    st.pickup.capacitance_f = top.get("signal.capacitance");
    st.pickup.cable_m = top.get("signal.cable");
    st.pickup.cable_f_per_m = top.get("signal.cable_capacitance", st.pickup.cable_f_per_m);
    return;
  }
  if (top.has("signal.capacitance"))
    if (const std::string m =
            base::bounds_refusal("signal.capacitance", top.get("signal.capacitance"), capsule_cap, unit::farad);
        !m.empty())
      rd.fail_at(where("signal.capacitance"), "signal.capacitance", m);
  if (!top.has("signal.capacitance") || !top.has("signal.sensitivity"))
    rd.fail_at(top.signal_kind_where, "signal.kind",
               "a capsule source needs signal.capacitance (the capsule's, such as \"50p\") and signal.sensitivity "
               "(V/Pa at 1 kHz, such as \"12m\")");
  st.capsule.capacitance_f = top.get("signal.capacitance");
  st.capsule.stray_f = top.get("signal.stray");
  st.capsule.sensitivity_v_per_pa = top.get("signal.sensitivity");
  const std::string first = st.is_chain() ? "stage1." : "";
  if (st.gate.coupling_cap_f > 0.0)
    rd.fail_at(top.signal_kind_where, first + "gate.coupling_cap",
               first + "gate.coupling_cap: a capsule connects to the gate directly, its own capacitance "
               "(signal.capacitance) is the coupling; remove the gate coupling capacitor");
  if (!(st.gate.resistor_ohm > 0.0) && !(st.gate.bias_top_ohm > 0.0))
    rd.fail_at(top.signal_kind_where, first + "gate.resistor",
               "a capsule passes no DC: give the first stage's gate a path to its bias, " + first +
                   "gate.resistor (such as \"1G\") or a bias divider");
}

// Every node of the network reaches ground, the supply or the generator through resistors
// and JFET channels: otherwise its DC voltage is undefined (a gate behind capacitors alone, a
// node between two coupling capacitors). Returns the name of the first node that does not.
std::string floating_node(const network& net) {
  std::vector<int> parent(static_cast<std::size_t>(net.node_count));
  for (int n = 0; n < net.node_count; ++n) parent[static_cast<std::size_t>(n)] = n;
  auto find = [&](int n) {
    while (parent[static_cast<std::size_t>(n)] != n) n = parent[static_cast<std::size_t>(n)] = parent[static_cast<std::size_t>(parent[static_cast<std::size_t>(n)])];
    return n;
  };
  auto join = [&](int a, int b) { parent[static_cast<std::size_t>(find(a))] = find(b); };
  join(net.supply_node, 0);
  join(net.generator_node, 0);
  for (const net_resistor& r : net.resistors) join(r.a, r.b);
  for (const net_inductor& l : net.inductors) join(l.a, l.b);
  for (const net_jfet& q : net.jfets) join(q.drain, q.source);
  for (int n = 1; n < net.node_count; ++n)
    if (find(n) != find(0)) return net.node_names[static_cast<std::size_t>(n)];
  return {};
}

}  // namespace

std::string override_key(const stage_override& o) {
  std::string k = o.stage > 0 ? "stage" + std::to_string(o.stage) + "." : std::string();
  if (!o.section.empty()) k += o.section + ".";
  return k + o.key;
}

stage parse_stage(std::string_view text, std::string_view source_name, std::span<const stage_override> overrides,
                  const std::filesystem::path& devices_file) {
  reader rd(source_name);
  toml::table root;
  base::check_toml_depth(text, source_name);
  try {
    root = toml::parse(text, source_name);
  } catch (const toml::parse_error& e) {
    const auto& b = e.source().begin;
    throw input_error(std::string(source_name) + ":" + std::to_string(b.line) + ":" + std::to_string(b.column) +
                      ": " + std::string(e.description()));
  }
  for (const stage_override& o : overrides) apply_override(root, o);

  const toml::node* chain_node = root.get("stage");
  const bool chain = chain_node != nullptr;

  // Top level: the shared sections, plus (single stage) the stage's own.
  std::vector<std::string_view> top_known{"name", "temperature"};
  for (const section_spec& s : shared_schema()) top_known.push_back(s.name);
  if (chain) {
    top_known.push_back("output");
    top_known.push_back("stage");
  } else {
    top_known.push_back("topology");
    for (const section_spec& s : stage_schema())
      if (s.name != "rail") top_known.push_back(s.name);
  }

  stage st;
  gathered top;
  std::optional<topology> top_topology;
  for (auto&& [k, node] : root) {
    const std::string key(k.str());
    const toml::source_region at = k.source().begin.line ? k.source() : node.source();
    if (key == "name") {
      st.name = rd.text(node, key);
      continue;
    }
    if (key == "temperature") {
      st.temperature_k = rd.number(node, key, {"temperature", unit::kelvin, rule::positive, temperature});
      continue;
    }
    if (key == "stage") continue;
    if (chain && (is_stage_section(key) && key != "output"))
      rd.fail_at(at, key,
                 "'" + key + "' at the top of a chain file: a file with [[stage]] tables keeps each stage's " +
                     (key == "topology" || key == "between" ? "'" + key + "'" : "[" + key + "]") +
                     " inside its [[stage]] (as [stage." + key + "]), and only name, temperature, [supply], [signal] "
                     "and [output] at the top");
    if (key == "topology") {
      top_topology = read_topology(rd, node, key);
      continue;
    }
    if (!chain && (key == "rail" || key == "between"))
      rd.fail_at(at, key, "'" + key + "' belongs to a stage of a chain ([[stage]]); a single stage is fed by [supply]" +
                              std::string(key == "between" ? " and driven by [signal]" : ""));
    const section_spec* sec = find_section(shared_schema(), key);
    if (sec == nullptr) sec = find_section(stage_schema(), key);
    if (sec == nullptr) rd.fail_at(at, key, unknown_key_message(key, chain ? "a chain file" : "the stage file", top_known));
    if (chain && key == "output") {
      static constexpr std::pair<std::string_view, std::string_view> omit[]{
          {"coupling_cap", "the top-level [output] holds only the chain's load; a stage's coupling capacitor goes in its "
                           "[stage.output]"}};
      read_section(rd, key, node, *sec, "", top, omit);
    } else {
      read_section(rd, key, node, *sec, "", top);
    }
  }

  // Shared: supply, signal, temperature.
  auto supply_sign_check = [&](polarity pol) {
    const double sign = pol == polarity::p ? -1.0 : 1.0;
    const char* chan = pol == polarity::p ? "a p-channel" : "an n-channel";
    if (top.phantom) {
      const phantom_feed* feed = find_phantom(*top.phantom);
      if (feed == nullptr)
        rd.fail_at(top.phantom_where, "supply.phantom",
                   "supply.phantom must be \"P48\", \"P24\" or \"P12\" (the feeds of IEC 61938), not \"" + *top.phantom + "\"");
      for (const char* k : {"supply.volts", "supply.resistance"})
        if (top.has(k))
          rd.fail_at(top.where.at(k), k,
                     std::string(k) + ": supply.phantom = \"" + *top.phantom + "\" sets the voltage and the feed "
                     "resistance; give one or the other");
      if (sign < 0)
        rd.fail_at(top.phantom_where, "supply.phantom",
                   "supply.phantom feeds a positive voltage: a p-channel stage cannot run from it as it stands");
      st.supply.phantom = feed;
      st.supply.volts_v = feed->volts_v;
      return;
    }
    if (!root.contains("supply") || !top.has("supply.volts")) {
      if (const toml::node* n = root.get("supply"); n != nullptr && n->source().begin.line != 0)
        rd.fail_at(n->source(), "supply", "[supply] needs volts (the supply voltage)");
      rd.fail_file("[supply] needs volts (the supply voltage)");
    }
    st.supply.volts_v = top.get("supply.volts");
    if (!(sign * st.supply.volts_v > 0))
      rd.fail_at(top.where["supply.volts"], "supply.volts",
                 std::string("supply.volts must be ") + (sign > 0 ? "positive" : "negative") + " for " + chan +
                     (chain ? " chain" : " stage") + (sign > 0 ? " (for a p-channel part set jfet.polarity = \"p\")" : ""));
  };

  if (!chain) {
    static_cast<stage_parts&>(st) = build_parts(rd, root, top, "", source_name, devices_file);
    plausibility_warnings(rd, top, "", st.file_warnings);
    if (top_topology) st.topo = *top_topology;
    check_gate_extras(rd, top, st, "");
    supply_sign_check(st.pol);
  } else {
    const toml::array* arr = chain_node->as_array();
    if (arr == nullptr || !arr->is_array_of_tables())
      rd.fail_at(chain_node->source(), "stage", "'stage' must be an array of tables, written [[stage]] before each stage");
    if (arr->size() < 2)
      rd.fail_at(chain_node->source(), "stage",
                 "a chain needs at least two [[stage]] tables; for one stage write its sections at the top of the file");
    if (arr->size() > static_cast<std::size_t>(max_chain_stages)) {
      const toml::node& extra = *arr->get(static_cast<std::size_t>(max_chain_stages));
      rd.fail_at(extra.source(), "stage", "a chain holds at most " + std::to_string(max_chain_stages) + " stages, this one " +
                                             std::to_string(arr->size()));
    }
    for (std::size_t i = 0; i < arr->size(); ++i) {
      const toml::table& t = *arr->get_as<toml::table>(i);
      const std::string prefix = "stage" + std::to_string(i + 1) + ".";
      gathered g;
      std::optional<topology> topo;
      std::vector<between_part> between;
      std::string label;
      std::vector<std::string_view> known{"name", "topology", "between"};
      for (const section_spec& s : stage_schema()) known.push_back(s.name);
      for (auto&& [k, node] : t) {
        const std::string key(k.str());
        const std::string shown = prefix + key;
        const toml::source_region at = k.source().begin.line ? k.source() : node.source();
        if (key == "name") {
          label = rd.text(node, shown);
        } else if (key == "topology") {
          topo = read_topology(rd, node, shown);
        } else if (key == "between") {
          if (i == 0)
            rd.fail_at(at, shown, shown + ": the first stage has no 'between' (nothing comes before it); the source's "
                                          "own parts are in [signal]");
          between = read_between(rd, node, shown);
        } else if (const section_spec* sec = find_section(stage_schema(), key); sec != nullptr) {
          if (key == "output") {
            static constexpr std::pair<std::string_view, std::string_view> omit[]{
                {"load", "the chain's load is the top-level [output] load, across the last stage's output"}};
            read_section(rd, key, node, *sec, prefix, g, omit);
          } else {
            read_section(rd, key, node, *sec, prefix, g);
          }
        } else if (find_section(shared_schema(), key) != nullptr || key == "temperature") {
          rd.fail_at(at, shown, shown + ": " + (key == "temperature" ? "'temperature'" : "[" + key + "]") +
                                    " is shared by the whole chain: write it once at the top of the file");
        } else {
          rd.fail_at(at, shown, unknown_key_message(key, "[[stage]] " + std::to_string(i + 1), known));
        }
      }
      stage_parts p = build_parts(rd, t, g, prefix, source_name, devices_file);
      plausibility_warnings(rd, g, prefix, st.file_warnings);
      if (topo) p.topo = *topo;
      check_gate_extras(rd, g, p, prefix);
      p.between = std::move(between);
      p.label = label;
      if (i == 0) static_cast<stage_parts&>(st) = std::move(p);
      else st.later.push_back(std::move(p));
    }
    st.last().output.load_ohm = top.get("output.load");
    supply_sign_check(st.pol);
  }
  st.supply.resistance_ohm = st.supply.phantom ? st.supply.phantom->resistance_ohm : top.get("supply.resistance");
  st.supply.capacitance_f = top.get("supply.capacitance");
  st.signal_impedance_ohm = top.get("signal.impedance");
  read_source(rd, top, st);
  if (st.name.empty()) st.name = std::string(source_name);
  st.file = std::string(source_name);

  // A refusal that names a chain's stage ("stage2: ...", "the stage1.output node ...") points
  // at that stage's [[stage]] header.
  auto fail_in_stage = [&](const std::string& msg, std::string_view named) {
    if (st.is_chain() && named.size() > 5 && named.substr(0, 5) == "stage") {
      const std::size_t n = static_cast<std::size_t>(named[5] - '0');
      const toml::array* arr = chain_node->as_array();
      if (n >= 1 && n <= arr->size() && arr->get(n - 1)->source().begin.line != 0)
        rd.fail_at(arr->get(n - 1)->source(), "stage", msg);
    }
    rd.fail_file(msg);
  };
  try {
    validate(st);
  } catch (const input_error& e) {
    fail_in_stage(e.what(), e.what());
  }
  if (st.is_chain()) {
    const std::string node = floating_node(build_network(st));
    if (!node.empty())
      fail_in_stage("the " + node + " node has no DC path to ground or the supply (only capacitors reach it): give it a "
                    "resistor, such as a gate resistor or a shunt in 'between'",
                    node);
  }
  return st;
}

stage read_stage_file(const std::filesystem::path& path, std::span<const stage_override> overrides,
                      const std::filesystem::path& devices_file) {
  const std::string text = base::read_text_file(path, stage_file_kind);
  if (text.find_first_not_of(" \t\r\n") == std::string::npos)
    throw input_error(path.string() + ": the file is empty (expected a stage description, see README \"Stage file\")");
  return parse_stage(text, path.string(), overrides, devices_file);
}

}  // namespace pinchoff::model
