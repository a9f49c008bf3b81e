#include "model/analysis/sweep.hpp"

#include <algorithm>
#include <atomic>
#include <cmath>
#include <limits>
#include <numbers>
#include <numeric>
#include <optional>
#include <span>
#include <thread>

#include "base/error.hpp"
#include "base/threads.hpp"
#include "dsp/fft.hpp"
#include "dsp/harmonics.hpp"
#include "model/circuit/network.hpp"
#include "model/circuit/nodal.hpp"
#include "model/circuit/operating_point.hpp"
#include "model/analysis/spread.hpp"
#include "model/engine/dk_probes.hpp"
#include "model/engine/steady_state.hpp"

namespace pinchoff::model {

int record_samples(double frequency_hz, double sample_rate_hz, int cycles) {
  const long long m0 = std::llround(cycles * sample_rate_hz / frequency_hz);
  for (long long d = 0;; ++d) {
    for (long long m : {m0 + d, m0 - d})
      if (m > 2LL * cycles && std::gcd(m, static_cast<long long>(cycles)) == 1) return static_cast<int>(m);
  }
}

namespace {

// The last harmonic H2..HN that dsp::analyse_coherent counts in a record of m samples holding
// `cycles` cycles at fs: within the bandwidth and on a bin strictly below Nyquist (1: none).
int last_counted(double fundamental_hz, double m, int cycles, int harmonics, double bandwidth_hz) {
  int last = 1;
  for (int h = 2; h <= harmonics; ++h) {
    if (static_cast<double>(h) * fundamental_hz > bandwidth_hz || 2.0 * h * cycles >= m) break;
    last = h;
  }
  return last;
}

}  // namespace

int record_samples(double frequency_hz, double sample_rate_hz, int cycles, int harmonics, double bandwidth_hz) {
  const double m_exact = cycles * sample_rate_hz / frequency_hz;
  const int wanted = last_counted(frequency_hz, m_exact, cycles, harmonics, bandwidth_hz);
  const long long m0 = std::llround(m_exact);
  // Candidates in order of distance from m0; the window (+-m0/2) always holds one, since
  // the records that count the same harmonics span at least 2 * cycles consecutive lengths
  // (the bandwidth is at most half the rate), and 2 of every 3 integers are coprime with 3.
  for (long long d = 0; d <= m0 / 2 + 2 * cycles; ++d) {
    for (long long m : {m0 + d, m0 - d}) {
      if (m <= 2LL * cycles || std::gcd(m, static_cast<long long>(cycles)) != 1) continue;
      const double snapped = sample_rate_hz * cycles / static_cast<double>(m);
      if (last_counted(snapped, static_cast<double>(m), cycles, harmonics, bandwidth_hz) == wanted)
        return static_cast<int>(m);
    }
  }
  return record_samples(frequency_hz, sample_rate_hz, cycles);
}

std::size_t sweep_point_bytes(int samples_per_record, int stages_probed) {
  // drive, output and the spectrum (m/2 + 1 complex), and what one transform uses;
  // probed stages add their JFETs' ports (2 a stage), their traced outputs and one record
  const std::size_t m = static_cast<std::size_t>(std::max(samples_per_record, 1));
  const std::size_t k = static_cast<std::size_t>(std::max(stages_probed, 0));
  return 24 * m + dsp::forward_work_bytes(m) + (k > 0 ? (24 * k + 8) * m : 0);
}

int concurrent_points(int threads, int samples_per_record, int stages_probed) {
  const int cores = static_cast<int>(std::max(1u, std::thread::hardware_concurrency()));
  const int fit = static_cast<int>(
      std::max<std::size_t>(1, sweep_working_bytes / sweep_point_bytes(samples_per_record, stages_probed)));
  return std::min(threads > 0 ? threads : cores, fit);
}

void validate(const sweep_settings& s) {
  using base::format_si;
  base::check_thread_count(s.threads);
  if (s.oversample < 1 || s.oversample > 64)
    throw setting_error("oversampling", "oversampling must be 1 to 64, got " + std::to_string(s.oversample));
  if (!(s.base_rate_hz >= 8000 && s.base_rate_hz <= 768000))
    throw setting_error("base_rate_hz", "the audio rate must be 8 kHz to 768 kHz, got " + format_si(s.base_rate_hz, "Hz"));
  const double fs = s.base_rate_hz * s.oversample;
  if (!(s.frequency_hz > 0) || s.frequency_hz >= 0.5 * s.base_rate_hz)
    throw setting_error("frequency_hz", "the test frequency " + format_si(s.frequency_hz, "Hz") +
                                            " is at or above the Nyquist limit " + format_si(0.5 * s.base_rate_hz, "Hz") +
                                            " of the " + format_si(s.base_rate_hz, "Hz") + " rate");
  if (s.frequency_hz < 1.0)
    throw setting_error("frequency_hz", "the test frequency must be at least 1 Hz (a lower tone needs an impractically "
                                        "long record), got " + format_si(s.frequency_hz, "Hz"));
  if (s.harmonics < 1 || s.harmonics > 100)
    throw setting_error("harmonics", "the highest harmonic must be 1 to 100, got " + std::to_string(s.harmonics));
  if (!(s.bandwidth_hz > 0) || s.bandwidth_hz > 0.5 * fs)
    throw setting_error("bandwidth_hz", "the bandwidth must be above 0 and below half the simulation rate (" +
                                            format_si(0.5 * fs, "Hz") + "), got " + format_si(s.bandwidth_hz, "Hz"));
  if (s.drives_vpk.empty()) throw setting_error("drives_vpk", "no drive levels given");
  for (double d : s.drives_vpk)
    if (!(d > 0) || !std::isfinite(d))
      throw setting_error("drives_vpk", "drive levels must be above 0 V, got " + format_si(d, "Vpk"));
  if (s.cycles < 0 || s.cycles > 64) throw internal_error("sweep cycles out of range");
  const int cycles = record_cycles(s);
  // The record a point holds (drive, output, spectrum and the transform's work, at most about
  // 120 bytes a sample, on every thread at once) must stay within memory. The bound is on the
  // record as asked; the snap moves it by a few samples.
  const double m = cycles * fs / s.frequency_hz;
  if (m > static_cast<double>(max_record_samples))
    throw setting_error("frequency_hz", "the test frequency " + format_si(s.frequency_hz, "Hz") + " needs a record of " +
                                            std::to_string(std::llround(m)) + " samples (" + std::to_string(cycles) +
                                            " cycles at the " + format_si(fs, "Hz") + " simulation rate), above the " +
                                            std::to_string(max_record_samples) + " a point may hold; at this rate the "
                                            "frequency must be at least " + format_si(cycles * fs / max_record_samples, "Hz", 4) +
                                            ", or lower the oversampling or the audio rate");
}

int automatic_oversampling(double frequency_hz, double base_rate_hz, double bandwidth_hz) noexcept {
  if (!(frequency_hz > 0) || !(base_rate_hz > 0) || !(bandwidth_hz > 0)) return 8;
  for (int k = 1; k < 8; k *= 2) {
    const double rate = k * base_rate_hz;
    if (0.5 * rate > bandwidth_hz && (rate - bandwidth_hz) / frequency_hz >= reference_fold_order) return k;
  }
  return 8;
}

int automatic_cycles(double frequency_hz, double sample_rate_hz) noexcept {
  if (!(frequency_hz > 0) || !(sample_rate_hz > 0)) return 3;
  return 2.0 * sample_rate_hz / frequency_hz >= reference_bin_fold_order ? 2 : 3;
}

int record_cycles(const sweep_settings& s) noexcept {
  return s.cycles > 0 ? s.cycles : automatic_cycles(s.frequency_hz, s.base_rate_hz * s.oversample);
}

sweep_plan plan_sweep(const sweep_settings& asked) {
  sweep_settings s = asked;
  if (s.automatic_oversample) s.oversample = automatic_oversampling(s.frequency_hz, s.base_rate_hz, s.bandwidth_hz);
  validate(s);
  s.cycles = record_cycles(s);
  sweep_plan p;
  p.settings_ = s;
  p.sample_rate_hz_ = s.base_rate_hz * s.oversample;
  p.samples_per_record_ = record_samples(s.frequency_hz, p.sample_rate_hz_, s.cycles, s.harmonics, s.bandwidth_hz);
  p.frequency_hz_ = p.sample_rate_hz_ * s.cycles / p.samples_per_record_;
  return p;
}

sweep_result run_sweep(const stage& st, const sweep_settings& s) { return run_sweep(st, plan_sweep(s)); }

namespace {

// Whether JFET `q` stays in its clean region over a period of recorded ports (network
// frame, 2 * devices values a sample), and the limit it crosses furthest. The region and
// the margins' scaling are headroom.cpp's. Returns the mean VGS (network frame).
double judge_clean(const network& net, int jfet, std::span<const double> ports, stage_point& sp) {
  const double vp = net.jfets[static_cast<std::size_t>(jfet)].device.vp_v;
  const double scale = std::max(1.0, std::fabs(vp));
  const std::size_t per = 2 * static_cast<std::size_t>(net.devices());
  double worst = std::numeric_limits<double>::infinity();
  double margin = std::numeric_limits<double>::infinity();
  sp.clean = true;
  sp.limit = swing_limit_kind::none;
  auto crossed = [&](double margin, swing_limit_kind kind) {
    sp.clean = false;
    if (margin < worst || sp.limit == swing_limit_kind::none) {
      worst = margin;
      sp.limit = kind;
    }
  };
  double sum_vgs = 0.0;
  std::size_t samples = 0;
  for (std::size_t n = 0; n + per <= ports.size(); n += per, ++samples) {
    const double vgs = ports[n + 2 * static_cast<std::size_t>(jfet)];
    const double vds = ports[n + 2 * static_cast<std::size_t>(jfet) + 1];
    sum_vgs += vgs;
    margin = std::min({margin, (vds - (vgs - vp)) / scale, (vgs - vp) / scale, -vgs / scale});
    if (vds < vgs - vp) crossed((vds - (vgs - vp)) / scale, swing_limit_kind::triode);
    if (!(vgs > vp)) crossed((vgs - vp) / scale, swing_limit_kind::cutoff);
    if (vgs > 0.0) crossed(-vgs / scale, swing_limit_kind::gate_forward);
  }
  sp.margin = samples ? margin : 0.0;
  return samples ? sum_vgs / static_cast<double>(samples) : 0.0;
}

// Each stage of a chain over the analysed period: the harmonics at its output, from the
// probes' trace `v` of the period's recorded ports (`stride` values a sample, the stages'
// outputs first), and its clean region.
std::vector<stage_point> analyse_stages(const network& net, const Eigen::VectorXd& op_x, const steady_state_result& ss,
                                        const std::vector<double>& v, std::size_t stride, const dsp::real_fft& fft,
                                        double fs_hz, int cycles, const dsp::coherent_settings& cs) {
  const std::size_t ns = net.stages.size(), m = v.size() / stride;
  std::vector<stage_point> out(ns);
  std::vector<double> record(m);
  for (std::size_t k = 0; k < ns; ++k) {
    for (std::size_t n = 0; n < m; ++n) record[n] = v[n * stride + k];
    const dsp::harmonic_analysis h = dsp::analyse_coherent(fft, record, fs_hz, static_cast<std::size_t>(cycles), cs);
    stage_point& sp = out[k];
    sp.output_vpk = h.fundamental_vpk;
    sp.thd_ratio = h.thd_ratio;
    sp.thd_percent = h.thd_percent;
    sp.thd_db = h.thd_db;
    sp.harmonics_dbc = h.harmonics_dbc;
    sp.tap_shift_v = std::numeric_limits<double>::quiet_NaN();
    const int j = net.stages[k].jfet;
    const net_jfet& q = net.jfets[static_cast<std::size_t>(j)];
    const double rest_vgs = node_v(op_x, q.gate) - node_v(op_x, q.source);
    sp.bias_shift_v = net.sign * (judge_clean(net, j, ss.ports_network_v, sp) - rest_vgs);
  }
  return out;
}

// The mean of probe `column` over the trace `v` (`stride` values a sample).
double trace_mean(const std::vector<double>& v, std::size_t stride, std::size_t column) {
  double sum = 0.0;
  std::size_t n = 0;
  for (std::size_t i = column; i < v.size(); i += stride, ++n) sum += v[i];
  return n ? sum / static_cast<double>(n) : 0.0;
}

}  // namespace

sweep_result run_sweep(const stage& st, const sweep_plan& plan) {
  const sweep_settings& s = plan.settings();
  sweep_result res;
  res.requested_hz = s.frequency_hz;
  res.oversample = s.oversample;
  res.sample_rate_hz = plan.sample_rate_hz();
  res.cycles = s.cycles;
  res.samples_per_record = plan.samples_per_record();
  res.frequency_hz = plan.frequency_hz();

  const network net = build_network(st);
  const operating_point op = solve_operating_point(net);
  const double rest_vgs = op.at.vgs_v;
  dsp::coherent_settings cs;
  cs.harmonics = s.harmonics;
  cs.bandwidth_hz = s.bandwidth_hz;

  res.points.resize(s.drives_vpk.size());
  for (int i : s.keep_records)
    if (i < 0 || static_cast<std::size_t>(i) >= s.drives_vpk.size()) throw internal_error("sweep: kept record out of range");
  // A chain's stages, when asked: probes of their outputs, then of every stage's output tap
  // when asked, shared by every point (const).
  const bool per_stage = s.per_stage && net.stages.size() > 1;
  const std::size_t nst = net.stages.size();
  std::vector<int> nodes;
  if (per_stage)
    for (const net_stage& ns : net.stages) nodes.push_back(ns.output);
  const std::size_t tap_column = nodes.size();
  if (s.taps)
    for (const net_stage& ns : net.stages) nodes.push_back(ns.output_tap);
  std::optional<dk_probes> probes;
  if (!nodes.empty()) probes.emplace(net, nodes, res.sample_rate_hz);
  std::vector<double> rest_tap_v;  // real volts
  for (std::size_t k = 0; s.taps && k < nst; ++k) rest_tap_v.push_back(net.sign * node_v(op.x, net.stages[k].output_tap));
  const int stages_probed = static_cast<int>((nodes.size() + 1) / 2);
  // One transform plan for every point (its forward() is thread-safe); each point on its own
  // engine. Points run at once only as many as fit the working memory.
  const dsp::real_fft fft(static_cast<std::size_t>(res.samples_per_record));
  const int threads = concurrent_points(s.threads, res.samples_per_record, stages_probed);
  // Each drive's shooting starts from the periodic state of the drive before it, in runs of
  // a fixed length (so that the figures do not depend on the number of threads); the first
  // of a run starts from the DC state.
  constexpr int run_length = 5;
  const int n_points = static_cast<int>(s.drives_vpk.size());
  // The start is extrapolated linearly in the drive's amplitude from the two drives before
  // (exact where the stage is linear: the periodic state's offset from DC scales with the
  // drive), and shooting begins with chord steps on the monodromy the drive before ended
  // with (steady_state_options::start_monodromy). Only from a drive within 3.5 dB (the
  // default sweep steps by 2.5 dB): from 6 dB and more a start from DC tracked fewer
  // periods on the three-stage preset (9 against 13 over 8 drives, 0.01 to 2 V).
  constexpr double max_warm_step = 1.5;
  struct warm_start {
    double drive_vpk{};
    Eigen::VectorXd state;      // the drive's periodic state
    Eigen::MatrixXd monodromy;  // and the monodromy its last correction used
  };
  const auto point = [&](int i, warm_start& before, warm_start& last) {
    dk_engine eng(net, op, res.sample_rate_hz);
    steady_state_options so;
    so.cycles = s.cycles;
    const double drive = s.drives_vpk[static_cast<std::size_t>(i)];
    if (last.state.size() != 0 && std::max(drive / last.drive_vpk, last.drive_vpk / drive) <= max_warm_step) {
      so.start_from = last.state;
      so.start_monodromy = last.monodromy;
      if (before.state.size() != 0 && last.drive_vpk != before.drive_vpk) {
        const double t = std::clamp((drive - last.drive_vpk) / (last.drive_vpk - before.drive_vpk), 0.0, 2.0);
        so.start_from += t * (last.state - before.state);
      }
    }
    steady_state_result ss;
    std::vector<double> period;
    if (probes) {
      // The drive periodic_steady_state makes of the amplitude, sample for sample, kept to
      // trace the probes.
      const int m = res.samples_per_record;
      period.resize(static_cast<std::size_t>(m));
      for (int n = 0; n < m; ++n)
        period[static_cast<std::size_t>(n)] = drive * std::sin(2.0 * std::numbers::pi * double(so.cycles) * n / m);
      so.record_ports = true;
      ss = periodic_steady_state(eng, period, so);
    } else {
      ss = periodic_steady_state(eng, drive, res.samples_per_record, so);
    }
    const dsp::harmonic_analysis h = dsp::analyse_coherent(fft, ss.output_v, res.sample_rate_hz, s.cycles, cs);
    sweep_point& p = res.points[static_cast<std::size_t>(i)];
    p.drive_vpk = drive;
    p.output_vpk = h.fundamental_vpk;
    p.gain_db = base::db_from_ratio(h.fundamental_vpk / drive);
    p.thd_ratio = h.thd_ratio;
    p.thd_percent = h.thd_percent;
    p.thd_db = h.thd_db;
    p.harmonics_dbc = h.harmonics_dbc;
    p.alias_dbc = h.alias_dbc;
    p.even_odd_ratio = h.even_odd_ratio;
    p.dc_shift_v = ss.mean_output_v - eng.dc_output_v();
    if (i == 0) res.rest_output_v = eng.dc_output_v();  // the same for every point; written once
    p.tap_shift_v = std::numeric_limits<double>::quiet_NaN();
    if (std::find(s.keep_records.begin(), s.keep_records.end(), i) != s.keep_records.end()) p.record_v = ss.output_v;
    p.bias_shift_v = ss.mean_vgs_v - rest_vgs;
    p.state_change_v = ss.state_change_v;
    p.shooting_iterations = ss.shooting_iterations;
    p.periods_simulated = ss.periods_simulated;
    p.periods_tracked = ss.periods_tracked;
    p.converged = ss.converged;
    p.used_settling = ss.used_settling;
    p.newton = ss.engine;
    if (probes) {
      const std::vector<double> v = probes->trace(ss.start_state, period, ss.ports_network_v);
      const std::size_t stride = nodes.size();
      if (per_stage) p.stages = analyse_stages(net, op.x, ss, v, stride, fft, res.sample_rate_hz, s.cycles, cs);
      if (s.taps) {
        for (std::size_t k = 0; per_stage && k < nst; ++k)
          p.stages[k].tap_shift_v = trace_mean(v, stride, tap_column + k) - rest_tap_v[k];
        p.tap_shift_v = trace_mean(v, stride, tap_column + nst - 1) - rest_tap_v[nst - 1];
      }
    }
    before = std::move(last);
    last = ss.converged ? warm_start{drive, ss.periodic_state, ss.monodromy} : warm_start{};
  };
  // The runs go to the threads as they come free (the high drives' runs cost more): which
  // thread runs a run changes nothing in it.
  const int n_runs = (n_points + run_length - 1) / run_length;
  std::atomic<int> next_run{0};
  base::parallel_for(std::min(threads, n_runs), threads, [&](int) {
    for (int run = next_run++; run < n_runs; run = next_run++) {
      warm_start before, last;
      for (int i = run * run_length; i < std::min(n_points, (run + 1) * run_length); ++i) point(i, before, last);
    }
  });


  // THD crossings, on the points sorted by drive.
  std::vector<const sweep_point*> sorted;
  for (const sweep_point& p : res.points) sorted.push_back(&p);
  std::sort(sorted.begin(), sorted.end(), [](const sweep_point* a, const sweep_point* b) { return a->drive_vpk < b->drive_vpk; });
  for (double level : {1.0, 3.0, 10.0}) {
    thd_crossing c;
    c.thd_percent = level;
    for (std::size_t k = 0; k + 1 < sorted.size(); ++k) {
      const sweep_point& a = *sorted[k];
      const sweep_point& b = *sorted[k + 1];
      if (a.thd_percent < level && b.thd_percent >= level && a.thd_percent > 0) {
        const double t = (std::log(level) - std::log(a.thd_percent)) / (std::log(b.thd_percent) - std::log(a.thd_percent));
        c.found = true;
        c.drive_vpk = std::exp(std::log(a.drive_vpk) + t * (std::log(b.drive_vpk) - std::log(a.drive_vpk)));
        c.output_vpk = std::exp(std::log(a.output_vpk) + t * (std::log(b.output_vpk) - std::log(a.output_vpk)));
        break;
      }
    }
    res.crossings.push_back(c);
  }
  // Each stage's first drive out of its clean region.
  if (per_stage)
    for (std::size_t k = 0; k < net.stages.size(); ++k) {
      stage_sweep ss;
      ss.label = net.stages[k].label;
      const sweep_point* below = nullptr;  // the last clean point before the first unclean one
      for (const sweep_point* p : sorted) {
        if (!p->stages[k].clean) {
          ss.leaves_clean = true;
          ss.first_unclean_drive_vpk = p->drive_vpk;
          ss.leaves_clean_drive_vpk = p->drive_vpk;
          ss.limit = p->stages[k].limit;
          if (below) {
            // The margin falls nearly linearly with the drive's amplitude where a limit is
            // approached (the transfer curve smooth there); its zero between the two points.
            const double ma = below->stages[k].margin, mb = p->stages[k].margin;
            ss.last_clean_drive_vpk = below->drive_vpk;
            if (ma > 0.0 && mb < ma) {
              const double t = std::clamp(ma / (ma - mb), 0.0, 1.0);
              ss.leaves_clean_drive_vpk = below->drive_vpk + t * (p->drive_vpk - below->drive_vpk);
            }
          }
          break;
        }
        below = p;
      }
      res.stages.push_back(ss);
    }
  return res;
}

period_trace fold_period(const sweep_point& p, const sweep_result& r, std::size_t max_points) {
  period_trace t;
  const std::size_t m = p.record_v.size();
  if (m == 0 || r.cycles < 1) return t;
  // Sample n sits at phase (K n mod M) / M of the fundamental; with M coprime with K the
  // map n -> K n mod M is a permutation, so phase slot j holds sample n = j K^-1 mod M.
  std::vector<std::size_t> at(m);
  for (std::size_t n = 0; n < m; ++n) at[(static_cast<std::size_t>(r.cycles) * n) % m] = n;
  const std::size_t step = std::max<std::size_t>(1, (m + max_points - 1) / std::max<std::size_t>(1, max_points));
  for (std::size_t j = 0; j < m; j += step) {
    const std::size_t n = at[j];
    const double phase = static_cast<double>(j) / static_cast<double>(m);
    t.phase.push_back(phase);
    t.generator_v.push_back(p.drive_vpk * std::sin(2.0 * std::numbers::pi * phase));
    t.output_v.push_back(p.record_v[n] - r.rest_output_v);
  }
  return t;
}

}  // namespace pinchoff::model
