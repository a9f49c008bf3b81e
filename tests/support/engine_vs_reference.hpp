#pragma once
// The DK engine and the nodal reference solver side by side on one sine, sample by sample:
// the comparison every multi-JFET engine test makes (chains, a pickup's coil).
#include <doctest/doctest.h>

#include <algorithm>
#include <cmath>
#include <numbers>
#include <vector>

#include "model/circuit/network.hpp"
#include "model/circuit/nodal.hpp"
#include "model/circuit/operating_point.hpp"
#include "model/engine/dk_engine.hpp"
#include "model/engine/transient_reference.hpp"

namespace pinchoff::test {

struct side_by_side {
  double worst_output_v{0}, worst_ports_v{0};
  double output_peak_v{0};           ///< the engine's output swing from its DC value
  int devices{0};
  std::vector<double> max_vgs_v;     ///< per JFET, network signs
  std::vector<double> min_vgst_v;    ///< per JFET, the lowest vgs - vp (below 0: cut off), network signs
  long long engine_failed{0}, reference_failed{0};
  int engine_max_evaluations{0};   ///< the most Newton evaluations the engine took in one sample
  /// JFETs whose gate-source junction went forward of `v` on some sample.
  int gate_conducting(double v = 0.4) const {
    return static_cast<int>(std::count_if(max_vgs_v.begin(), max_vgs_v.end(), [v](double x) { return x > v; }));
  }
};

// Both start from the DC point, polished to the reference's own step tolerance (1e-10 V +
// 1e-12 |v|; the DC solve stops at 1e-9 V + 1e-9 |v|): both take the states as they are
// given (the engine refines only its port voltages, detail::refine_dc_ports), so a coarser
// start would show as a difference of DC solves, not of the transient solvers compared here.
inline side_by_side engine_against_reference(const model::network& net, double amp, double f_hz, int samples,
                                             double fs_hz, const model::dk_options& opt = {}) {
  model::operating_point op = model::solve_operating_point(net);
  {
    const std::vector<model::cap_treatment> open = model::uniform_caps(net, model::cap_treatment::kind::open);
    const model::mna_system lin = model::assemble_linear(net, open, net.supply_v, 0.0);
    REQUIRE(model::solve_nodal(net, lin, op.x, model::transient_nodal_options()).converged);
  }
  model::dk_engine eng(net, op, fs_hz, opt);
  model::transient_reference ref(net, op, fs_hz);
  side_by_side c;
  c.devices = eng.devices();
  c.max_vgs_v.assign(static_cast<std::size_t>(c.devices), -1e9);
  c.min_vgst_v.assign(static_cast<std::size_t>(c.devices), 1e9);
  for (int n = 0; n < samples; ++n) {
    const double u = amp * std::sin(2.0 * std::numbers::pi * f_hz * n / fs_hz);
    const double y = eng.process(u);
    c.worst_output_v = std::max(c.worst_output_v, std::fabs(y - ref.process(u)));
    c.output_peak_v = std::max(c.output_peak_v, std::fabs(y - eng.dc_output_v()));
    for (int k = 0; k < c.devices; ++k) {
      c.worst_ports_v = std::max(c.worst_ports_v, (eng.ports_v(k) - ref.ports_v(k)).cwiseAbs().maxCoeff());
      const double vgs = eng.ports_network_v(k)[0];
      const std::size_t j = static_cast<std::size_t>(k);
      c.max_vgs_v[j] = std::max(c.max_vgs_v[j], vgs);
      c.min_vgst_v[j] = std::min(c.min_vgst_v[j], vgs - net.jfets[j].device.vp_v);
    }
  }
  c.engine_failed = eng.stats().failed;
  c.engine_max_evaluations = eng.stats().max_evaluations;
  c.reference_failed = ref.stats().failed;
  return c;
}

/// The invariant every such test holds: engine and reference agree to 1e-9 V on every
/// sample, at the output and at every JFET's ports, and neither fails a sample.
inline void check_within_1e9(const side_by_side& c) {
  CAPTURE(c.worst_output_v);
  CAPTURE(c.worst_ports_v);
  CHECK(c.worst_output_v <= 1e-9);
  CHECK(c.worst_ports_v <= 1e-9);
  CHECK(c.engine_failed == 0);
  CHECK(c.reference_failed == 0);
}

}  // namespace pinchoff::test
