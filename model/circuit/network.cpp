#include "model/circuit/network.hpp"

#include <algorithm>
#include <cmath>
#include <string>
#include <vector>

#include "base/units.hpp"

namespace pinchoff::model {

bool is_large_cap(cap_role r) noexcept { return r != cap_role::junction_gs && r != cap_role::junction_gd; }

network build_network(const stage& s) {
  network net;
  net.sign = polarity_sign(s);
  net.node_names.push_back("ground");
  auto new_node = [&](std::string name) {
    net.node_names.push_back(std::move(name));
    return net.node_count++;
  };
  auto add_r = [&](int a, int b, double ohm, std::string_view key) { net.resistors.push_back({a, b, ohm, key}); };
  auto add_c = [&](int a, int b, double f, cap_role role, std::string_view key) {
    if (f > 0.0) net.capacitors.push_back({a, b, f, role, key});
  };

  net_jfet& q = net.jfets.emplace_back();
  q.device = s.jfet;
  q.device.vp_v = net.sign * s.jfet.vp_v;
  net.vt_v = thermal_voltage(s.temperature_k);
  net.source = s.file;
  net.supply_v = net.sign * s.supply.volts_v;

  // Supply: ideal source -> series resistance -> rail (with reservoir capacitor).
  net.supply_node = new_node("supply");
  int rail = net.supply_node;
  if (s.supply.resistance_ohm > 0.0) {
    rail = new_node("rail");
    add_r(net.supply_node, rail, s.supply.resistance_ohm, "supply.resistance");
  }
  // Across an ideal source a reservoir capacitor changes nothing (and would put two
  // voltage sources in parallel in the held and shorted analyses): only with a series
  // resistance does it filter.
  if (rail != net.supply_node) add_c(rail, 0, s.supply.capacitance_f, cap_role::supply_reservoir, "supply.capacitance");

  // Generator -> impedance -> input coupling capacitor -> gate.
  net.generator_node = new_node("generator");
  net.input_node = net.generator_node;
  if (s.signal_impedance_ohm > 0.0) {
    net.input_node = new_node("input");
    add_r(net.generator_node, net.input_node, s.signal_impedance_ohm, "signal.impedance");
  }
  q.gate = net.input_node;
  if (s.gate.coupling_cap_f > 0.0) {
    q.gate = new_node("gate");
    add_c(net.input_node, q.gate, s.gate.coupling_cap_f, cap_role::input_coupling, "gate.coupling_cap");
  }

  // Gate bias: gate resistor to the bias node; the bias node is ground or a divider.
  const bool has_divider = s.gate.bias_top_ohm > 0.0 || s.gate.bias_bottom_ohm > 0.0;
  int bias_node = 0;
  if (has_divider) bias_node = s.gate.resistor_ohm > 0.0 ? new_node("bias") : q.gate;
  if (s.gate.resistor_ohm > 0.0) add_r(q.gate, bias_node, s.gate.resistor_ohm, "gate.resistor");
  if (s.gate.bias_top_ohm > 0.0) add_r(rail, bias_node, s.gate.bias_top_ohm, "gate.bias_top");
  if (s.gate.bias_bottom_ohm > 0.0) add_r(bias_node, 0, s.gate.bias_bottom_ohm, "gate.bias_bottom");

  // Drain.
  q.drain = rail;
  if (s.drain_resistor_ohm > 0.0) {
    q.drain = new_node("drain");
    add_r(rail, q.drain, s.drain_resistor_ohm, "drain.resistor");
  }

  // Source: terminal -> unbypassed -> node -> (resistor || bypass) -> ground.
  q.source = new_node("source");
  int mid = q.source;
  if (s.source.unbypassed_ohm > 0.0) {
    mid = new_node("source_mid");
    add_r(q.source, mid, s.source.unbypassed_ohm, "source.unbypassed");
  }
  if (s.source.resistor_ohm > 0.0) {
    add_r(mid, 0, s.source.resistor_ohm, "source.resistor");
    add_c(mid, 0, s.source.bypass_cap_f, cap_role::source_bypass, "source.bypass_cap");
  } else if (mid != q.source) {
    // Only the unbypassed part: its far end is ground. Rewire the last resistor.
    net.resistors.back().b = 0;
    net.node_names.pop_back();
    --net.node_count;
  } else {
    // Source grounded: merge the source node with ground.
    net.node_names.pop_back();
    --net.node_count;
    q.source = 0;
  }

  add_c(q.gate, q.source, s.jfet.cgs_f, cap_role::junction_gs, "jfet.cgs");
  add_c(q.gate, q.drain, s.jfet.cgd_f, cap_role::junction_gd, "jfet.cgd");

  // Output across the load.
  net.output_tap = s.topo == topology::common_source ? q.drain : q.source;
  net.output_node = net.output_tap;
  net.has_load = s.output.load_ohm > 0.0;
  if (net.has_load) {
    if (s.output.coupling_cap_f > 0.0) {
      net.output_node = new_node("output");
      add_c(net.output_tap, net.output_node, s.output.coupling_cap_f, cap_role::output_coupling, "output.coupling_cap");
    }
    add_r(net.output_node, 0, s.output.load_ohm, "output.load");
  }
  return net;
}

std::string widest_parts(const network& net, double sample_rate_hz) {
  struct part {
    std::string_view key;
    double siemens;
    std::string value;
  };
  std::vector<part> parts;
  for (const net_resistor& r : net.resistors)
    if (r.ohm > 0) parts.push_back({r.key, 1.0 / r.ohm, base::format_si(r.ohm, "\xCE\xA9")});
  if (sample_rate_hz > 0)
    for (const net_capacitor& c : net.capacitors)
      if (c.farad > 0) parts.push_back({c.key, 2.0 * c.farad * sample_rate_hz, base::format_si(c.farad, "F")});
  if (parts.size() < 2) return {};
  auto [lo, hi] = std::minmax_element(parts.begin(), parts.end(), [](const part& a, const part& b) { return a.siemens < b.siemens; });
  return std::string(lo->key) + " (" + lo->value + ") against " + std::string(hi->key) + " (" + hi->value + ")";
}

std::string source_prefix(const network& net) { return net.source.empty() ? std::string() : net.source + ": "; }

}  // namespace pinchoff::model
