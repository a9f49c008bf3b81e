#include "model/circuit/stage_file.hpp"

#include <algorithm>
#include <cstdint>
#include <optional>
#include <cerrno>
#include <cmath>
#include <cstring>
#include <fstream>
#include <map>
#include <sstream>
#include <vector>

#include <toml++/toml.h>

#include "base/error.hpp"
#include "base/text_file.hpp"
#include "base/toml_depth.hpp"
#include "base/text.hpp"
#include "base/units.hpp"
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

const std::vector<section_spec>& schema() {
  namespace r = ranges;
  static const std::vector<section_spec> s{
      {"supply", {{"volts", unit::volt, rule::any_sign, supply_volts}, {"resistance", unit::ohm, rule::non_negative, optional_resistor},
                  {"capacitance", unit::farad, rule::non_negative, capacitor}}},
      {"jfet", {{"polarity", unit::none, rule::any_sign}, {"class", unit::none, rule::any_sign},
                {"idss", unit::ampere, rule::positive, r::idss},
                {"vp", unit::volt, rule::any_sign, r::vp}, {"beta", unit::none, rule::positive, r::beta},
                {"vto", unit::volt, rule::any_sign, r::vp}, {"lambda", unit::per_volt, rule::non_negative, r::lambda},
                {"is", unit::ampere, rule::non_negative, r::is}, {"n", unit::none, rule::positive, r::n},
                {"cgs", unit::farad, rule::non_negative, r::junction_cap}, {"cgd", unit::farad, rule::non_negative, r::junction_cap},
                {"vds_max", unit::volt, rule::positive, r::vds_max}, {"pd_max", unit::watt, rule::positive, r::pd_max},
                {"igf_max", unit::ampere, rule::positive, r::igf_max}}},
      {"signal", {{"impedance", unit::ohm, rule::non_negative, optional_resistor}}},
      {"gate", {{"coupling_cap", unit::farad, rule::non_negative, capacitor}, {"resistor", unit::ohm, rule::positive, gate_resistor},
                {"bias_top", unit::ohm, rule::positive, gate_resistor}, {"bias_bottom", unit::ohm, rule::positive, gate_resistor}}},
      {"drain", {{"resistor", unit::ohm, rule::non_negative, optional_resistor}}},
      {"source", {{"unbypassed", unit::ohm, rule::non_negative, optional_resistor}, {"resistor", unit::ohm, rule::positive, resistor},
                  {"bypass_cap", unit::farad, rule::non_negative, capacitor}}},
      {"output", {{"coupling_cap", unit::farad, rule::non_negative, capacitor}, {"load", unit::ohm, rule::positive, resistor}}},
  };
  return s;
}

constexpr std::array<std::string_view, 3> top_scalars{"name", "topology", "temperature"};

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
  [[noreturn]] void fail_file(const std::string& msg) const { throw input_error(std::string(source_) + ": " + msg); }

  /// Points at a section's header when the section exists, else at the file.
  [[noreturn]] void fail_section(const toml::table& root, std::string_view section, const std::string& msg) const {
    if (const toml::node* n = root.get(section); n != nullptr && n->source().begin.line != 0)
      fail_at(n->source(), std::string(section), msg);
    fail_file(msg);
  }

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

std::string unknown_key_message(std::string_view key, std::string_view where, std::span<const std::string_view> known) {
  std::string m = "unknown key '" + std::string(key) + "' in " + std::string(where);
  const std::string near = base::nearest_name(key, known);
  if (!near.empty()) m += "; did you mean '" + near + "'?";
  return m;
}

