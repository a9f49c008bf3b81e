#include "model/circuit/network.hpp"

#include <algorithm>
#include <cmath>
#include <string>
#include <vector>

#include "base/units.hpp"

namespace pinchoff::model {

bool is_large_cap(cap_role r) noexcept {
  return r != cap_role::junction_gs && r != cap_role::junction_gd && r != cap_role::treble_cut && r != cap_role::capsule &&
         r != cap_role::capsule_stray && r != cap_role::pickup_load;
}
bool is_reservoir(cap_role r) noexcept { return r == cap_role::supply_reservoir || r == cap_role::rail_reservoir; }

network build_network(const stage& s) {
  network net;
  net.sign = polarity_sign(s);
  net.node_names.push_back("ground");
  std::string prefix;  // "stage2." in a chain, nothing for a single stage
  auto new_node = [&](const std::string& name) {
    net.node_names.push_back(prefix + name);
    return net.node_count++;
  };
  auto add_r = [&](int a, int b, double ohm, const std::string& key) { net.resistors.push_back({a, b, ohm, prefix + key}); };
  auto add_c = [&](int a, int b, double f, cap_role role, const std::string& key) {
    if (f > 0.0) net.capacitors.push_back({a, b, f, role, prefix + key});
  };

  net.vt_v = thermal_voltage(s.temperature_k);
  net.source = s.file;
  net.supply_v = net.sign * s.supply.volts_v;

  // Supply: ideal source -> series resistance -> rail (with reservoir capacitor).
  net.supply_node = new_node("supply");
  int shared_rail = net.supply_node;
  if (s.supply.resistance_ohm > 0.0) {
    shared_rail = new_node("rail");
    add_r(net.supply_node, shared_rail, s.supply.resistance_ohm, "supply.resistance");
  }
  // Across an ideal source a reservoir capacitor changes nothing (and would put two
  // voltage sources in parallel in the held and shorted analyses): only with a series
  // resistance does it filter.
  if (shared_rail != net.supply_node)
    add_c(shared_rail, 0, s.supply.capacitance_f, cap_role::supply_reservoir, "supply.capacitance");

  // Generator -> impedance (or a capsule) -> the first stage.
  net.generator_node = new_node("generator");
  net.input_node = net.generator_node;
  if (s.has_capsule()) {
    // The capsule: its open-circuit voltage (the generator) behind its capacitance, to the
    // gate; the stray capacitance from there to ground.
    net.input_node = new_node("input");
    add_c(net.generator_node, net.input_node, s.capsule.capacitance_f, cap_role::capsule, "signal.capacitance");
    add_c(net.input_node, 0, s.capsule.stray_f, cap_role::capsule_stray, "signal.stray");
    net.midband_hz = capsule_midband_hz;
  } else if (s.has_pickup()) {
    // The pickup: the coil's open-circuit voltage (the generator) behind its winding
    // resistance and inductance in series; its own and the cable's capacitance from its
    // output to ground. The first stage's input is the pickup's output.
    const int coil = new_node("coil");
    add_r(net.generator_node, coil, s.pickup.resistance_ohm, "signal.resistance");
    net.input_node = new_node("input");
    net.inductors.push_back({coil, net.input_node, s.pickup.inductance_h, ind_role::pickup_coil, "signal.inductance"});
    add_c(net.input_node, 0, s.pickup.total_capacitance_f(), cap_role::pickup_load, "signal.capacitance");
  } else if (s.signal_impedance_ohm > 0.0) {
    net.input_node = new_node("input");
    add_r(net.generator_node, net.input_node, s.signal_impedance_ohm, "signal.impedance");
  }

  int signal = net.input_node;  // where the next stage's signal comes from
  for (int k = 0; k < s.stage_count(); ++k) {
    const stage_parts& p = s.part(k);
    prefix = s.is_chain() ? "stage" + std::to_string(k + 1) + "." : std::string();
    net_stage& ns = net.stages.emplace_back();
    ns.jfet = k;
    ns.label = !p.label.empty() ? p.label : "stage " + std::to_string(k + 1);

    // The stage's own rail filter.
    int rail = shared_rail;
    if (p.rail.resistance_ohm > 0.0) {
      rail = new_node("rail");
      add_r(shared_rail, rail, p.rail.resistance_ohm, "rail.resistance");
      add_c(rail, 0, p.rail.capacitance_f, cap_role::rail_reservoir, "rail.capacitance");
    }
    ns.rail = rail;

    // The network between the previous stage and this one, in signal order.
    for (std::size_t e = 0; e < p.between.size(); ++e) {
      const between_part& b = p.between[e];
      const std::string at = "between[" + std::to_string(e + 1) + "].";
      switch (b.kind) {
        case between_kind::series: {
          const int n = new_node(at + "out");
          add_r(signal, n, b.value, at + "series");
          signal = n;
          break;
        }
        case between_kind::series_cap: {
          const int n = new_node(at + "out");
          add_c(signal, n, b.value, cap_role::interstage_coupling, at + "series_cap");
          signal = n;
          break;
        }
        case between_kind::shunt: add_r(signal, 0, b.value, at + "shunt"); break;
        case between_kind::shunt_cap: add_c(signal, 0, b.value, cap_role::treble_cut, at + "shunt_cap"); break;
        case between_kind::pot: {
          // Wiper to ground x R, the rest from the signal to the wiper; at either end of its
          // travel the wiper is the signal node (fully up) or ground (fully down).
          const double x = pot_fraction(b.taper, b.position);
          const double bottom = x * b.value, top = b.value - bottom;
          if (top <= 0.0) {
            add_r(signal, 0, b.value, at + "pot");
          } else if (bottom <= 0.0) {
            add_r(signal, 0, b.value, at + "pot");
            signal = 0;
          } else {
            const int w = new_node(at + "wiper");
            add_r(signal, w, top, at + "pot.top");
            add_r(w, 0, bottom, at + "pot.bottom");
            signal = w;
          }
          break;
        }
      }
    }
    ns.input = signal;

    net_jfet& q = net.jfets.emplace_back();
    q.device = p.jfet;
    q.device.vp_v = net.sign * p.jfet.vp_v;
    q.gate = signal;
    if (p.gate.coupling_cap_f > 0.0) {
      q.gate = new_node("gate");
      add_c(signal, q.gate, p.gate.coupling_cap_f, k == 0 ? cap_role::input_coupling : cap_role::interstage_coupling,
            "gate.coupling_cap");
    }

    // Gate bias: gate resistor to the bias node; the bias node is ground or a divider.
    const bool has_divider = p.gate.bias_top_ohm > 0.0 || p.gate.bias_bottom_ohm > 0.0;
    int bias_node = 0;
    if (has_divider) bias_node = p.gate.resistor_ohm > 0.0 ? new_node("bias") : q.gate;
    if (p.gate.resistor_ohm > 0.0) add_r(q.gate, bias_node, p.gate.resistor_ohm, "gate.resistor");
    if (p.gate.bias_top_ohm > 0.0) add_r(rail, bias_node, p.gate.bias_top_ohm, "gate.bias_top");
    if (p.gate.bias_bottom_ohm > 0.0) add_r(bias_node, 0, p.gate.bias_bottom_ohm, "gate.bias_bottom");

    // Drain.
    q.drain = rail;
    if (p.drain_resistor_ohm > 0.0) {
      q.drain = new_node("drain");
      add_r(rail, q.drain, p.drain_resistor_ohm, "drain.resistor");
      add_c(rail, q.drain, p.drain_shunt_cap_f, cap_role::treble_cut, "drain.shunt_cap");
    }

    // Source: terminal -> unbypassed -> node -> (resistor || bypass) -> ground.
    q.source = new_node("source");
    int mid = q.source;
    if (p.source.unbypassed_ohm > 0.0) {
      mid = new_node("source_mid");
      add_r(q.source, mid, p.source.unbypassed_ohm, "source.unbypassed");
    }
    if (p.source.resistor_ohm > 0.0) {
      add_r(mid, 0, p.source.resistor_ohm, "source.resistor");
      add_c(mid, 0, p.source.bypass_cap_f, cap_role::source_bypass, "source.bypass_cap");
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

    // A bootstrap drives the gate resistor's foot from the source (validate() holds it to a
    // follower whose gate resistor has a foot of its own); a feedback resistor runs from the
    // drain back to the gate.
    if (p.gate.bootstrap_cap_f > 0.0 && bias_node != 0 && bias_node != q.gate)
      add_c(q.source, bias_node, p.gate.bootstrap_cap_f, cap_role::bootstrap, "gate.bootstrap");
    if (p.gate.feedback_ohm > 0.0) add_r(q.drain, q.gate, p.gate.feedback_ohm, "gate.feedback");

    add_c(q.gate, q.source, p.jfet.cgs_f, cap_role::junction_gs, "jfet.cgs");
    add_c(q.gate, q.drain, p.jfet.cgd_f, cap_role::junction_gd, "jfet.cgd");

    // Output: after its coupling capacitor (a single stage or the last of a chain only has
    // one when it has a load).
    ns.output_tap = p.topo == topology::common_source ? q.drain : q.source;
    ns.output = ns.output_tap;
    const bool last = k + 1 == s.stage_count();
    if (p.output.coupling_cap_f > 0.0 && (!last || p.output.load_ohm > 0.0)) {
      ns.output = new_node("output");
      add_c(ns.output_tap, ns.output, p.output.coupling_cap_f, last ? cap_role::output_coupling : cap_role::interstage_coupling,
            "output.coupling_cap");
    }
    signal = ns.output;
  }

  // The load across the last stage's output.
  prefix.clear();
  net.output_tap = net.stages.back().output_tap;
  net.output_node = net.stages.back().output;
  net.has_load = s.last().output.load_ohm > 0.0;
  if (net.has_load) add_r(net.output_node, 0, s.last().output.load_ohm, "output.load");
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
  if (sample_rate_hz > 0)
    for (const net_inductor& l : net.inductors)
      if (l.henry > 0) parts.push_back({l.key, 1.0 / (2.0 * l.henry * sample_rate_hz), base::format_si(l.henry, "H")});
  if (parts.size() < 2) return {};
  auto [lo, hi] = std::minmax_element(parts.begin(), parts.end(), [](const part& a, const part& b) { return a.siemens < b.siemens; });
  return std::string(lo->key) + " (" + lo->value + ") against " + std::string(hi->key) + " (" + hi->value + ")";
}

std::string source_prefix(const network& net) { return net.source.empty() ? std::string() : net.source + ": "; }

}  // namespace pinchoff::model
