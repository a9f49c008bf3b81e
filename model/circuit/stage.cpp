#include "model/circuit/stage.hpp"

#include <array>
#include <charconv>
#include <string>

#include "base/error.hpp"
#include "base/units.hpp"

namespace pinchoff::model {
namespace {

constexpr std::array<std::string_view, 7> own_resistor_keys{"source.resistor",  "source.unbypassed", "drain.resistor",
                                                          "gate.bias_top",    "gate.bias_bottom",  "gate.resistor",
                                                          "gate.feedback"};

double* own_resistor(stage_parts& p, std::string_view key) noexcept {
  if (key == "source.resistor") return &p.source.resistor_ohm;
  if (key == "source.unbypassed") return &p.source.unbypassed_ohm;
  if (key == "drain.resistor") return &p.drain_resistor_ohm;
  if (key == "gate.bias_top") return &p.gate.bias_top_ohm;
  if (key == "gate.bias_bottom") return &p.gate.bias_bottom_ohm;
  if (key == "gate.resistor") return &p.gate.resistor_ohm;
  if (key == "gate.feedback") return &p.gate.feedback_ohm;
  if (key == "rail.resistance") return &p.rail.resistance_ohm;
  return nullptr;
}

void validate_parts(const stage_parts& s, const std::string& prefix, bool last) {
  auto fail = [&](const std::string& m) { throw input_error(prefix + m); };
  const bool p = s.pol == polarity::p;
  if (!(s.jfet.idss_a > 0)) fail("jfet.idss must be above 0 A");
  if (p ? !(s.jfet.vp_v > 0) : !(s.jfet.vp_v < 0))
    fail(std::string("jfet.vp must be ") + (p ? "positive for a p-channel part" : "negative for an n-channel part"));
  if (s.topo == topology::common_source && !(s.drain_resistor_ohm > 0))
    fail("a common-source stage needs drain.resistor above 0 ohm (the output is taken at the drain)");
  if (s.topo == topology::source_follower && !(s.source.resistor_ohm > 0) && !(s.source.unbypassed_ohm > 0))
    fail("a source follower needs source.resistor (the output is taken at the source)");
  const bool divider = s.gate.bias_top_ohm > 0 || s.gate.bias_bottom_ohm > 0;
  std::string extra_key;
  if (const std::string m = gate_extras_problem(s, prefix, extra_key); !m.empty()) throw input_error(m);
  // A bootstrapped gate resistor's foot may sit on gate.bias_bottom alone (to ground).
  const bool foot_to_ground = s.gate.bootstrap_cap_f > 0 && s.gate.bias_bottom_ohm > 0 && !(s.gate.bias_top_ohm > 0);
  if (divider && !foot_to_ground && !(s.gate.bias_top_ohm > 0 && s.gate.bias_bottom_ohm > 0))
    fail("a bias divider needs both gate.bias_top and gate.bias_bottom");
  if (s.gate.coupling_cap_f > 0 && !(s.gate.resistor_ohm > 0) && !divider)
    fail("the gate has no DC path: with gate.coupling_cap, give gate.resistor (to ground) or a bias divider");
  if (s.source.bypass_cap_f > 0 && !(s.source.resistor_ohm > 0))
    fail("source.bypass_cap needs source.resistor to shunt");
  if (s.drain_shunt_cap_f > 0 && !(s.drain_resistor_ohm > 0))
    fail("drain.shunt_cap needs drain.resistor to sit across");
  if (last && s.output.coupling_cap_f > 0 && !(s.output.load_ohm > 0))
    fail(prefix.empty() ? "output.coupling_cap needs output.load (otherwise the coupled output floats)"
                        : "output.coupling_cap needs the chain's load, the top-level [output] load (otherwise the coupled "
                          "output floats)");
  if (s.rail.capacitance_f > 0 && !(s.rail.resistance_ohm > 0))
    fail("rail.capacitance needs rail.resistance (across the supply itself it filters nothing)");
}

}  // namespace

const phantom_feed* find_phantom(std::string_view name) noexcept {
  // IEC 61938 (from memory): voltage, one leg's feed resistance (halved: both legs feed the
  // microphone in parallel) and the largest current the feed must supply.
  static constexpr phantom_feed feeds[]{{"P48", 48.0, 6800.0 / 2, 10e-3},
                                        {"P24", 24.0, 1200.0 / 2, 10e-3},
                                        {"P12", 12.0, 680.0 / 2, 15e-3}};
  for (const phantom_feed& f : feeds)
    if (f.name == name) return &f;
  return nullptr;
}

double capsule_drive_vpk(const capsule_part& c, double level_db_spl) noexcept {
  return c.sensitivity_v_per_pa * base::pa_rms_from_db_spl(level_db_spl) * base::sqrt2;
}

double capsule_level_db_spl(const capsule_part& c, double drive_vpk) noexcept {
  return base::db_spl_from_pa_rms(drive_vpk / base::sqrt2 / c.sensitivity_v_per_pa);
}

double pot_fraction(pot_taper taper, double position) noexcept {
  if (taper == pot_taper::linear) return position;
  return position <= 0.5 ? 0.2 * position : 0.1 + 1.8 * (position - 0.5);
}

std::string stage_key(const stage& s, int k, std::string_view key) {
  if (!s.is_chain()) return std::string(key);
  return "stage" + std::to_string(k + 1) + "." + std::string(key);
}

std::vector<std::string> adjustable_resistor_keys(const stage& s) {
  std::vector<std::string> keys;
  for (int k = 0; k < s.stage_count(); ++k) {
    for (std::string_view key : own_resistor_keys) keys.push_back(stage_key(s, k, key));
    if (s.is_chain()) keys.push_back(stage_key(s, k, "rail.resistance"));
  }
  keys.push_back("supply.resistance");
  keys.push_back("output.load");
  return keys;
}

double* resistor_field(stage& s, std::string_view key) noexcept {
  if (key == "supply.resistance") return &s.supply.resistance_ohm;
  if (key == "output.load") return &s.last().output.load_ohm;
  if (!s.is_chain()) return key == "rail.resistance" ? nullptr : own_resistor(s, key);
  if (key.substr(0, 5) != "stage") return nullptr;
  const std::size_t dot = key.find('.');
  if (dot == std::string_view::npos) return nullptr;
  int n = 0;
  const auto [ptr, ec] = std::from_chars(key.data() + 5, key.data() + dot, n);
  if (ec != std::errc{} || ptr != key.data() + dot || n < 1 || n > s.stage_count()) return nullptr;
  return own_resistor(s.part(n - 1), key.substr(dot + 1));
}

std::string gate_extras_problem(const stage_parts& p, const std::string& prefix, std::string& key) {
  if (p.gate.bootstrap_cap_f > 0) {
    key = "gate.bootstrap";
    const std::string k = prefix + key;
    if (p.topo != topology::source_follower)
      return k + " drives the gate resistor's foot from the source: it belongs to a source follower (topology = "
                 "\"source-follower\"); a common-source stage's input resistance is its gate resistor's";
    if (!(p.gate.resistor_ohm > 0))
      return k + " needs " + prefix + "gate.resistor: the bootstrap drives that resistor's foot, so the resistor "
                 "carries almost no signal current";
    if (!(p.gate.bias_bottom_ohm > 0))
      return k + " needs a DC path for the gate resistor's foot: " + prefix +
             "gate.bias_bottom to ground (such as \"100k\"), or a divider, " + prefix + "gate.bias_top and " + prefix +
             "gate.bias_bottom";
  }
  if (p.gate.feedback_ohm > 0 && p.topo != topology::common_source) {
    key = "gate.feedback";
    return prefix + key + " runs from the drain back to the gate of a common-source stage: a source follower's drain "
                          "carries no signal to feed back";
  }
  key.clear();
  return {};
}

void validate(const stage& s) {
  const bool p = s.pol == polarity::p;
  if (p ? !(s.supply.volts_v < 0) : !(s.supply.volts_v > 0))
    throw input_error(std::string("supply.volts must be ") +
                      (p ? "negative for a p-channel stage" : "positive for an n-channel stage"));
  if (!(s.temperature_k > 0)) throw input_error("temperature must be above 0 K");
  if (s.stage_count() > max_chain_stages)
    throw input_error("a chain holds at most " + std::to_string(max_chain_stages) + " stages, this one " +
                      std::to_string(s.stage_count()));
  for (int k = 0; k < s.stage_count(); ++k) {
    const stage_parts& part = s.part(k);
    const std::string prefix = s.is_chain() ? "stage" + std::to_string(k + 1) + ": " : std::string();
    if (part.pol != s.pol) throw input_error(prefix + "every stage of a chain must have the polarity of the first");
    if (k == 0 && !part.between.empty()) throw input_error(prefix + "the first stage has no 'between' (nothing comes before it)");
    validate_parts(part, prefix, k + 1 == s.stage_count());
  }
}

}  // namespace pinchoff::model
