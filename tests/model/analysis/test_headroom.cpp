// Quasi-static headroom against closed forms of the square law.
#include <cmath>

#include <doctest/doctest.h>

#include "model/analysis/headroom.hpp"
#include "model/circuit/network.hpp"
#include "model/circuit/operating_point.hpp"
#include "model/circuit/stage_file.hpp"
#include "support/stages.hpp"

namespace test_headroom {

using namespace pinchoff;
using namespace pinchoff::model;

namespace {
double par(double a, double b) { return a * b / (a + b); }
}  // namespace

TEST_CASE("bypassed common source: cutoff and triode limits follow the load line") {
  // Closed forms, square law with lambda = 0 and caps holding their rest voltages: the
  // source stays at VS, so vgs = VGS + v and the drain moves by -(id - ID) RL' with
  // RL' = RD || RL.
  //  up (cutoff, id -> 0): output = +ID RL'.
  //  down (triode edge vds = vgst): beta RL' g^2 + g - (VDS + ID RL') = 0 for g = vgst,
  //  output = -(beta g^2 - ID) RL'.
  const double idss = 4.5e-3, vp = -1.6, rd = 3.3e3, rl = 100e3;
  const std::string text = test::self_bias_text(
      9.0, idss, vp, 680.0, rd, "bypass_cap = \"47u\"\n[output]\ncoupling_cap = \"1u\"\nload = \"100k\"\n");
  const network net = build_network(test::stage_from(text));
  const operating_point op = solve_operating_point(net);
  const headroom_figures h = analyse_headroom(net, op);
  const double rlp = par(rd, rl), beta = idss / (vp * vp);
  const double id = op.at.id_a, vds = op.at.vds_v;
  CHECK(h.up.kind == swing_limit_kind::cutoff);
  CHECK(h.up.output_v == doctest::Approx(id * rlp).epsilon(1e-8));
  CHECK(h.up.drive_v == doctest::Approx(vp - op.at.vgs_v).epsilon(1e-8));
  const double g = (-1.0 + std::sqrt(1.0 + 4.0 * beta * rlp * (vds + id * rlp))) / (2.0 * beta * rlp);
  CHECK(h.down.kind == swing_limit_kind::triode);
  CHECK(h.down.output_v == doctest::Approx(-(beta * g * g - id) * rlp).epsilon(1e-8));
  CHECK(h.symmetric_output_vpk == doctest::Approx(std::min(std::fabs(h.up.output_v), std::fabs(h.down.output_v))).epsilon(1e-12));
}

TEST_CASE("source follower with an AC-coupled load cuts off on the negative swing") {
  // Closed form: the follower cannot sink more than its rest current, so the output
  // falls at most ID (RS || RL) before cutoff (common practice for coupled loads).
  const std::string text =
      "topology = \"source-follower\"\n[supply]\nvolts = 24\n[jfet]\nidss = \"4m\"\nvp = -1.5\nis = 0\n"
      "[gate]\ncoupling_cap = \"10n\"\nresistor = \"10M\"\n[source]\nresistor = \"2.7k\"\n"
      "[output]\ncoupling_cap = \"10u\"\nload = \"2k\"\n";
  const network net = build_network(test::stage_from(text));
  const operating_point op = solve_operating_point(net);
  const headroom_figures h = analyse_headroom(net, op);
  CHECK(h.down.kind == swing_limit_kind::cutoff);
  CHECK(h.down.output_v == doctest::Approx(-op.at.id_a * par(2.7e3, 2e3)).epsilon(1e-8));
  // Positive swing: vgs rises to 0 where id = IDSS: output = (IDSS - ID) (RS || RL).
  CHECK(h.up.kind == swing_limit_kind::gate_forward);
  CHECK(h.up.output_v == doctest::Approx((4e-3 - op.at.id_a) * par(2.7e3, 2e3)).epsilon(1e-8));
}

TEST_CASE("a p-channel stage swings as the mirror of its n-channel twin") {
  // Complementary-circuit symmetry (common practice).
  const std::string n_text = test::self_bias_text(9.0, 4.5e-3, -1.6, 680.0, 3.3e3, "bypass_cap = \"47u\"\n");
  std::string p_text = n_text;
  p_text.replace(p_text.find("volts = 9"), 9, "volts = -9");
  p_text.replace(p_text.find("vp = -1.6"), 9, "vp = 1.6\npolarity = \"p\"");
  const network nn = build_network(test::stage_from(n_text));
  const network pn = build_network(test::stage_from(p_text));
  const headroom_figures hn = analyse_headroom(nn, solve_operating_point(nn));
  const headroom_figures hp = analyse_headroom(pn, solve_operating_point(pn));
  CHECK(hp.up.output_v == doctest::Approx(-hn.down.output_v).epsilon(1e-9));
  CHECK(hp.down.output_v == doctest::Approx(-hn.up.output_v).epsilon(1e-9));
  CHECK(hp.up.kind == hn.down.kind);
}

TEST_CASE("a reservoir capacitor across an ideal supply does not upset the analyses") {
  // Regression (found by the random-stage test): with no supply resistance the reservoir
  // capacitor sat in parallel with the ideal supply source. It changes nothing there, so
  // results must equal those of the same stage without it.
  const std::string base = test::self_bias_text(5.8, 0.235e-3, -0.715, 62.4, 241.0, "[signal]\nimpedance = \"13k\"\n");
  std::string with_cap = base;
  with_cap.replace(with_cap.find("volts = 5.8"), 11, "volts = 5.8\ncapacitance = \"470u\"");
  const network a = build_network(test::stage_from(base));
  const network b = build_network(test::stage_from(with_cap));
  const headroom_figures ha = analyse_headroom(a, solve_operating_point(a));
  const headroom_figures hb = analyse_headroom(b, solve_operating_point(b));
  CHECK(hb.up.kind == ha.up.kind);
  CHECK(hb.down.kind == ha.down.kind);
  CHECK(hb.symmetric_output_vpk == doctest::Approx(ha.symmetric_output_vpk).epsilon(1e-12));
}

TEST_CASE("the swing alone is the same swing: only the clip order is left out") {
  // spread, tune and compare ask for the swing alone; it must be the figure bias reports.
  for (const char* name : {"three-stage-overdrive-9v.toml", "bass-booster-9v.toml"}) {
    CAPTURE(name);
    const network net = build_network(read_stage_file(std::string(PINCHOFF_PRESETS_DIR) + "/" + name));
    const operating_point op = solve_operating_point(net);
    const headroom_figures full = analyse_headroom(net, op);
    const headroom_figures swing = analyse_headroom(net, op, headroom_detail::swing_only);
    CHECK(swing.symmetric_output_vpk == full.symmetric_output_vpk);
    CHECK(swing.clean_drive_vpk == full.clean_drive_vpk);
    CHECK(swing.up.output_v == full.up.output_v);
    CHECK(swing.down.drive_v == full.down.drive_v);
    CHECK(full.clip_order.size() == net.jfets.size());
    CHECK(swing.clip_order.empty());
  }
}

}  // namespace test_headroom
