// The chain's discretised network cut at its joints (model/engine/dk_split.hpp) against the
// network solved whole (discretise). The split is block Gaussian elimination of the same
// linear system (the Schur complement onto the joints: Golub & Van Loan, Matrix
// Computations, 4th ed., section 3.2, from memory), so put back together it must give the
// same matrices to rounding.
#include <doctest/doctest.h>

#include <algorithm>
#include <cmath>
#include <string>
#include <vector>

#include "fixtures/multi_device_networks.hpp"
#include "model/circuit/stage_file.hpp"
#include "model/engine/dk_matrices.hpp"
#include "model/engine/dk_split.hpp"

namespace test_dk_split {

namespace {

using namespace pinchoff;

// Largest difference of two stacked updates (rows: states, ports, output; columns: states,
// sources, currents) as volts a row reads for states and sources of 10 V and currents of
// 10 mA, relative to what the row reads at those sizes: the rows mix volts per volt and
// ohms, so a plain relative difference would weigh a milliohm entry like a gain of one.
double worst_row_relative(const Eigen::MatrixXd& a, const Eigen::MatrixXd& b, int currents_from) {
  Eigen::VectorXd size = Eigen::VectorXd::Constant(a.cols(), 10.0);
  size.tail(a.cols() - currents_from).setConstant(0.01);
  double worst = 0.0;
  for (Eigen::Index r = 0; r < a.rows(); ++r) {
    const double scale = a.row(r).cwiseAbs().dot(size);
    if (scale == 0.0) continue;
    worst = std::max(worst, (a.row(r) - b.row(r)).cwiseAbs().dot(size) / scale);
  }
  return worst;
}

// Every matrix of the split put back together against discretise's; the worst row-relative
// difference.
double worst_against_whole(const model::network& net, double fs, const model::dk_split& sp) {
  const model::dk_matrices whole = model::discretise(net, fs);
  const model::dk_matrices back = sp.dense(fs);
  Eigen::MatrixXd w1(whole.states + 2 * whole.devices + 1, whole.states + 2 + 3 * whole.devices), w2(w1.rows(), w1.cols());
  w1 << whole.a, whole.b, whole.c, whole.d, whole.e, whole.f, whole.d_out, whole.e_out, whole.f_out;
  w2 << back.a, back.b, back.c, back.d, back.e, back.f, back.d_out, back.e_out, back.f_out;
  return worst_row_relative(w1, w2, whole.states + 2);
}

}  // namespace

TEST_CASE("dk_split: a chain cut at its joints gives back the matrices of the network solved whole") {
  for (int k = 2; k <= 6; ++k) {
    for (int variant = 0; variant < 4; ++variant) {
      test::cascade_options o;
      o.rail_filters = variant & 1;
      o.dc_follower = variant & 2;
      const model::network net = test::cascade(k, o);
      for (double fs : {48000.0, 384000.0}) {
        CAPTURE(k);
        CAPTURE(variant);
        CAPTURE(fs);
        const auto sp = model::split_at_joints(net, fs);
        REQUIRE(sp.has_value());
        CHECK(static_cast<int>(sp->blocks.size()) == k);
        // The joints: the supply's node and branch, the reservoir node behind the supply's
        // resistance (with rail filters), and one output a stage but the last. (The split
        // gives the whole network's matrices to a few units in the last place: 4.8e-15 at
        // worst when this was written.)
        CHECK(sp->joints == 2 + (o.rail_filters ? 1 : 0) + (k - 1));
        // Each stage reads only its own columns: the states it holds itself (a capacitor that
        // touches a stage's node is that stage's), the two sources, its own three currents.
        for (const model::dk_split::block& b : sp->blocks) {
          std::vector<int> state_cols;
          for (int c : b.columns) {
            if (c < sp->states) state_cols.push_back(c);
            else if (c >= sp->states + 2) CHECK((c - sp->states - 2) / 3 == b.device);
          }
          CHECK(state_cols == b.held);
        }
        CHECK(worst_against_whole(net, fs, *sp) <= 5e-14);
      }
    }
  }
}

TEST_CASE("dk_split: every chain preset splits, one block a stage, and gives back the whole network's matrices") {
  for (const char* file : {"two-stage-boost-9v.toml", "three-stage-overdrive-9v.toml", "buffered-boost-9v.toml"}) {
    CAPTURE(file);
    const model::stage st = model::read_stage_file(std::string(PINCHOFF_PRESETS_DIR) + "/" + file);
    const model::network net = model::build_network(st);
    const auto sp = model::split_at_joints(net, 384000.0);
    REQUIRE(sp.has_value());
    CHECK(static_cast<int>(sp->blocks.size()) == net.devices());
    CHECK(worst_against_whole(net, 384000.0, *sp) <= 5e-14);
  }
}

TEST_CASE("dk_split: the comparison sees a part in a billion in one joint's coupling") {
  // The check above can fail: one entry of one stage's coupling to the joints moved by
  // 1e-9 of itself shows far above its tolerance.
  test::cascade_options o;
  o.rail_filters = true;
  const model::network net = test::cascade(3, o);
  auto sp = model::split_at_joints(net, 384000.0);
  REQUIRE(sp.has_value());
  CHECK(worst_against_whole(net, 384000.0, *sp) <= 5e-14);
  Eigen::Index r = 0, c = 0;
  sp->blocks[1].ports_j.cwiseAbs().maxCoeff(&r, &c);
  sp->blocks[1].ports_j(r, c) *= 1.0 + 1e-9;
  CHECK(worst_against_whole(net, 384000.0, *sp) > 1e-11);
}

TEST_CASE("dk_split: a single stage is not split") {
  const model::stage st = model::read_stage_file(std::string(PINCHOFF_PRESETS_DIR) + "/bass-booster-9v.toml");
  CHECK_FALSE(model::split_at_joints(model::build_network(st), 384000.0).has_value());
}

}  // namespace test_dk_split
