// Node probes beside the DK engine (model/engine/dk_probes.hpp): every node of a chain,
// driven into clipping, against the reference solver's full network solution (the plain
// nodal Newton of every sample, model/engine/transient_reference.hpp), and the probe of the
// load node against the engine's own output.
#include <doctest/doctest.h>

#include <cmath>
#include <numbers>
#include <string>
#include <vector>

#include "base/error.hpp"
#include "model/circuit/network.hpp"
#include "model/circuit/nodal.hpp"
#include "model/circuit/operating_point.hpp"
#include "model/circuit/stage_file.hpp"
#include "model/engine/dk_engine.hpp"
#include "model/engine/dk_probes.hpp"
#include "model/engine/steady_state.hpp"
#include "model/engine/transient_reference.hpp"

namespace test_dk_probes {

namespace {

using namespace pinchoff;
using namespace pinchoff::model;

constexpr double fs_hz = 384000.0;  // 8 x 48 kHz

stage preset(const std::string& name) { return read_stage_file(std::string(PINCHOFF_PRESETS_DIR) + "/" + name); }

// The same chain with every part mirrored: p-channel JFETs on a negative supply.
stage mirrored(stage s) {
  s.supply.volts_v = -s.supply.volts_v;
  for (int k = 0; k < s.stage_count(); ++k) {
    s.part(k).pol = polarity::p;
    s.part(k).jfet.vp_v = -s.part(k).jfet.vp_v;
  }
  return s;
}

std::vector<int> every_node(const network& net) {
  std::vector<int> nodes;
  for (int k = 1; k < net.node_count; ++k) nodes.push_back(k);
  return nodes;
}

struct run_error {
  double vs_reference_v{0};   // largest |probe - reference| over every node and sample
  double load_vs_engine_v{0};  // largest |probe of the load - engine output|
  double trace_vs_step_v{0};  // largest |traced - probed from engine.state()|
  double swing_v{0};          // largest |node voltage - its rest value|, to show the drive is hard
};

// `samples` of a hard 1 kHz sine through the engine, the reference and the probes.
run_error compare_run(const stage& st, double drive_vpk, int samples) {
  const network net = build_network(st);
  const operating_point op = solve_operating_point(net);
  dk_engine eng(net, op, fs_hz);
  transient_reference ref(net, op, fs_hz);
  const std::vector<int> nodes = every_node(net);
  const dk_probes probes(net, nodes, fs_hz);
  REQUIRE(probes.size() == static_cast<int>(nodes.size()));
  int load = -1;
  for (std::size_t p = 0; p < nodes.size(); ++p)
    if (nodes[p] == net.output_node) load = static_cast<int>(p);
  REQUIRE(load >= 0);

  const Eigen::VectorXd x0 = eng.state();
  std::vector<double> drive, ports, stepped;
  std::vector<double> v(nodes.size()), port(2 * static_cast<std::size_t>(eng.devices()));
  run_error e;
  for (int n = 0; n < samples; ++n) {
    const double u = drive_vpk * std::sin(2.0 * std::numbers::pi * 1000.0 * n / fs_hz);
    const Eigen::VectorXd x_prev = eng.state();
    const double y = eng.process(u);
    ref.process(u);
    for (int j = 0; j < eng.devices(); ++j) {
      const Eigen::Vector2d pv = eng.ports_network_v(j);
      port[2 * static_cast<std::size_t>(j)] = pv[0];
      port[2 * static_cast<std::size_t>(j) + 1] = pv[1];
    }
    probes.evaluate(x_prev, u, port, v);
    for (std::size_t p = 0; p < nodes.size(); ++p) {
      const double want = net.sign * node_v(ref.solution(), nodes[p]);
      e.vs_reference_v = std::max(e.vs_reference_v, std::fabs(v[p] - want));
      e.swing_v = std::max(e.swing_v, std::fabs(want - net.sign * node_v(op.x, nodes[p])));
    }
    e.load_vs_engine_v = std::max(e.load_vs_engine_v, std::fabs(v[static_cast<std::size_t>(load)] - y));
    drive.push_back(u);
    ports.insert(ports.end(), port.begin(), port.end());
    stepped.insert(stepped.end(), v.begin(), v.end());
  }
  const std::vector<double> traced = probes.trace(x0, drive, ports);
  REQUIRE(traced.size() == stepped.size());
  for (std::size_t k = 0; k < traced.size(); ++k) e.trace_vs_step_v = std::max(e.trace_vs_step_v, std::fabs(traced[k] - stepped[k]));
  return e;
}

}  // namespace

TEST_CASE("probes give every node of a chain driven into clipping, as the reference solver does") {
  // Oracle: the reference solver's nodal solution of every sample (the same device model and
  // trapezoidal rule, solved whole by Newton), held to 1e-9 V as the engine itself is held.
  // 3 V peak drives the two-stage boost far past its clean headroom (bias reports a few
  // hundred millivolts), into gate conduction and cutoff; 4000 samples are 10 cycles at 1 kHz.
  struct row {
    const char* what;
    stage st;
  };
  const std::vector<row> rows{{"two-stage boost, n-channel", preset("two-stage-boost-9v.toml")},
                              {"two-stage boost mirrored, p-channel", mirrored(preset("two-stage-boost-9v.toml"))},
                              {"three-stage overdrive, rail filters and treble cuts", preset("three-stage-overdrive-9v.toml")},
                              {"gain stage DC-coupled into a follower", preset("buffered-boost-9v.toml")},
                              {"single stage", preset("bass-booster-9v.toml")}};
  for (const row& r : rows) {
    CAPTURE(r.what);
    const run_error e = compare_run(r.st, 3.0, 4000);
    CHECK(e.swing_v > 1.0);
    CHECK(e.vs_reference_v <= 1e-9);
    // The load's probe is the engine's output row with the device currents recomputed from
    // the converged ports, where the engine uses its accepted linearisation: they differ by
    // what the engine's acceptance lets through, and the engine is held to 1e-9 V (measured
    // here: about 1e-10 V).
    CHECK(e.load_vs_engine_v <= 1e-9);
    // Carrying the state by the engine's update instead of reading it: the same bound.
    CHECK(e.trace_vs_step_v <= 1e-9);
  }
}

TEST_CASE("probes follow the recorded steady-state period of a chain") {
  // The recorded ports and start state of the returned period, traced, give the load
  // voltage the steady state returned (its own output), sample for sample.
  const stage st = preset("two-stage-boost-9v.toml");
  const network net = build_network(st);
  dk_engine eng(net, fs_hz);
  steady_state_options so;
  so.cycles = 3;
  so.record_ports = true;
  const int m = 1153;
  const steady_state_result ss = periodic_steady_state(eng, 2.0, m, so);
  REQUIRE(ss.converged);
  REQUIRE(ss.ports_network_v.size() == 2u * static_cast<std::size_t>(net.devices()) * m);
  std::vector<double> drive(static_cast<std::size_t>(m));
  for (int n = 0; n < m; ++n) drive[static_cast<std::size_t>(n)] = 2.0 * std::sin(2.0 * std::numbers::pi * 3.0 * n / m);
  const dk_probes probes(net, {net.output_node}, fs_hz);
  const std::vector<double> v = probes.trace(ss.start_state, drive, ss.ports_network_v);
  double worst = 0.0;
  for (int n = 0; n < m; ++n) worst = std::max(worst, std::fabs(v[static_cast<std::size_t>(n)] - ss.output_v[static_cast<std::size_t>(n)]));
  CHECK(worst <= 1e-9);  // as the load's probe against the engine above
  // Not recorded unless asked.
  so.record_ports = false;
  const steady_state_result plain = periodic_steady_state(eng, 2.0, m, so);
  CHECK(plain.ports_network_v.empty());
  CHECK(plain.output_v == ss.output_v);
}

TEST_CASE("a probe of a node outside the network is refused") {
  const network net = build_network(preset("bass-booster-9v.toml"));
  CHECK_THROWS_AS(dk_probes(net, {0}, fs_hz), internal_error);
  CHECK_THROWS_AS(dk_probes(net, {net.node_count}, fs_hz), internal_error);
}

}  // namespace test_dk_probes
