#include "model/analysis/small_signal.hpp"

#include <cmath>
#include <numbers>
#include <utility>

#include "base/error.hpp"

namespace pinchoff::model {
namespace {
using cplx = std::complex<double>;
inline int row(int node) noexcept { return node - 1; }
// A gain that may carry a small phase (a capsule network's mid-band at 1 kHz): its
// magnitude with the sign of its real part; exactly the real value when it is real.
double signed_gain(cplx g) noexcept { return g.real() < 0 ? -std::abs(g) : std::abs(g); }
}  // namespace

namespace {
jfet_linear linearise_one(const network& net, const operating_point& op, const net_jfet& q) {
  const double vd = node_v(op.x, q.drain), vg = node_v(op.x, q.gate), vs = node_v(op.x, q.source);
  const channel_eval ch = drain_current(q.device, vg - vs, vd - vs);
  return {ch.gm_s, ch.gds_s, junction_current(q.device, vg - vs, net.vt_v).g_s, junction_current(q.device, vg - vd, net.vt_v).g_s};
}
}  // namespace

jfet_linear linearise(const network& net, const operating_point& op) {
  if (net.devices() != 1) throw internal_error("linearise: the network has more than one JFET (linearise_all)");
  return linearise_one(net, op, net.jfet());
}

std::vector<jfet_linear> linearise_all(const network& net, const operating_point& op) {
  std::vector<jfet_linear> out;
  for (const net_jfet& q : net.jfets) out.push_back(linearise_one(net, op, q));
  return out;
}

Eigen::VectorXcd solve_small_signal(const network& net, const jfet_linear& lin, const ac_setup& setup) {
  if (net.devices() != 1) throw internal_error("small-signal analysis: one linearised JFET given for several");
  return solve_small_signal(net, std::span<const jfet_linear>(&lin, 1), setup);
}

Eigen::VectorXcd solve_small_signal(const network& net, std::span<const jfet_linear> lins, const ac_setup& setup) {
  const small_signal_system sys = assemble_small_signal(net, lins, setup);
  const Eigen::VectorXcd x = small_signal_factors(sys.a).solve(sys.rhs);
  Eigen::VectorXcd v(net.node_count);
  v[0] = 0.0;
  for (int k = 1; k < net.node_count; ++k) v[k] = x[row(k)];
  return v;
}

small_signal_factors::small_signal_factors(const Eigen::MatrixXcd& a) : partial_(a) {
  // The estimate alone misses an exact zero pivot (it then reads the infinite factors as
  // well conditioned), so the pivots' spread is tested too.
  const Eigen::VectorXd pivots = partial_.matrixLU().diagonal().cwiseAbs();
  const bool spread_ok = pivots.size() == 0 || pivots.minCoeff() > 1e-12 * pivots.maxCoeff();
  if (!spread_ok || !(partial_.rcond() >= 1e-12)) {
    full_.compute(a);
    complete_ = true;
  }
}

Eigen::MatrixXcd small_signal_factors::solve(const Eigen::MatrixXcd& b) const {
  return complete_ ? Eigen::MatrixXcd(full_.solve(b)) : Eigen::MatrixXcd(partial_.solve(b));
}

Eigen::MatrixXcd small_signal_factors::solve_transposed(const Eigen::MatrixXcd& b) const {
  return complete_ ? Eigen::MatrixXcd(full_.transpose().solve(b)) : Eigen::MatrixXcd(partial_.transpose().solve(b));
}

small_signal_system assemble_small_signal(const network& net, std::span<const jfet_linear> lins, const ac_setup& setup) {
  if (static_cast<int>(lins.size()) != net.devices())
    throw internal_error("small-signal analysis: the linearised JFETs do not match the network");
  const int nu = net.node_count - 1;
  // An inductor is a short in the mid-band (its winding resistance, a resistor of its own,
  // stays: a pickup's pass band lies below its resonance) and at s = 0; elsewhere 1 / (s L).
  const bool inductors_shorted = setup.midband || setup.s == cplx{0.0, 0.0};
  int branches = 1 + (setup.generator_present ? 1 : 0) + (inductors_shorted ? static_cast<int>(net.inductors.size()) : 0);
  if (setup.midband)
    for (std::size_t k = 0; k < net.capacitors.size(); ++k)
      if (is_large_cap(net.capacitors[k].role) && static_cast<int>(k) != setup.removed_cap &&
          static_cast<int>(k) != setup.admittance_cap)
        ++branches;
  const int n = nu + branches;
  Eigen::MatrixXcd a = Eigen::MatrixXcd::Zero(n, n);
  Eigen::VectorXcd rhs = Eigen::VectorXcd::Zero(n);

  auto stamp_y = [&](int p, int q, cplx y) {
    if (p != 0) a(row(p), row(p)) += y;
    if (q != 0) a(row(q), row(q)) += y;
    if (p != 0 && q != 0) {
      a(row(p), row(q)) -= y;
      a(row(q), row(p)) -= y;
    }
  };
  // Voltage-controlled current from p to q (through the element), controlled by V(c) - V(d).
  auto stamp_vccs = [&](int p, int q, int c, int d, double g) {
    auto add = [&](int r, int col, double v) {
      if (r != 0 && col != 0) a(row(r), row(col)) += v;
    };
    add(p, c, g);
    add(p, d, -g);
    add(q, c, -g);
    add(q, d, g);
  };
  int branch = nu;
  auto stamp_v = [&](int p, int q, cplx volts) {
    if (p != 0) {
      a(row(p), branch) += 1.0;
      a(branch, row(p)) += 1.0;
    }
    if (q != 0) {
      a(row(q), branch) -= 1.0;
      a(branch, row(q)) -= 1.0;
    }
    rhs[branch] = volts;
    ++branch;
  };

  for (const net_resistor& r : net.resistors) {
    if (!setup.load_present && r.key == "output.load") continue;
    stamp_y(r.a, r.b, 1.0 / r.ohm);
  }
  stamp_v(net.supply_node, 0, 0.0);  // the supply is an AC ground
  if (setup.generator_present) stamp_v(net.generator_node, 0, setup.generator_v);
  for (const net_inductor& l : net.inductors) {
    if (inductors_shorted) stamp_v(l.a, l.b, 0.0);
    else stamp_y(l.a, l.b, 1.0 / (setup.s * l.henry));
  }
  for (std::size_t k = 0; k < net.capacitors.size(); ++k) {
    if (static_cast<int>(k) == setup.removed_cap) continue;
    const net_capacitor& c = net.capacitors[k];
    if (setup.midband && static_cast<int>(k) == setup.admittance_cap) {
      stamp_y(c.a, c.b, setup.s * c.farad);
    } else if (setup.midband) {
      if (is_large_cap(c.role)) stamp_v(c.a, c.b, 0.0);
      else if (setup.small_caps_hz > 0.0) stamp_y(c.a, c.b, cplx{0.0, 2.0 * std::numbers::pi * setup.small_caps_hz} * c.farad);
    } else {
      stamp_y(c.a, c.b, setup.s * c.farad);
    }
  }
  // Each JFET: channel current d -> s controlled by vgs and vds; junction conductances.
  for (std::size_t k = 0; k < lins.size(); ++k) {
    const net_jfet& q = net.jfets[k];
    const jfet_linear& lin = lins[k];
    stamp_vccs(q.drain, q.source, q.gate, q.source, lin.gm_s);
    if (setup.include_gds) stamp_y(q.drain, q.source, lin.gds_s);
    stamp_y(q.gate, q.source, lin.ggs_s);
    stamp_y(q.gate, q.drain, lin.ggd_s);
  }

  if (setup.inject_a >= 0) {
    if (setup.inject_a != 0) rhs[row(setup.inject_a)] += 1.0;
    if (setup.inject_b != 0) rhs[row(setup.inject_b)] -= 1.0;
  }
  return {std::move(a), std::move(rhs)};
}

small_signal_figures analyse_small_signal(const network& net, const operating_point& op) {
  const std::vector<jfet_linear> lin = linearise_all(net, op);
  small_signal_figures f;
  f.gm_s = lin.front().gm_s;
  f.gds_s = lin.front().gds_s;
  if (f.gds_s > 0) f.rds_ohm = 1.0 / f.gds_s;

  ac_setup gain;
  gain.generator_v = 1.0;
  gain.small_caps_hz = net.midband_hz;
  const Eigen::VectorXcd v_mid = solve_small_signal(net, lin, gain);
  f.gain_midband = signed_gain(v_mid[net.output_node]);
  for (std::size_t k = 0; k < net.stages.size(); ++k) {
    stage_small_signal st;
    const jfet_linear& l = lin[static_cast<std::size_t>(net.stages[k].jfet)];
    st.gm_s = l.gm_s;
    st.gds_s = l.gds_s;
    if (l.gds_s > 0) st.rds_ohm = 1.0 / l.gds_s;
    const int to = k + 1 < net.stages.size() ? net.stages[k + 1].input : net.output_node;
    const cplx in = v_mid[net.stages[k].input];
    st.gain = std::abs(in) > 1e-300 ? signed_gain(v_mid[to] / in) : NAN;
    f.stages.push_back(st);
  }
  gain.include_gds = false;
  f.gain_midband_no_gds = signed_gain(solve_small_signal(net, lin, gain)[net.output_node]);

  ac_setup zin;
  zin.generator_present = false;
  zin.inject_a = net.input_node;
  f.zin_ohm = solve_small_signal(net, lin, zin)[net.input_node].real();

  ac_setup zout;
  zout.load_present = false;
  zout.inject_a = net.output_node;
  f.zout_ohm = solve_small_signal(net, lin, zout)[net.output_node].real();

  for (std::size_t k = 0; k < net.capacitors.size(); ++k) {
    const net_capacitor& c = net.capacitors[k];
    if (!is_large_cap(c.role) || is_reservoir(c.role)) continue;
    ac_setup seen;
    seen.removed_cap = static_cast<int>(k);
    seen.inject_a = c.a;
    seen.inject_b = c.b;
    const Eigen::VectorXcd v = solve_small_signal(net, lin, seen);
    const double r = (v[c.a] - v[c.b]).real();
    const double fc = 1.0 / (2.0 * std::numbers::pi * r * c.farad);
    f.corners.push_back({std::string(c.key), c.role, c.farad, r, fc});
    f.low_corner_estimate_hz += fc;
  }

  // A capsule's high-pass: its capacitance, the stray and the gate's input capacitance (cgs
  // and the Miller cgd, in parallel at the gate) against the resistance the gate sees, the
  // capsule's voltage at 0 V and the small capacitors open. In band the gate carries
  // C_capsule / C_total of the capsule's voltage, so C_total = C_capsule |v_gen / v_gate| at
  // the mid-band frequency (the capacitive divider; its resistors' share is below 1e-4 there
  // for any corner under 10 Hz).
  for (std::size_t k = 0; k < net.capacitors.size(); ++k) {
    const net_capacitor& c = net.capacitors[k];
    if (c.role != cap_role::capsule) continue;
    ac_setup seen;
    seen.inject_a = c.b;  // the gate side; the generator side is the ideal source at 0 V
    const double r = solve_small_signal(net, lin, seen)[c.b].real();
    const double total_f = c.farad / std::abs(v_mid[c.b]);
    const double fc = 1.0 / (2.0 * std::numbers::pi * r * total_f);
    f.corners.push_back({std::string(c.key), c.role, total_f, r, fc});
    f.low_corner_estimate_hz += fc;
  }
  return f;
}

std::vector<cap_reactance> reactances_at(const network& net, const operating_point& op, double f_hz) {
  const std::vector<jfet_linear> lin = linearise_all(net, op);
  const small_signal_figures ss = analyse_small_signal(net, op);
  ac_setup mid;
  mid.generator_v = 1.0;
  mid.small_caps_hz = net.midband_hz;
  const double g_mid = std::abs(solve_small_signal(net, lin, mid)[net.output_node]);
  std::vector<cap_reactance> out;
  for (std::size_t k = 0; k < net.capacitors.size(); ++k) {
    const net_capacitor& c = net.capacitors[k];
    if (!is_large_cap(c.role) || is_reservoir(c.role)) continue;
    ac_setup one = mid;
    one.admittance_cap = static_cast<int>(k);
    one.s = {0.0, 2.0 * std::numbers::pi * f_hz};
    const double g = std::abs(solve_small_signal(net, lin, one)[net.output_node]);
    double r_seen = 0.0;
    for (const cap_corner& cc : ss.corners)
      if (cc.key == c.key) r_seen = cc.r_seen_ohm;
    out.push_back({std::string(c.key), c.farad, 1.0 / (2.0 * std::numbers::pi * f_hz * c.farad), r_seen,
                   20.0 * std::log10(g / g_mid)});
  }
  return out;
}

double highpass_loss_db(double f_hz, double fc_hz) noexcept {
  const double x = f_hz / fc_hz;
  return 20.0 * std::log10(x / std::sqrt(1.0 + x * x));
}

}  // namespace pinchoff::model
