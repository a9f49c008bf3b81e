#pragma once
// Random valid stages over the practical ranges, for property tests and the soak run.
// Reproducible: the same seed gives the same stages on every platform (the draws use the
// raw 64-bit output of std::mt19937_64, whose sequence the C++ standard fixes, never the
// implementation-defined std distributions).
#include <cmath>
#include <cstdint>
#include <random>
#include <string>
#include <vector>

#include "model/circuit/network.hpp"
#include "model/circuit/stage.hpp"

namespace pinchoff::test {

class stage_sampler {
 public:
  explicit stage_sampler(std::uint64_t seed) : rng_(seed) {}

  double uniform(double lo, double hi) { return lo + (hi - lo) * unit(); }
  double log_uniform(double lo, double hi) { return lo * std::pow(hi / lo, unit()); }
  bool coin(double p = 0.5) { return unit() < p; }

  /// Supply 3-60 V, resistors 10 Ω-10 MΩ, IDSS 0.1-30 mA, VP -0.2 to -8 V, lambda 0-0.05,
  /// both polarities, both topologies, self or divider bias, AC- or DC-coupled input,
  /// optional supply resistance, unbypassed part, bypass, reservoir and junction capacitors.
  model::stage draw() {
    model::stage s;
    s.name = "random";
    s.topo = coin() ? model::topology::common_source : model::topology::source_follower;
    s.pol = coin() ? model::polarity::n : model::polarity::p;
    const double sign = s.pol == model::polarity::p ? -1.0 : 1.0;
    s.supply.volts_v = sign * uniform(3.0, 60.0);
    if (coin()) s.supply.resistance_ohm = r();
    if (coin()) s.supply.capacitance_f = log_uniform(1e-6, 1e-3);
    s.jfet.idss_a = log_uniform(0.1e-3, 30e-3);
    s.jfet.vp_v = -sign * uniform(0.2, 8.0);
    s.jfet.lambda_per_v = uniform(0.0, 0.05);
    if (coin()) s.jfet.cgs_f = log_uniform(1e-12, 20e-12);
    if (coin()) s.jfet.cgd_f = log_uniform(0.5e-12, 10e-12);
    if (coin()) s.signal_impedance_ohm = r();
    const bool ac_in = coin(0.8);
    if (ac_in) s.gate.coupling_cap_f = log_uniform(1e-9, 10e-6);
    const bool divider = coin(0.3);
    if (divider) {
      s.gate.bias_top_ohm = r();
      s.gate.bias_bottom_ohm = r();
      if (coin()) s.gate.resistor_ohm = r();
    } else if (ac_in || coin()) {
      s.gate.resistor_ohm = r();
    }
    if (s.topo == model::topology::common_source) s.drain_resistor_ohm = r();
    else if (coin(0.3)) s.drain_resistor_ohm = r();
    if (coin(0.3)) s.source.unbypassed_ohm = r();
    if (s.topo == model::topology::source_follower || coin(0.85)) {
      s.source.resistor_ohm = r();
      if (coin()) s.source.bypass_cap_f = log_uniform(1e-6, 1e-3);
    }
    if (coin(0.8)) {
      s.output.load_ohm = r();
      if (coin()) s.output.coupling_cap_f = log_uniform(0.1e-6, 47e-6);
    }
    return s;
  }

  /// A chain of 2 to 4 stages of one polarity on a 6-30 V supply: each stage common source
  /// or follower with self or divider bias; between stages AC coupling (an output or gate
  /// capacitor) or DC coupling (output straight to the next gate), a `between` network of up
  /// to three elements (series, series_cap, shunt, shunt_cap, pot of either taper), a rail
  /// filter on some stages, a drain shunt cap on some. Resistors 100 Ω to 1 MΩ. Chains whose
  /// network leaves a node without a DC path (which the file reader refuses) are drawn again.
  model::stage draw_chain() {
    for (;;) {
      model::stage s = chain_candidate();
      model::validate(s);
      if (dc_path_everywhere(model::build_network(s))) return s;
    }
  }

