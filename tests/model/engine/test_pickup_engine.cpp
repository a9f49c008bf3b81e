// The DK engine with a pickup's coil (an inductor's trapezoidal companion and state) against
// the nodal reference solver, sample by sample, on a single stage and on a chain.
#include <doctest/doctest.h>

#include <algorithm>
#include <cmath>
#include <fstream>
#include <numbers>
#include <sstream>
#include <string>
#include <vector>

#include "model/circuit/nodal.hpp"
#include "model/circuit/stage_file.hpp"
#include "model/engine/dk_engine.hpp"
#include "model/engine/dk_matrices.hpp"
#include "model/engine/transient_reference.hpp"
#include "support/engine_vs_reference.hpp"
#include "support/files.hpp"

namespace test_pickup_engine {

namespace {

using namespace pinchoff;

constexpr double fs_hz = 384000.0;  // 8 x 48 kHz

std::string preset_text(const char* file) { return testing::slurp(std::string(PINCHOFF_PRESETS_DIR) + "/" + file); }

}  // namespace

TEST_CASE("a pickup's coil in the DK engine: the reference's samples to 1e-9 V, single stage and chain") {
  // Both solvers discretise the same circuit with the same trapezoidal rule (the inductor's
  // companion T/(2L), Nagel 1975), so they agree to the 1e-9 V. The single stage is
  // presets/pickup-buffer-9v.toml; the chain is presets/buffered-boost-9v.toml driven by the
  // same pickup, DC-coupled to its gate (no coupling capacitor: the coil lies in the gate's
  // DC path). Drives: clean, and hard enough to clip, at 1 kHz and at 3 kHz, on
  // the resonance's rising flank (the single stage's lies at 4.9 kHz).
  const std::string pickup = "[signal]\nkind = \"pickup\"\nresistance = \"6k\"\ninductance = 2.5\ncapacitance = \"120p\"\ncable = 3\n";
  std::string chain = preset_text("buffered-boost-9v.toml");
  const std::string resistive = "[signal]\nimpedance = \"10k\"\n";
  REQUIRE(chain.find(resistive) != std::string::npos);
  chain.replace(chain.find(resistive), resistive.size(), pickup);
  const std::string coupled = "coupling_cap = \"47n\"\n";
  REQUIRE(chain.find(coupled) != std::string::npos);
  chain.replace(chain.find(coupled), coupled.size(), "");
  struct row {
    const char* name;
    std::string text;
  };
  const row rows[]{{"single stage", preset_text("pickup-buffer-9v.toml")}, {"chain, DC-coupled pickup", chain}};
  for (const row& r : rows) {
    const model::network net = model::build_network(model::parse_stage(r.text, "test.toml"));
    REQUIRE(net.inductors.size() == 1);
    for (const double f : {1000.0, 3000.0}) {
      for (const double amp : {0.1, 6.0}) {
        CAPTURE(r.name);
        CAPTURE(f);
        CAPTURE(amp);
        const test::side_by_side c = test::engine_against_reference(net, amp, f, 1536, fs_hz);
        test::check_within_1e9(c);
        CHECK(c.output_peak_v > 1e-3);  // the signal got through the coil
      }
    }
  }
}

TEST_CASE("a pickup's coil holds its DC current as the engine's state: silence stays at the DC point") {
  // Trapezoidal companions keep a DC solution (common practice): with the coil carrying the
  // gate divider's current, the engine's output in silence stays at its DC value.
  std::string text = preset_text("pickup-buffer-9v.toml");
  const std::string coupled = "coupling_cap = \"22n\"\n";
  REQUIRE(text.find(coupled) != std::string::npos);
  text.replace(text.find(coupled), coupled.size(), "");
  const model::network net = model::build_network(model::parse_stage(text, "test.toml"));
  const model::operating_point op = model::solve_operating_point(net);
  const double i_coil = op.x[model::inductor_current_unknown(net, 0)];
  CHECK(std::fabs(i_coil) > 1e-7);  // the divider's microamperes flow through the coil
  model::dk_engine eng(net, op, fs_hz);
  double worst = 0.0;
  for (int n = 0; n < 2000; ++n) worst = std::max(worst, std::fabs(eng.process(0.0) - eng.dc_output_v()));
  CHECK(worst <= 1e-10);
  const Eigen::VectorXd q = model::dc_states(net, op.x);
  CHECK(q[q.size() - 1] == doctest::Approx(model::inductor_state_ohm(2.5) * i_coil).epsilon(1e-12));
}

}  // namespace test_pickup_engine
