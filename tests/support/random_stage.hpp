#pragma once
// Random valid stages over the practical ranges, for property tests and the soak run.
// Reproducible: the same seed gives the same stages on every platform (the draws use the
// raw 64-bit output of std::mt19937_64, whose sequence the C++ standard fixes, never the
// implementation-defined std distributions).
#include <cmath>
#include <cstdint>
#include <random>
#include <string>

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

 private:
  double unit() { return static_cast<double>(rng_() >> 11) * 0x1.0p-53; }
  double r() { return log_uniform(10.0, 10e6); }
  std::mt19937_64 rng_;
};

}  // namespace pinchoff::test