 private:
  model::stage chain_candidate() {
    model::stage s;
    s.name = "random chain";
    const model::polarity pol = coin() ? model::polarity::n : model::polarity::p;
    const double sign = pol == model::polarity::p ? -1.0 : 1.0;
    s.supply.volts_v = sign * uniform(6.0, 30.0);
    if (coin()) {
      s.supply.resistance_ohm = log_uniform(1.0, 1e3);
      if (coin()) s.supply.capacitance_f = log_uniform(1e-6, 1e-3);
    }
    if (coin()) s.signal_impedance_ohm = log_uniform(100.0, 1e5);
    const int count = 2 + static_cast<int>(unit() * 3.0);  // 2, 3 or 4
    bool prev_output_cap = false;
    for (int k = 0; k < count; ++k) {
      model::stage_parts p;
      p.pol = pol;
      p.topo = coin(0.7) ? model::topology::common_source : model::topology::source_follower;
      p.jfet.idss_a = log_uniform(0.5e-3, 20e-3);
      p.jfet.vp_v = -sign * uniform(0.4, 5.0);
      p.jfet.lambda_per_v = uniform(0.0, 0.03);
      if (coin()) p.jfet.cgs_f = log_uniform(1e-12, 10e-12);
      if (coin()) p.jfet.cgd_f = log_uniform(0.5e-12, 5e-12);
      // DC coupling from the previous stage: its output uncapped, this gate straight on.
      const bool dc_in = k > 0 && !prev_output_cap && coin(0.4);
      if (!dc_in && (k == 0 || coin(0.8))) p.gate.coupling_cap_f = log_uniform(10e-9, 1e-6);
      if (!dc_in) {
        if (coin(0.25)) {
          p.gate.bias_top_ohm = rc();
          p.gate.bias_bottom_ohm = rc();
          if (coin()) p.gate.resistor_ohm = rc();
        } else if (p.gate.coupling_cap_f > 0 || coin()) {
          p.gate.resistor_ohm = log_uniform(100e3, 10e6);
        }
      }
      if (k > 0) {
        const int elements = static_cast<int>(unit() * 4.0);  // 0 to 3
        for (int e = 0; e < elements; ++e) {
          model::between_part b;
          const double pick = unit();
          if (pick < 0.25) b = {model::between_kind::series, rc()};
          else if (pick < 0.4) b = {model::between_kind::series_cap, log_uniform(10e-9, 1e-6)};
          else if (pick < 0.6) b = {model::between_kind::shunt, rc()};
          else if (pick < 0.75) b = {model::between_kind::shunt_cap, log_uniform(100e-12, 10e-9)};
          else b = {model::between_kind::pot, log_uniform(10e3, 500e3), uniform(0.05, 1.0),
                    coin() ? model::pot_taper::log : model::pot_taper::linear};
          p.between.push_back(b);
        }
      }
      if (k > 0 && coin(0.4)) {
        p.rail.resistance_ohm = log_uniform(10.0, 2e3);
        if (coin(0.8)) p.rail.capacitance_f = log_uniform(10e-6, 220e-6);
      }
      if (p.topo == model::topology::common_source) {
        p.drain_resistor_ohm = log_uniform(1e3, 47e3);
        if (coin(0.3)) p.drain_shunt_cap_f = log_uniform(100e-12, 10e-9);
      } else if (coin(0.2)) {
        p.drain_resistor_ohm = log_uniform(100.0, 4.7e3);
      }
      if (coin(0.3)) p.source.unbypassed_ohm = log_uniform(100.0, 4.7e3);
      if (p.topo == model::topology::source_follower || coin(0.8)) {
        p.source.resistor_ohm = p.topo == model::topology::source_follower ? log_uniform(1e3, 100e3) : log_uniform(100.0, 10e3);
        if (p.topo == model::topology::common_source && coin()) p.source.bypass_cap_f = log_uniform(10e-6, 220e-6);
      }
      prev_output_cap = coin(0.6);
      if (prev_output_cap) p.output.coupling_cap_f = log_uniform(100e-9, 10e-6);
      if (k == 0) static_cast<model::stage_parts&>(s) = p;
      else s.later.push_back(p);
    }
    model::stage_parts& last = s.last();
    if (coin(0.8)) last.output.load_ohm = log_uniform(10e3, 1e6);
    else last.output.coupling_cap_f = 0.0;
    return s;
  }

  // Every node reaches ground, the supply or the generator through resistors and channels.
  static bool dc_path_everywhere(const model::network& net) {
    std::vector<int> parent(static_cast<std::size_t>(net.node_count));
    for (int n = 0; n < net.node_count; ++n) parent[static_cast<std::size_t>(n)] = n;
    auto find = [&](int n) {
      while (parent[static_cast<std::size_t>(n)] != n) n = parent[static_cast<std::size_t>(n)];
      return n;
    };
    auto join = [&](int a, int b) { parent[static_cast<std::size_t>(find(a))] = find(b); };
    join(net.supply_node, 0);
    join(net.generator_node, 0);
    for (const auto& r : net.resistors) join(r.a, r.b);
    for (const auto& q : net.jfets) join(q.drain, q.source);
    for (int n = 1; n < net.node_count; ++n)
      if (find(n) != find(0)) return false;
    return true;
  }

  double rc() { return log_uniform(100.0, 1e6); }
  double unit() { return static_cast<double>(rng_() >> 11) * 0x1.0p-53; }
  double r() { return log_uniform(10.0, 10e6); }
  std::mt19937_64 rng_;
};

}  // namespace pinchoff::test
