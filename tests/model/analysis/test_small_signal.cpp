// Small-signal figures against closed forms of the gm model.
#include <cmath>
#include <complex>
#include <numbers>

#include <doctest/doctest.h>

#include "model/circuit/network.hpp"
#include "model/circuit/operating_point.hpp"
#include "model/analysis/small_signal.hpp"
#include "support/stages.hpp"

namespace test_small_signal {

using namespace pinchoff;
using namespace pinchoff::model;

namespace {
double par(double a, double b) { return a * b / (a + b); }
constexpr double two_pi = 2.0 * std::numbers::pi;

struct solved {
  stage s;
  network net;
  operating_point op;
  small_signal_figures ss;
};

solved solve(const std::string& text) {
  solved r;
  r.s = test::stage_from(text);
  r.net = build_network(r.s);
  r.op = solve_operating_point(r.net);
  r.ss = analyse_small_signal(r.net, r.op);
  return r;
}

// gm of the square law at an operating point: gm = gm0 (1 - VGS/VP), gm0 = 2 IDSS/|VP|
// (Boylestad & Nashelsky ch. 8, any edition), times (1 + lambda VDS) for the level-1 model.
double gm_closed(double idss, double vp, double vgs, double lambda = 0.0, double vds = 0.0) {
  return 2.0 * idss / std::fabs(vp) * (1.0 - vgs / vp) * (1.0 + lambda * vds);
}
}  // namespace

TEST_CASE("fully bypassed common source: gain = -gm (RD || rds || RL) times the input divider") {
  // Closed form of the gm model (common-source with bypassed source; Sedra & Smith,
  // Microelectronic Circuits, ch. on FET amplifiers; any edition).
  const std::string text = test::self_bias_text(
      12.0, 6e-3, -2.0, 820.0, 3.9e3,
      "bypass_cap = \"47u\"\n[signal]\nimpedance = \"10k\"\n[output]\ncoupling_cap = \"1u\"\nload = \"100k\"\n");
  std::string with_lambda = text;
  with_lambda.replace(with_lambda.find("is = 0"), 6, "is = 0\nlambda = 0.01");
  for (const std::string& t : {text, with_lambda}) {
    const solved r = solve(t);
    const double lambda = r.s.jfet.lambda_per_v;
    const double vgs = r.op.at.vgs_v, vds = r.op.at.vds_v;
    const double gm = gm_closed(6e-3, -2.0, vgs, lambda, vds);
    const double gds = lambda * 6e-3 * std::pow(1.0 - vgs / -2.0, 2);
    CAPTURE(lambda);
    CHECK(r.ss.gm_s == doctest::Approx(gm).epsilon(1e-9).scale(0));
    CHECK(r.ss.gds_s == doctest::Approx(gds).epsilon(1e-9).scale(1e-12));
    const double rload = lambda > 0 ? par(par(3.9e3, 1.0 / gds), 100e3) : par(3.9e3, 100e3);
    const double divider = 1e6 / (1e6 + 10e3);
    CHECK(r.ss.gain_midband == doctest::Approx(-gm * rload * divider).epsilon(1e-9));
    CHECK(r.ss.gain_midband_no_gds == doctest::Approx(-gm * par(3.9e3, 100e3) * divider).epsilon(1e-9));
    CHECK(r.ss.zin_ohm == doctest::Approx(1e6).epsilon(1e-9));
    CHECK(r.ss.zout_ohm == doctest::Approx(lambda > 0 ? par(3.9e3, 1.0 / gds) : 3.9e3).epsilon(1e-9));
  }
}

TEST_CASE("unbypassed source resistance: gain = -gm RD' / (1 + gm RSu)") {
  // Closed form with source degeneration, lambda = 0 (Sedra & Smith, any edition).
  const std::string text = test::self_bias_text(18.0, 8e-3, -2.5, 2.2e3, 4.7e3,
                                                "unbypassed = 470\nbypass_cap = \"22u\"\n[output]\nload = \"47k\"\n"
                                                "coupling_cap = \"2.2u\"\n");
  const solved r = solve(text);
  const double gm = gm_closed(8e-3, -2.5, r.op.at.vgs_v);
  CHECK(r.ss.gain_midband == doctest::Approx(-gm * par(4.7e3, 47e3) / (1.0 + gm * 470.0)).epsilon(1e-9));
  CHECK(r.ss.zout_ohm == doctest::Approx(4.7e3).epsilon(1e-9));
}

TEST_CASE("source follower: gain = gm RS' / (1 + gm RS'), output impedance RS || 1/gm") {
  // Closed form of the common-drain stage, lambda = 0 (Sedra & Smith, any edition).
  const std::string text =
      "topology = \"source-follower\"\n[supply]\nvolts = 24\n[jfet]\nidss = \"4m\"\nvp = -1.5\nis = 0\n"
      "[gate]\ncoupling_cap = \"10n\"\nresistor = \"10M\"\n[source]\nresistor = \"2.7k\"\n"
      "[output]\ncoupling_cap = \"10u\"\nload = \"10k\"\n";
  const solved r = solve(text);
  const double gm = gm_closed(4e-3, -1.5, r.op.at.vgs_v);
  const double rs = par(2.7e3, 10e3);
  CHECK(r.ss.gain_midband == doctest::Approx(gm * rs / (1.0 + gm * rs)).epsilon(1e-9));
  CHECK(r.ss.zout_ohm == doctest::Approx(par(2.7e3, 1.0 / gm)).epsilon(1e-9));
  CHECK(r.ss.zin_ohm == doctest::Approx(10e6).epsilon(1e-9));
}

TEST_CASE("fixed-bias amplifier figures of the textbook example") {
  // Boylestad & Nashelsky ch. 8 (numbers from memory, CHECKS.md): the Ex. 7.1 point with
  // yos = 40 µS (rd 25 kΩ): gm 1.875 mS, Zo 1.852 kΩ, Av -3.47. The linearised network of
  // a fully bypassed stage with RD 2 kΩ is solved with exactly those gm and gds.
  const std::string text = test::self_bias_text(16.0, 10e-3, -8.0, 355.0, 2e3, "bypass_cap = \"100u\"\n");
  const stage s = test::stage_from(text);
  const network net = build_network(s);
  const operating_point op = solve_operating_point(net);
  const jfet_linear lin{1.875e-3, 40e-6, 0.0, 0.0};
  ac_setup gain;
  gain.generator_v = 1.0;
  CHECK(solve_small_signal(net, lin, gain)[net.output_node].real() == doctest::Approx(-3.47).epsilon(1e-3));
  ac_setup zout;
  zout.load_present = false;
  zout.inject_a = net.output_node;
  CHECK(solve_small_signal(net, lin, zout)[net.output_node].real() == doctest::Approx(1.852e3).epsilon(1e-3));
  (void)op;
}

TEST_CASE("low-frequency corners follow the short-circuit time constants") {
  // Closed forms (lambda = 0; Sedra & Smith, low-frequency response of the CS amplifier):
  // input: 1/(2 pi C (Rsig + RG)); bypass: 1/(2 pi CS (RS || 1/gm)); output: 1/(2 pi C (RD + RL)).
  const std::string text = test::self_bias_text(
      9.0, 4.5e-3, -1.6, 680.0, 3.3e3,
      "bypass_cap = \"47u\"\n[signal]\nimpedance = \"10k\"\n[output]\ncoupling_cap = \"1u\"\nload = \"100k\"\n");
  const solved r = solve(text);
  const double gm = gm_closed(4.5e-3, -1.6, r.op.at.vgs_v);
  REQUIRE(r.ss.corners.size() == 3);
  for (const cap_corner& c : r.ss.corners) {
    CAPTURE(c.key);
    double expect = 0;
    if (c.key == "gate.coupling_cap") expect = 1.0 / (two_pi * 100e-9 * (10e3 + 1e6));
    if (c.key == "source.bypass_cap") expect = 1.0 / (two_pi * 47e-6 * par(680.0, 1.0 / gm));
    if (c.key == "output.coupling_cap") expect = 1.0 / (two_pi * 1e-6 * (3.3e3 + 100e3));
    CHECK(c.corner_hz == doctest::Approx(expect).epsilon(1e-9));
  }
}

TEST_CASE("high-pass loss of a first-order section") {
  // Closed form: |H| = (f/fc)/sqrt(1 + (f/fc)^2): -3.0103 dB at the corner.
  CHECK(highpass_loss_db(100.0, 100.0) == doctest::Approx(-3.0103).epsilon(1e-4));
  CHECK(highpass_loss_db(1000.0, 10.0) == doctest::Approx(-0.000434).epsilon(1e-2).scale(0));
}

TEST_CASE("a capacitor's loss at a frequency is exact for coupling and bypass capacitors") {
  // Closed forms, lambda = 0, the other capacitors shorted:
  //  input coupling: single-pole high-pass with fc = 1/(2 pi C (Rsig + RG));
  //  bypass: gain ~ gm RD' / (1 + gm Zs), Zs = RS / (1 + j w RS CS) (Sedra & Smith).
  const std::string text = test::self_bias_text(
      9.0, 4.5e-3, -1.6, 680.0, 3.3e3,
      "bypass_cap = \"47u\"\n[signal]\nimpedance = \"10k\"\n[output]\ncoupling_cap = \"1u\"\nload = \"100k\"\n");
  const solved r = solve(text);
  const double gm = gm_closed(4.5e-3, -1.6, r.op.at.vgs_v);
  for (double f : {2.0, 15.0, 41.0, 1000.0}) {
    CAPTURE(f);
    const std::vector<cap_reactance> xs = reactances_at(r.net, r.op, f);
    REQUIRE(xs.size() == 3);
    for (const cap_reactance& x : xs) {
      CAPTURE(x.key);
      CHECK(x.xc_ohm == doctest::Approx(1.0 / (two_pi * f * x.farad)).epsilon(1e-12));
      if (x.key == "gate.coupling_cap")
        CHECK(x.loss_db == doctest::Approx(highpass_loss_db(f, 1.0 / (two_pi * 100e-9 * 1.01e6))).epsilon(1e-9).scale(1e-9));
      if (x.key == "source.bypass_cap") {
        const std::complex<double> zs = 680.0 / (1.0 + std::complex<double>(0.0, two_pi * f * 680.0 * 47e-6));
        const double shelf = std::abs(1.0 / (1.0 + gm * zs));
        CHECK(x.loss_db == doctest::Approx(20.0 * std::log10(shelf)).epsilon(1e-9).scale(1e-9));
      }
    }
  }
}

TEST_CASE("small-signal factors: a nodal matrix and its transpose solved, and a singular one by complete pivoting") {
  // Closed form: a 1 S conductance between nodes 1 and 2, 0.5 S from node 2 to ground and
  // 1 A into node 1 give v2 = 2 V, v1 = 3 V; the transpose of a symmetric nodal matrix is
  // itself (reciprocity), so both solves agree.
  using cplx = std::complex<double>;
  Eigen::MatrixXcd a(2, 2);
  a << cplx(1.0), cplx(-1.0), cplx(-1.0), cplx(1.5);
  Eigen::MatrixXcd b(2, 1);
  b << cplx(1.0), cplx(0.0);
  const pinchoff::model::small_signal_factors lu(a);
  const Eigen::MatrixXcd x = lu.solve(b), y = lu.solve_transposed(b);
  CHECK(std::abs(x(0, 0) - 3.0) < 1e-14);
  CHECK(std::abs(x(1, 0) - 2.0) < 1e-14);
  CHECK((x - y).norm() < 1e-14);
  // A capacitor (at s = j 1 rad/s, 1 F: admittance j S) in series: the transpose of a
  // non-symmetric matrix (a voltage-controlled current source, gm = 2 S from node 1 into node
  // 2) against the closed-form inverse.
  Eigen::MatrixXcd g(2, 2);
  g << cplx(0.0, 1.0), cplx(0.0, -1.0), cplx(2.0, -1.0), cplx(1.0, 1.0);
  const Eigen::MatrixXcd exact_t = g.transpose().inverse() * b;  // 2 x 2: Eigen's closed-form inverse
  CHECK((pinchoff::model::small_signal_factors(g).solve_transposed(b) - exact_t).norm() < 1e-14);
  // A node with no path to the rest at DC (both its neighbours capacitors, open at s = 0):
  // a zero row and column. Partial pivoting alone divides by zero there; the complete
  // factors leave that node at 0 and solve the rest.
  Eigen::MatrixXcd s(3, 3);
  s << cplx(1.0), cplx(-1.0), cplx(0.0), cplx(-1.0), cplx(1.5), cplx(0.0), cplx(0.0), cplx(0.0), cplx(0.0);
  Eigen::MatrixXcd r(3, 1);
  r << cplx(1.0), cplx(0.0), cplx(0.0);
  const Eigen::MatrixXcd z = pinchoff::model::small_signal_factors(s).solve(r);
  CHECK(z.allFinite());
  CHECK(std::abs(z(0, 0) - 3.0) < 1e-14);
  CHECK(std::abs(z(1, 0) - 2.0) < 1e-14);
  CHECK(std::abs(z(2, 0)) < 1e-14);
}

}  // namespace test_small_signal
