#include "model/analysis/noise.hpp"

#include <algorithm>
#include <cmath>
#include <limits>
#include <map>
#include <numbers>
#include <utility>

#include "base/error.hpp"
#include "base/units.hpp"
#include "dsp/weighting.hpp"
#include "model/analysis/response.hpp"
#include "model/analysis/small_signal.hpp"

namespace pinchoff::model {
namespace {

constexpr double k_boltzmann = 1.380649e-23;   // J/K, exact (SI 2019)
constexpr double q_electron = 1.602176634e-19;  // C, exact (SI 2019)
using cplx = std::complex<double>;

bool ends_with(const std::string& s, const std::string& tail) {
  return s.size() >= tail.size() && s.compare(s.size() - tail.size(), tail.size(), tail) == 0;
}

// The stage a key belongs to: "stage2.drain.resistor" -> 1; a single stage's own keys -> 0;
// the shared parts (supply, signal source) -> -1.
int stage_of_key(const network& net, const std::string& key) {
  if (key.rfind("supply.", 0) == 0 || key.rfind("signal.", 0) == 0) return -1;
  if (key.rfind("stage", 0) == 0) {
    const auto dot = key.find('.');
    if (dot != std::string::npos && dot > 5) {
      int n = 0;
      for (std::size_t i = 5; i < dot; ++i) {
        if (key[i] < '0' || key[i] > '9') return net.stages.size() == 1 ? 0 : -1;
        n = n * 10 + (key[i] - '0');
      }
      return n - 1;
    }
  }
  return net.stages.size() == 1 ? 0 : -1;
}

std::string jfet_key(const network& net, int k) {
  return net.devices() > 1 ? "stage" + std::to_string(k + 1) + ".jfet" : std::string("jfet");
}

// Channel thermal noise density (A^2/Hz), van der Ziel's long-channel form in the terminal
// frame where vds >= 0 (inverse mode: drain and source swapped).
double channel_thermal(const jfet_params& p, double vgs, double vds, double kt) {
  if (vds < 0.0) {
    vgs -= vds;
    vds = -vds;
  }
  const double vov = vgs - p.vp_v;
  if (vov <= 0.0) return 0.0;
  const double gd0 = 2.0 * beta_of(p) * vov * (1.0 + p.lambda_per_v * vds);
  const double a = vds >= vov ? 0.0 : 1.0 - vds / vov;
  return 4.0 * kt * gd0 * (2.0 / 3.0) * (1.0 + a + a * a) / (1.0 + a);
}

void check_range(const char* field, double lo, double hi, const std::string& what) {
  if (!(lo > 0.0) || !std::isfinite(lo) || !std::isfinite(hi))
    throw setting_error(field, what + " must be positive frequencies, got " + base::format_number(lo) + " to " +
                                   base::format_number(hi) + " Hz");
  if (!(hi > lo))
    throw setting_error(field, what + " must end above where it starts, got " + base::format_number(lo) + " to " +
                                   base::format_number(hi) + " Hz");
  if (lo < lowest_analysis_hz || hi > highest_analysis_hz)
    throw setting_error(field, what + " must lie within " + base::format_si(lowest_analysis_hz, "Hz") + " to " +
                                   base::format_si(highest_analysis_hz, "Hz") + ", where the small-signal model holds; got " +
                                   base::format_si(lo, "Hz") + " to " + base::format_si(hi, "Hz"));
}

std::vector<double> log_grid(double lo, double hi, int n) {
  std::vector<double> f(static_cast<std::size_t>(n));
  for (int k = 0; k < n; ++k) f[static_cast<std::size_t>(k)] = lo * std::pow(hi / lo, n == 1 ? 0.0 : double(k) / (n - 1));
  f.front() = lo;
  f.back() = hi;
  return f;
}

double share(double part, double whole) { return whole > 0.0 ? 100.0 * part / whole : 0.0; }

}  // namespace

const char* noise_mechanism_name(noise_mechanism m) noexcept {
  switch (m) {
    case noise_mechanism::thermal: return "thermal";
    case noise_mechanism::channel: return "channel";
    case noise_mechanism::flicker: return "flicker";
    case noise_mechanism::gate_shot: return "gate shot";
  }
  return "?";
}

double noise_temperature_k(const network& net) noexcept { return net.vt_v * q_electron / k_boltzmann; }

std::vector<noise_source> noise_sources(const network& net, const operating_point& op) {
  const double kt = net.vt_v * q_electron;
  std::vector<noise_source> out;
  for (const net_resistor& r : net.resistors) {
    if (ends_with(r.key, "output.load")) continue;  // the next equipment's input, not this design's
    noise_source s;
    s.part = r.key;
    s.mechanism = noise_mechanism::thermal;
    s.a = r.a;
    s.b = r.b;
    s.white_a2_hz = 4.0 * kt / r.ohm;
    s.stage = stage_of_key(net, r.key);
    s.of_source = r.key.rfind("signal.", 0) == 0;
    out.push_back(std::move(s));
  }
  for (int k = 0; k < net.devices(); ++k) {
    const net_jfet& q = net.jfets[static_cast<std::size_t>(k)];
    const double vd = node_v(op.x, q.drain), vg = node_v(op.x, q.gate), vs = node_v(op.x, q.source);
    const std::string key = jfet_key(net, k);
    int stage = k;
    for (std::size_t i = 0; i < net.stages.size(); ++i)
      if (net.stages[i].jfet == k) stage = static_cast<int>(i);
    auto add = [&](noise_mechanism m, int a, int b, double white, double flicker) {
      if (white <= 0.0 && flicker <= 0.0) return;
      out.push_back({key, m, a, b, white, flicker, stage, false});
    };
    add(noise_mechanism::channel, q.drain, q.source, channel_thermal(q.device, vg - vs, vd - vs, kt), 0.0);
    if (q.device.flicker_k > 0.0) {
      const double id = std::fabs(drain_current(q.device, vg - vs, vd - vs).id_a);
      add(noise_mechanism::flicker, q.drain, q.source, 0.0, q.device.flicker_k * std::pow(id, q.device.flicker_exponent));
    }
    const double igs = std::fabs(junction_current(q.device, vg - vs, net.vt_v).i_a) + q.device.gate_leakage_a;
    const double igd = std::fabs(junction_current(q.device, vg - vd, net.vt_v).i_a);
    add(noise_mechanism::gate_shot, q.gate, q.source, 2.0 * q_electron * igs, 0.0);
    add(noise_mechanism::gate_shot, q.gate, q.drain, 2.0 * q_electron * igd, 0.0);
  }
  return out;
}

noise_point noise_at(const network& net, const operating_point& op, const std::vector<noise_source>& sources, double f_hz) {
  const std::vector<jfet_linear> lins = linearise_all(net, op);
  ac_setup setup;
  setup.midband = false;
  setup.s = {0.0, 2.0 * std::numbers::pi * f_hz};
  setup.generator_present = true;
  setup.generator_v = 1.0;
  const small_signal_system sys = assemble_small_signal(net, lins, setup);
  const int n = static_cast<int>(sys.a.rows());
  const auto row = [](int node) { return node - 1; };

  // Columns: the load, then each stage's output node. The adjoint solve A^T y = e_out gives
  // the transfer impedance from a current injected into node a (out of b) to the output as
  // y[a] - y[b] (reciprocity of the adjoint network).
  const int nstages = static_cast<int>(net.stages.size());
  Eigen::MatrixXcd e = Eigen::MatrixXcd::Zero(n, 1 + nstages);
  e(row(net.output_node), 0) = 1.0;
  for (int k = 0; k < nstages; ++k)
    if (net.stages[static_cast<std::size_t>(k)].output != 0) e(row(net.stages[static_cast<std::size_t>(k)].output), 1 + k) = 1.0;
  const small_signal_factors lu(sys.a);
  const Eigen::MatrixXcd y = lu.solve_transposed(e);
  const Eigen::VectorXcd x = lu.solve(sys.rhs);

  noise_point p;
  p.frequency_hz = f_hz;
  p.gain = x[row(net.output_node)];
  p.source_v2_hz.reserve(sources.size());
  p.stage_output_v2_hz.assign(static_cast<std::size_t>(nstages), 0.0);
  for (const noise_source& s : sources) {
    const double i2 = s.density(f_hz);
    for (int c = 0; c <= nstages; ++c) {
      const cplx za = s.a != 0 ? y(row(s.a), c) : cplx{};
      const cplx zb = s.b != 0 ? y(row(s.b), c) : cplx{};
      const double v2 = std::norm(za - zb) * i2;
      if (c == 0) {
        p.source_v2_hz.push_back(v2);
        p.output_v2_hz += v2;
      } else {
        p.stage_output_v2_hz[static_cast<std::size_t>(c - 1)] += v2;
      }
    }
  }
  const double g2 = std::norm(p.gain);
  p.input_v2_hz = g2 > 1e-300 ? p.output_v2_hz / g2 : std::numeric_limits<double>::infinity();
  return p;
}

double noise_result::output_v() const noexcept { return std::sqrt(output.unweighted); }
double noise_result::output_a_v() const noexcept { return std::sqrt(output.a); }
double noise_result::output_468_v() const noexcept { return std::sqrt(output.itu468); }
double noise_result::input_v() const noexcept { return output_v() / gain_1k_abs; }
double noise_result::input_a_v() const noexcept { return output_a_v() / gain_1k_abs; }
double noise_result::input_468_v() const noexcept { return output_468_v() / gain_1k_abs; }

noise_result analyse_noise(const network& net, const operating_point& op, const noise_settings& s) {
  check_range("frequencies", s.from_hz, s.to_hz, "the frequency range");
  check_range("band", s.band_lo_hz, s.band_hi_hz, "the noise band");
  if (s.points < 2) throw setting_error("points", "the sweep needs at least 2 points, got " + std::to_string(s.points));
  noise_result r;
  r.temperature_k = noise_temperature_k(net);
  r.band_lo_hz = s.band_lo_hz;
  r.band_hi_hz = s.band_hi_hz;
  r.sources = noise_sources(net, op);
  for (const noise_source& src : r.sources) r.has_source_resistance = r.has_source_resistance || src.of_source;
  const std::size_t ns = r.sources.size();
  const std::size_t nst = net.stages.size();

  for (double f : log_grid(s.from_hz, s.to_hz, s.points)) r.density.push_back(noise_at(net, op, r.sources, f));

  // Band integrals: trapezoids in f on a log grid (exact for a white density).
  const int n = std::max(2, static_cast<int>(std::ceil(std::log10(s.band_hi_hz / s.band_lo_hz) * s.band_points_per_decade)) + 1);
  std::vector<band_power> per_source(ns);
  std::vector<band_power> per_stage(nst);
  noise_point prev;
  double prev_wa = 0.0, prev_w4 = 0.0;
  bool first = true;
  for (double f : log_grid(s.band_lo_hz, s.band_hi_hz, n)) {
    noise_point p = noise_at(net, op, r.sources, f);
    const double wa = std::pow(dsp::a_weighting_gain(f), 2), w4 = std::pow(dsp::itu468_weighting_gain(f), 2);
    if (!first) {
      const double h = 0.5 * (f - prev.frequency_hz);
      auto add = [&](band_power& b, double v_prev, double v) {
        b.unweighted += h * (v_prev + v);
        b.a += h * (prev_wa * v_prev + wa * v);
        b.itu468 += h * (prev_w4 * v_prev + w4 * v);
      };
      add(r.output, prev.output_v2_hz, p.output_v2_hz);
      for (std::size_t j = 0; j < ns; ++j) add(per_source[j], prev.source_v2_hz[j], p.source_v2_hz[j]);
      for (std::size_t k = 0; k < nst; ++k) add(per_stage[k], prev.stage_output_v2_hz[k], p.stage_output_v2_hz[k]);
    }
    first = false;
    prev = std::move(p);
    prev_wa = wa;
    prev_w4 = w4;
  }

  const noise_point p100 = noise_at(net, op, r.sources, 100.0);
  const noise_point p1k = noise_at(net, op, r.sources, 1000.0);
  const noise_point p10k = noise_at(net, op, r.sources, 10000.0);
  r.gain_1k_abs = std::abs(p1k.gain);

  // Contributions: one row per (part, mechanism).
  std::map<std::pair<std::string, int>, std::size_t> row_of;
  for (std::size_t j = 0; j < ns; ++j) {
    const noise_source& src = r.sources[j];
    const auto key = std::make_pair(src.part, static_cast<int>(src.mechanism));
    auto it = row_of.find(key);
    if (it == row_of.end()) {
      it = row_of.emplace(key, r.contributions.size()).first;
      noise_contribution c;
      c.part = src.part;
      c.mechanism = src.mechanism;
      c.stage = src.stage;
      c.of_source = src.of_source;
      r.contributions.push_back(c);
    }
    noise_contribution& c = r.contributions[it->second];
    c.share_percent_100 += share(p100.source_v2_hz[j], p100.output_v2_hz);
    c.share_percent_1k += share(p1k.source_v2_hz[j], p1k.output_v2_hz);
    c.share_percent_10k += share(p10k.source_v2_hz[j], p10k.output_v2_hz);
    c.power.unweighted += per_source[j].unweighted;
    c.power.a += per_source[j].a;
    c.power.itu468 += per_source[j].itu468;
    if (src.of_source) {
      r.from_source.unweighted += per_source[j].unweighted;
      r.from_source.a += per_source[j].a;
      r.from_source.itu468 += per_source[j].itu468;
    }
  }
  for (noise_contribution& c : r.contributions) {
    c.share_percent = share(c.power.unweighted, r.output.unweighted);
    c.share_percent_a = share(c.power.a, r.output.a);
  }
  std::stable_sort(r.contributions.begin(), r.contributions.end(),
                   [](const noise_contribution& a, const noise_contribution& b) { return a.share_percent_a > b.share_percent_a; });

  r.spot_noise_figure_1k_db = NAN;
  r.noise_figure_db = NAN;
  if (r.has_source_resistance) {
    double src1k = 0.0;
    for (std::size_t j = 0; j < ns; ++j)
      if (r.sources[j].of_source) src1k += p1k.source_v2_hz[j];
    if (src1k > 0.0) r.spot_noise_figure_1k_db = 10.0 * std::log10(p1k.output_v2_hz / src1k);
    if (r.from_source.unweighted > 0.0) r.noise_figure_db = 10.0 * std::log10(r.output.unweighted / r.from_source.unweighted);
  }

  for (std::size_t k = 0; k < nst; ++k) {
    noise_stage_figures st;
    st.label = net.stages[k].label;
    st.at_output = per_stage[k];
    const int node = net.stages[k].output;
    st.gain_1k_abs = node == net.output_node ? r.gain_1k_abs : 0.0;
    for (const noise_contribution& c : r.contributions)
      if (c.stage == static_cast<int>(k)) {
        st.share_percent += c.share_percent;
        st.share_percent_a += c.share_percent_a;
      }
    r.stages.push_back(st);
  }
  if (nst > 1) {
    // Each stage's gain to its own output node at 1 kHz, from the forward solve.
    const std::vector<jfet_linear> lins = linearise_all(net, op);
    ac_setup g;
    g.midband = false;
    g.s = {0.0, 2.0 * std::numbers::pi * 1000.0};
    g.generator_v = 1.0;
    const Eigen::VectorXcd v = solve_small_signal(net, lins, g);
    for (std::size_t k = 0; k < nst; ++k) r.stages[k].gain_1k_abs = std::abs(v[net.stages[k].output]);
  }
  return r;
}

double self_noise_db_spl(double vn_rms, double sensitivity_v_per_pa) noexcept {
  return 94.0 + 20.0 * std::log10(vn_rms / sensitivity_v_per_pa);
}
double dbu_of_rms(double v_rms) noexcept { return 20.0 * std::log10(v_rms / base::dbu_reference_vrms); }
double dbv_of_rms(double v_rms) noexcept { return 20.0 * std::log10(v_rms); }

}  // namespace pinchoff::model