void apply_override(toml::table& root, const stage_override& o) {
  if (o.section.empty()) {
    root.insert_or_assign(o.key, o.value);
    return;
  }
  toml::node* sec = root.get(o.section);
  if (sec == nullptr) {
    root.insert_or_assign(o.section, toml::table{});
    sec = root.get(o.section);
  }
  if (!sec->is_table()) throw setting_error(o.section + "." + o.key, "'" + o.section + "' is not a section");
  sec->as_table()->insert_or_assign(o.key, o.value);
}

}  // namespace

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

  std::vector<std::string_view> top_known(top_scalars.begin(), top_scalars.end());
  for (const section_spec& s : schema()) top_known.push_back(s.name);

  stage st;
  std::map<std::string, double> values;              // "section.key" -> value
  std::map<std::string, toml::source_region> where;  // for later messages
  std::string polarity_text = "n";
  toml::source_region polarity_where;
  std::optional<std::string> class_name;
  toml::source_region class_where;

  for (auto&& [k, node] : root) {
    const std::string key(k.str());
    if (key == "name") {
      st.name = rd.text(node, key);
      continue;
    }
    if (key == "topology") {
      const std::string t = rd.text(node, key);
      if (t == "common-source") st.topo = topology::common_source;
      else if (t == "source-follower") st.topo = topology::source_follower;
      else rd.fail_at(node.source(), key, "topology must be \"common-source\" or \"source-follower\", not \"" + t + "\"");
      continue;
    }
    if (key == "temperature") {
      st.temperature_k = rd.number(node, key, {"temperature", unit::kelvin, rule::positive, temperature});
      continue;
    }
    const auto sec = std::find_if(schema().begin(), schema().end(), [&](const section_spec& s) { return s.name == key; });
    if (sec == schema().end()) {
      const toml::source_region at = k.source().begin.line ? k.source() : node.source();
      rd.fail_at(at, key, unknown_key_message(key, "the stage file", top_known));
    }
    if (!node.is_table()) rd.fail_at(node.source(), key, "'" + key + "' must be a section [" + key + "], got " + reader::type_name(node));
    std::vector<std::string_view> known;
    for (const key_spec& ks : sec->keys) known.push_back(ks.name);
    for (auto&& [k2, v] : *node.as_table()) {
      const std::string name(k2.str());
      const std::string full = key + "." + name;
      const auto spec = std::find_if(sec->keys.begin(), sec->keys.end(), [&](const key_spec& s) { return s.name == name; });
      if (spec == sec->keys.end()) {
        const toml::source_region at = k2.source().begin.line ? k2.source() : v.source();
        rd.fail_at(at, full, unknown_key_message(name, "[" + key + "]", known));
      }
      if (full == "jfet.polarity") {
        polarity_text = rd.text(v, full);
        polarity_where = v.source();
        continue;
      }
      if (full == "jfet.class") {
        class_name = rd.text(v, full);
        class_where = v.source();
        continue;
      }
      values[full] = rd.number(v, full, *spec);
      where[full] = v.source();
    }
  }

  auto has = [&](const char* k) { return values.count(k) > 0; };
  auto get = [&](const char* k, double dflt = 0.0) { return has(k) ? values.at(k) : dflt; };

  if (polarity_text == "p") st.pol = polarity::p;
  else if (polarity_text != "n") rd.fail_at(polarity_where, "jfet.polarity", "jfet.polarity must be \"n\" or \"p\", not \"" + polarity_text + "\"");
  const double sign = st.pol == polarity::p ? -1.0 : 1.0;
  const char* chan = st.pol == polarity::p ? "a p-channel" : "an n-channel";

  if (!root.contains("supply") || !has("supply.volts")) rd.fail_section(root, "supply", "[supply] needs volts (the supply voltage)");
  st.supply.volts_v = get("supply.volts");
  if (!(sign * st.supply.volts_v > 0))
    rd.fail_at(where["supply.volts"], "supply.volts",
               std::string("supply.volts must be ") + (sign > 0 ? "positive" : "negative") + " for " + chan +
                   " stage" + (sign > 0 ? " (for a p-channel part set jfet.polarity = \"p\")" : ""));
  st.supply.resistance_ohm = get("supply.resistance");
  st.supply.capacitance_f = get("supply.capacitance");

  // A named class fills in whatever the file does not give (values given win).
  if (class_name && class_name->find_first_not_of(" \t") == std::string::npos)
    rd.fail_at(class_where, "jfet.class",
               "jfet.class is empty: give the name of a device class, such as \"general-purpose\" (README \"Stage "
               "file\" lists them), or leave the key out");
  if (class_name) {
    try {
      st.jfet_class = find_device_class(*class_name, device_file_for(std::filesystem::path(std::string(source_name)), devices_file));
    } catch (const input_error& e) {
      rd.fail_at(class_where, "jfet.class", e.what());
    }
    const device_class& c = *st.jfet_class;
    if (!has("jfet.beta") && !has("jfet.vto")) {
      if (!has("jfet.idss")) values["jfet.idss"] = c.typical_idss_a;
      if (!has("jfet.vp")) {
        values["jfet.vp"] = sign * c.typical_vp_v;
        where["jfet.vp"] = class_where;
      }
    }
    if (!has("jfet.lambda")) values["jfet.lambda"] = c.lambda_per_v;
    if (!has("jfet.is")) values["jfet.is"] = c.is_a;
    if (!has("jfet.n")) values["jfet.n"] = c.n;
    if (!has("jfet.cgs")) values["jfet.cgs"] = c.cgs_f;
    if (!has("jfet.cgd")) values["jfet.cgd"] = c.cgd_f;
  }

  // Device: idss + vp, or beta + vto.
  const bool form_a = has("jfet.idss") || has("jfet.vp");
  const bool form_b = has("jfet.beta") || has("jfet.vto");
  if (!root.contains("jfet")) rd.fail_file("the stage file needs a [jfet] section with idss and vp");
  if (form_a && form_b) rd.fail_section(root, "jfet", "[jfet]: give either idss and vp, or beta and vto, not both");
  const char* vkey = form_b ? "jfet.vto" : "jfet.vp";
  if (form_b) {
    if (!has("jfet.beta") || !has("jfet.vto")) rd.fail_section(root, "jfet", "[jfet] needs both beta and vto");
  } else if (!has("jfet.idss") || !has("jfet.vp")) {
    rd.fail_section(root, "jfet", "[jfet] needs idss and vp (or beta and vto, or a class)");
  }
  const double vp = get(vkey);
  if (!(sign * vp < 0))
    rd.fail_at(where[vkey], vkey,
               std::string(vkey) + " must be " + (sign > 0 ? "negative" : "positive") + " for " + chan + " part" +
                   (sign > 0 ? " (for a p-channel part set jfet.polarity = \"p\")" : ""));
  st.jfet.vp_v = vp;
  st.jfet.idss_a = form_b ? get("jfet.beta") * vp * vp : get("jfet.idss");
  if (form_b) {
    const std::string m = base::bounds_refusal("the IDSS it gives (beta vto^2)", st.jfet.idss_a, ranges::idss, unit::ampere);
    if (!m.empty()) rd.fail_at(where["jfet.beta"], "jfet.beta", "jfet.beta: " + m);
  }
  st.jfet.lambda_per_v = get("jfet.lambda", 0.0);
  st.jfet.is_a = get("jfet.is", 1e-14);
  st.jfet.n = get("jfet.n", 1.0);
  st.jfet.cgs_f = get("jfet.cgs");
  st.jfet.cgd_f = get("jfet.cgd");
  if (has("jfet.vds_max")) st.ratings.vds_max_v = get("jfet.vds_max");
  if (has("jfet.pd_max")) st.ratings.pd_max_w = get("jfet.pd_max");
  if (has("jfet.igf_max")) st.ratings.igf_max_a = get("jfet.igf_max");

  st.signal_impedance_ohm = get("signal.impedance");
  st.gate.coupling_cap_f = get("gate.coupling_cap");
  st.gate.resistor_ohm = get("gate.resistor");
  st.gate.bias_top_ohm = get("gate.bias_top");
  st.gate.bias_bottom_ohm = get("gate.bias_bottom");
  st.drain_resistor_ohm = get("drain.resistor");
  st.source.unbypassed_ohm = get("source.unbypassed");
  st.source.resistor_ohm = get("source.resistor");
  st.source.bypass_cap_f = get("source.bypass_cap");
  st.output.coupling_cap_f = get("output.coupling_cap");
  st.output.load_ohm = get("output.load");
  if (st.name.empty()) st.name = std::string(source_name);
  st.file = std::string(source_name);

  try {
    validate(st);
  } catch (const input_error& e) {
    rd.fail_file(e.what());
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
