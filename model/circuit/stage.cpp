#include "model/circuit/stage.hpp"

#include <array>
#include <string>

#include "base/error.hpp"

namespace pinchoff::model {

std::vector<std::string_view> adjustable_resistor_keys() noexcept {
  return {"source.resistor", "source.unbypassed", "drain.resistor", "gate.bias_top", "gate.bias_bottom",
          "gate.resistor", "supply.resistance", "output.load"};
}

double* resistor_field(stage& s, std::string_view key) noexcept {
  if (key == "source.resistor") return &s.source.resistor_ohm;
  if (key == "source.unbypassed") return &s.source.unbypassed_ohm;
  if (key == "drain.resistor") return &s.drain_resistor_ohm;
  if (key == "gate.bias_top") return &s.gate.bias_top_ohm;
  if (key == "gate.bias_bottom") return &s.gate.bias_bottom_ohm;
  if (key == "gate.resistor") return &s.gate.resistor_ohm;
  if (key == "supply.resistance") return &s.supply.resistance_ohm;
  if (key == "output.load") return &s.output.load_ohm;
  return nullptr;
}

void validate(const stage& s) {
  auto fail = [](const std::string& m) { throw input_error(m); };
  const bool p = s.pol == polarity::p;
  if (p ? !(s.supply.volts_v < 0) : !(s.supply.volts_v > 0))
    fail(std::string("supply.volts must be ") + (p ? "negative for a p-channel stage" : "positive for an n-channel stage"));
  if (!(s.jfet.idss_a > 0)) fail("jfet.idss must be above 0 A");
  if (p ? !(s.jfet.vp_v > 0) : !(s.jfet.vp_v < 0))
    fail(std::string("jfet.vp must be ") + (p ? "positive for a p-channel part" : "negative for an n-channel part"));
  if (s.topo == topology::common_source && !(s.drain_resistor_ohm > 0))
    fail("a common-source stage needs drain.resistor above 0 ohm (the output is taken at the drain)");
  if (s.topo == topology::source_follower && !(s.source.resistor_ohm > 0) && !(s.source.unbypassed_ohm > 0))
    fail("a source follower needs source.resistor (the output is taken at the source)");
  const bool divider = s.gate.bias_top_ohm > 0 || s.gate.bias_bottom_ohm > 0;
  if (divider && !(s.gate.bias_top_ohm > 0 && s.gate.bias_bottom_ohm > 0))
    fail("a bias divider needs both gate.bias_top and gate.bias_bottom");
  if (s.gate.coupling_cap_f > 0 && !(s.gate.resistor_ohm > 0) && !divider)
    fail("the gate has no DC path: with gate.coupling_cap, give gate.resistor (to ground) or a bias divider");
  if (s.source.bypass_cap_f > 0 && !(s.source.resistor_ohm > 0))
    fail("source.bypass_cap needs source.resistor to shunt");
  if (s.output.coupling_cap_f > 0 && !(s.output.load_ohm > 0))
    fail("output.coupling_cap needs output.load (otherwise the coupled output floats)");
  if (!(s.temperature_k > 0)) fail("temperature must be above 0 K");
}

}  // namespace pinchoff::model
