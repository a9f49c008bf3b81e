#pragma once
// Networks of more than one JFET, built in code for the tests of the solvers' multi-device
// paths. Scenario values of our own (demo values, not measured parts or published circuits).
#include <string>
#include <string_view>
#include <vector>

#include "engine_stages.hpp"
#include "model/network.hpp"

namespace pinchoff::test {

/// The engine tests' 9 V booster (engine_stages.hpp) on a stiff supply: no series
/// resistance, so the supply node is the ideal source and two copies of the stage share
/// nothing but it, the generator and ground.
inline model::network stiff_booster() {
  const std::string overrides[] = {"supply.resistance=0"};
  return model::build_network(model::parse_stage(booster_9v, "booster 9 V, stiff supply", overrides));
}

/// Two copies of a one-JFET network side by side, sharing only ground, the supply node and
/// the generator node (the supply must have no series resistance for them to be
/// independent). The load voltage of copy `output_copy` (0 or 1) is the output.
inline model::network twin_of(const model::network& one, int output_copy) {
  model::network net = one;
  std::vector<int> map(static_cast<std::size_t>(one.node_count), 0);
  for (int n = 1; n < one.node_count; ++n) {
    if (n == one.supply_node || n == one.generator_node) {
      map[static_cast<std::size_t>(n)] = n;
    } else {
      map[static_cast<std::size_t>(n)] = net.node_count++;
      net.node_names.push_back(one.node_names[static_cast<std::size_t>(n)] + "#2");
    }
  }
  auto m = [&](int n) { return map[static_cast<std::size_t>(n)]; };
  for (const model::net_resistor& r : one.resistors) net.resistors.push_back({m(r.a), m(r.b), r.ohm, r.key});
  for (const model::net_capacitor& c : one.capacitors) net.capacitors.push_back({m(c.a), m(c.b), c.farad, c.role, c.key});
  for (const model::net_jfet& q : one.jfets) net.jfets.push_back({m(q.drain), m(q.gate), m(q.source), q.device});
  if (output_copy == 1) {
    net.input_node = m(one.input_node);
    net.output_tap = m(one.output_tap);
    net.output_node = m(one.output_node);
  }
  return net;
}

/// Values of the two-stage network below (network frame, n-channel).
struct two_stage_values {
  double supply_v = 12.0;
  double r_signal = 1e3, c_in = 1e-6, r_gate1 = 1e6;
  double r_drain1 = 3.3e3, r_source1 = 680.0, c_source1 = 100e-6;
  double c_couple = 1e-6, r_gate2 = 470e3;
  double r_drain2 = 2.2e3, r_source2 = 390.0, c_source2 = 100e-6;
  double c_out = 4.7e-6, r_load = 47e3;
  double cgs = 4e-12, cgd = 1.5e-12;
  model::jfet_params first{5e-3, -1.8, 0.01, 1e-14, 1.0, 0.0, 0.0};
  model::jfet_params second{8e-3, -2.4, 0.006, 1e-14, 1.0, 0.0, 0.0};
};

/// Two self-biased common-source stages in cascade on an ideal 12 V supply: generator ->
/// 1k -> 1u -> gate 1 (1M to ground); drain 1 (3.3k to the supply) -> 1u -> gate 2 (470k to
/// ground); drain 2 (2.2k) -> 4.7u -> 47k load. Each source has its resistor bypassed by
/// 100u; each JFET has constant junction capacitances.
inline model::network two_stage_network(const two_stage_values& v = {}) {
  model::network net;
  net.sign = 1.0;
  net.vt_v = model::thermal_voltage(model::default_temperature_k);
  net.node_names.push_back("ground");
  auto node = [&](const char* name) {
    net.node_names.emplace_back(name);
    return net.node_count++;
  };
  auto r = [&](int a, int b, double ohm) { net.resistors.push_back({a, b, ohm, "r"}); };
  auto c = [&](int a, int b, double f, model::cap_role role) { net.capacitors.push_back({a, b, f, role, "c"}); };
  net.supply_node = node("supply");
  net.supply_v = v.supply_v;
  net.generator_node = node("generator");
  net.input_node = node("input");
  const int g1 = node("gate1"), d1 = node("drain1"), s1 = node("source1");
  const int g2 = node("gate2"), d2 = node("drain2"), s2 = node("source2");
  net.output_node = node("output");
  net.output_tap = d2;
  net.has_load = true;
  r(net.generator_node, net.input_node, v.r_signal);
  c(net.input_node, g1, v.c_in, model::cap_role::input_coupling);
  r(g1, 0, v.r_gate1);
  r(net.supply_node, d1, v.r_drain1);
  r(s1, 0, v.r_source1);
  c(s1, 0, v.c_source1, model::cap_role::source_bypass);
  c(d1, g2, v.c_couple, model::cap_role::output_coupling);
  r(g2, 0, v.r_gate2);
  r(net.supply_node, d2, v.r_drain2);
  r(s2, 0, v.r_source2);
  c(s2, 0, v.c_source2, model::cap_role::source_bypass);
  c(d2, net.output_node, v.c_out, model::cap_role::output_coupling);
  r(net.output_node, 0, v.r_load);
  c(g1, s1, v.cgs, model::cap_role::junction_gs);
  c(g1, d1, v.cgd, model::cap_role::junction_gd);
  c(g2, s2, v.cgs, model::cap_role::junction_gs);
  c(g2, d2, v.cgd, model::cap_role::junction_gd);
  net.jfets.push_back({d1, g1, s1, v.first});
  net.jfets.push_back({d2, g2, s2, v.second});
  return net;
}

}  // namespace pinchoff::test
