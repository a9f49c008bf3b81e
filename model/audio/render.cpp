#include "model/audio/render.hpp"

#include <algorithm>
#include <chrono>
#include <cmath>
#include <exception>
#include <limits>
#include <thread>

#include "base/error.hpp"
#include "base/threads.hpp"
#include "dsp/loudness.hpp"
#include "dsp/shaped_noise.hpp"
#include "dsp/io/sample_spool.hpp"
#include "base/units.hpp"
#include "model/analysis/headroom.hpp"
#include "model/analysis/noise.hpp"
#include "model/engine/dk_acceptance.hpp"

namespace pinchoff::model {
namespace fs = std::filesystem;

// ---------------------------------------------------------------------------------------
// One channel

channel_renderer::channel_renderer(const network& net, const operating_point& op, int factor, double base_rate_hz,
                                   std::size_t block_samples, const dk_options& engine)
    : os_(factor, base_rate_hz),
      engine_(net, op, base_rate_hz * factor, engine),
      rest_v_(engine_.dc_output_v()),
      latency_(os_.latency_base_samples()),
      block_(std::max<std::size_t>(block_samples, 1)),
      high_(block_ * static_cast<std::size_t>(factor)),
      low_(block_),
      zeros_(std::max<std::size_t>(1, std::min<std::size_t>(block_, static_cast<std::size_t>(latency_))), 0.0),
      to_skip_(latency_) {}

std::size_t channel_renderer::run(std::span<const double> in_v, std::span<double> out_v) {
  std::size_t written = 0;
  while (!in_v.empty()) {
    const std::size_t n = std::min(in_v.size(), block_);
    const std::span<double> high = std::span<double>(high_).first(n * static_cast<std::size_t>(os_.factor()));
    const std::span<double> low = std::span<double>(low_).first(n);
    os_.upsample(in_v.first(n), high);
    engine_.process(high, high);
    for (double& y : high) y -= rest_v_;
    os_.downsample(high, low);
    for (double y : low)
      if (!std::isfinite(y))
        throw internal_error("the engine's output became non-finite after " + std::to_string(engine_.stats().failed) +
                             " samples whose Newton solve failed; the render is abandoned");
    const std::size_t skip = static_cast<std::size_t>(std::min<long long>(to_skip_, static_cast<long long>(n)));
    to_skip_ -= static_cast<long long>(skip);
    std::copy(low.begin() + static_cast<std::ptrdiff_t>(skip), low.end(), out_v.begin() + static_cast<std::ptrdiff_t>(written));
    written += n - skip;
    in_v = in_v.subspan(n);
  }
  return written;
}

std::size_t channel_renderer::process(std::span<const double> in_v, std::span<double> out_v) {
  if (out_v.size() < in_v.size()) throw internal_error("channel_renderer: output block smaller than the input block");
  const std::size_t n = run(in_v, out_v);
  fed_ += static_cast<long long>(in_v.size());
  produced_ += static_cast<long long>(n);
  return n;
}

std::size_t channel_renderer::finish(std::span<double> out_v) {
  if (finished_) return 0;
  const auto owed = static_cast<std::size_t>(fed_ - produced_);
  if (out_v.size() < owed) throw internal_error("channel_renderer: output block smaller than the latency");
  // latency_ zeros bring the outputs up to the inputs: fed + latency - latency = fed.
  std::size_t got = 0;
  for (long long left = latency_; left > 0;) {
    const std::size_t n = std::min(static_cast<std::size_t>(left), zeros_.size());
    got += run(std::span<const double>(zeros_).first(n), out_v.subspan(got));
    left -= static_cast<long long>(n);
  }
  if (got != owed) throw internal_error("channel_renderer: the tail came out " + std::to_string(got) + " samples long, not " +
                                        std::to_string(owed));
  produced_ += static_cast<long long>(got);
  finished_ = true;
  return got;
}

// ---------------------------------------------------------------------------------------
// Loudness matching

std::vector<double> loudness_matched_scales(std::span<const double> loudness_lufs, std::span<const double> peak,
                                            double ceiling, double& target_lufs) {
  if (loudness_lufs.size() != peak.size()) throw internal_error("loudness_matched_scales: sizes differ");
  // Each output alone, peak at the ceiling, would read loudness + 20 log10(ceiling / peak);
  // the quietest of those is the loudness all can reach.
  target_lufs = std::numeric_limits<double>::infinity();
  for (std::size_t i = 0; i < peak.size(); ++i)
    if (std::isfinite(loudness_lufs[i]) && peak[i] > 0.0)
      target_lufs = std::min(target_lufs, loudness_lufs[i] + base::db_from_ratio(ceiling / peak[i]));
  if (!std::isfinite(target_lufs)) target_lufs = -std::numeric_limits<double>::infinity();
  std::vector<double> scales(peak.size());
  for (std::size_t i = 0; i < peak.size(); ++i) {
    if (std::isfinite(loudness_lufs[i]) && peak[i] > 0.0) scales[i] = base::ratio_from_db(target_lufs - loudness_lufs[i]);
    else scales[i] = peak[i] > 0.0 ? ceiling / peak[i] : 0.0;
  }
  return scales;
}

// ---------------------------------------------------------------------------------------
// The job, phase by phase: check the job; open the input; choose the oversampling; plan
// (every writer, the units, the spools and meters); the first pass (render and meter,
// into the spools or, at a fixed scale, into the files); the scales (normalise or match
// loudness); the second pass (scale the spooled volts into the files); the report
// (figures of the written values, then commit).

namespace {

using clock_type = std::chrono::steady_clock;

// The input's range: the loudness meter's and the writer's top rate (dsp/loudness.hpp,
// dsp/io/sound_file.hpp), and their channel count.
constexpr double max_input_rate_hz = 768000.0;
constexpr int max_input_channels = 64;

void check_stop(const render_control& c) {
  if (c.stop && c.stop->load(std::memory_order_relaxed)) throw interrupted("interrupted; no output written");
}

// With an SI prefix where one fits (1.00 µV, 2.00 kV), else plain (1e+300 V).
std::string quantity_text(double v, const char* unit) {
  const double a = std::fabs(v);
  return a >= 1e-15 && a < 1e15 ? base::format_si(v, unit) : base::format_number(v) + " " + unit;
}

// Scales interleaved `values` in place, channel c by gains[c], and counts the samples a
// float file keeps beyond full scale.
long long scale_and_count(std::span<double> values, std::span<const double> gains) {
  long long beyond = 0;
  const std::size_t ch = gains.size();
  for (std::size_t i = 0; i + ch <= values.size(); i += ch)
    for (std::size_t c = 0; c < ch; ++c) {
      double& v = values[i + c];
      v *= gains[c];
      beyond += std::abs(v) > 1.0;
    }
  return beyond;
}

// Adds the next frames of stage s's noise streams to interleaved `values`, channel c times
// gains[c] (volts at the load: 1).
void add_noise(std::vector<dsp::shaped_noise>& hiss, std::size_t s, std::span<double> values,
               std::span<const double> gains, std::vector<double>& buf) {
  const std::size_t ch = gains.size(), frames = values.size() / ch;
  if (buf.size() < frames) buf.resize(frames);
  for (std::size_t c = 0; c < ch; ++c) {
    hiss[s * ch + c].generate(std::span<double>(buf).first(frames));
    for (std::size_t k = 0; k < frames; ++k) values[k * ch + c] += gains[c] * buf[k];
  }
}

// Counts the samples of `values` beyond full scale.
long long count_beyond(std::span<const double> values) {
  long long beyond = 0;
  for (double v : values) beyond += std::abs(v) > 1.0;
  return beyond;
}

// Raises peaks[c] to the largest |value| of channel c in interleaved `values`.
void track_peaks(std::span<const double> values, std::vector<double>& peaks) {
  const std::size_t ch = peaks.size();
  for (std::size_t i = 0; i + ch <= values.size(); i += ch)
    for (std::size_t c = 0; c < ch; ++c) peaks[c] = std::max(peaks[c], std::abs(values[i + c]));
}

std::size_t output_count(const render_job& job) { return job.stages.size() + (job.dry_output ? 1 : 0); }

const fs::path& output_path(const render_job& job, std::size_t i) {
  return i < job.stages.size() ? job.stages[i].output : *job.dry_output;
}

// ---- Phase: check the job. Each value is checked here and nowhere else; the fields are
// named as render_job names them, for cli/ to map to its options.
void check_job(const render_job& job) {
  if (job.stages.empty()) throw input_error("render: no stage given");
  if (!(job.input_peak_v > 0.0) || !std::isfinite(job.input_peak_v))
    throw setting_error("input_peak_v", "the input's full scale must stand for a level above 0 V, got " +
                                            base::format_number(job.input_peak_v));
  // Beyond these no audio source or load is met (common practice), and the arithmetic
  // would run out of range (a full scale of 1e-300 V lifts a volt to 1e300).
  if (!(job.input_peak_v >= 1e-6 && job.input_peak_v <= 1e3))
    throw setting_error("input_peak_v", "the input's full scale must stand for 1 µV to 1 kV peak at the generator, got " +
                                            quantity_text(job.input_peak_v, "V"));
  if (job.oversample < 0 || job.oversample > 64 || (job.oversample & (job.oversample - 1)) != 0)
    throw setting_error("oversampling",
                        "oversampling must be 1, 2, 4, 8, 16, 32, 64 or auto, got " + std::to_string(job.oversample));
  if (job.level == output_level::fixed && !(job.full_scale_v > 0.0 && std::isfinite(job.full_scale_v)))
    throw setting_error("full_scale_v", "the full-scale level at the load must be above 0 V, got " +
                                            base::format_number(job.full_scale_v));
  if (job.level == output_level::fixed && !(job.full_scale_v >= 1e-6 && job.full_scale_v <= 1e4))
    throw setting_error("full_scale_v", "the full-scale level at the load must be 1 µV to 10 kV peak, got " +
                                            quantity_text(job.full_scale_v, "V"));
  if (!(job.peak_dbfs <= 0.0))
    throw setting_error("peak_dbfs", "a peak of " + base::format_number(job.peak_dbfs) +
                                         " dBFS is above full scale (the peak must be -100 to 0 dBFS)");
  if (!(job.peak_dbfs >= -100.0))
    throw setting_error("peak_dbfs", "a peak of " + base::format_number(job.peak_dbfs) +
                                         " dBFS is below -100 dBFS (the peak must be -100 to 0 dBFS)");
  const std::size_t outputs = output_count(job);
  if (job.level == output_level::fixed && outputs > 1) {
    const std::size_t n = job.stages.size();
    throw setting_error("level", "a fixed scale is for one output; several outputs (" + std::to_string(n) +
                                     (n == 1 ? " design" : " designs") + (job.dry_output ? " and the dry input" : "") +
                                     ") are loudness-matched instead");
  }
  if (job.level == output_level::fixed && job.match_loudness)
    throw setting_error("level", "a fixed scale and loudness matching exclude each other");
  if (job.block_frames < 1) throw internal_error("render: block_frames must be at least 1");
  std::vector<fs::path> seen;
  std::error_code ec;
  for (std::size_t i = 0; i < outputs; ++i) {
    const fs::path& p = output_path(job, i);
    const fs::path canon = fs::weakly_canonical(fs::absolute(p, ec), ec);
    if (std::find(seen.begin(), seen.end(), canon) != seen.end())
      throw input_error("two outputs would both be written to " + quoted_path(p) + " (stage files with the same name?)");
    seen.push_back(canon);
  }
}

// ---- Phase: open the input, refusing one that is not a file (it is read more than once),
// holds no audio, or whose rate or channels lie outside what render takes.
dsp::sound_reader open_input(const fs::path& input) {
  dsp::require_seekable_file(input, "render reads its input more than once (survey, passes)");
  dsp::sound_reader reader = dsp::sound_reader::open(input);
  const dsp::sound_info& info = reader.info();
  if (info.frames <= 0) throw input_error(quoted_path(input) + " holds no audio");
  if (!(info.rate_hz > 40000.0))
    throw input_error(quoted_path(input) + " is at " + base::format_number(info.rate_hz, 6) +
                      " Hz; render needs 44.1 kHz or more (the oversampler keeps 0 to 20 kHz flat and free of "
                      "aliases, which needs a rate above 40 kHz)");
  if (info.rate_hz > max_input_rate_hz)
    throw input_error(quoted_path(input) + " says it is sampled at " + base::format_number(info.rate_hz, 6) +
                      " Hz; render takes 44.1 to 768 kHz (768 kHz is the highest rate audio converters and the "
                      "loudness meter take, and 64x of it already runs the engine at 49 MHz): is the header damaged?");
  if (info.channels > max_input_channels)
    throw input_error(quoted_path(input) + " has " + std::to_string(info.channels) + " channels; render takes 1 to " +
                      std::to_string(max_input_channels) + " (one engine per channel and stage)");
  return reader;
}

// ---- Phase: choose the oversampling (the job's factor, or one chosen from the input).
void choose_factor(const render_job& job, const render_control& control, render_report& rep) {
  rep.oversample = job.oversample;
  if (job.oversample == 0) {
    rep.oversample_chosen = true;
    rep.survey = survey_input(job.input, control.stop);
    check_stop(control);
    std::vector<stage_ref> refs;
    for (const render_stage& st : job.stages) refs.push_back({&st.net, &st.op});
    // An input below the silence floor is rendered as silence: no probe for it.
    const double drive_vpk = rep.survey.sample_peak * job.input_peak_v;
    rep.choice = choose_oversampling(refs, drive_vpk > render_floor_v(job.engine) ? drive_vpk : 0.0, rep.survey.edge_hz,
                                     rep.input.rate_hz, -80.0, control.stop);
    rep.oversample = rep.choice.factor;
  }
  rep.engine_rate_hz = rep.input.rate_hz * rep.oversample;
}

// What the passes share: the job's sizes, every writer, unit, spool and meter, and the
// progress accounting.
struct render_plan {
  const render_job* job;
  const render_control* control;
  clock_type::time_point t0;
  dsp::sound_info info;
  std::size_t ch{}, n_stages{}, n_outputs{}, n_units{}, block{};
  bool two_pass{};
  double fixed_scale{};
  std::vector<dsp::sound_writer> writers;
  std::vector<channel_renderer> units;
  std::vector<dsp::sample_spool> spools;        // two passes: the volts of each stage
  std::vector<dsp::loudness_meter> meters;      // pass 1: on volts (two passes) or on the written values (fixed)
  std::vector<double> input_peak_v;             // per input channel, volts at the generator
  std::vector<std::vector<double>> peak_v;      // per output and channel, pass-1 volts
  std::vector<std::vector<double>> gains;       // per output and channel: the scale, or 0 below the floor
  // Modelled noise (job.noise): one stream per unit, its gain per stage and channel (the
  // output's scale, or the clean swing's for a silent output), pass-2 meters of the written
  // values, and a buffer.
  std::vector<dsp::shaped_noise> hiss;
  std::vector<std::vector<double>> noise_gains;
  std::vector<dsp::loudness_meter> written_meters;
  std::vector<double> noise_block;
  // Progress: pass 1 costs a frame per unit-frame of engine work; a pass-2 frame of one
  // output (read, scale, write) is far cheaper (about 1/20 of an 8x engine frame).
  double total_frames{}, pass2_weight{}, total_work{};

  void report_progress(double work_done, double frames_rendered) const {
    if (!control->progress) return;
    const double elapsed = std::chrono::duration<double>(clock_type::now() - t0).count();
    render_progress p;
    p.fraction = std::clamp(work_done / total_work, 0.0, 1.0);
    p.realtime_factor = elapsed > 0 ? frames_rendered / info.rate_hz / elapsed : 0.0;
    p.seconds_left = p.fraction > 0 ? elapsed * (1.0 - p.fraction) / p.fraction : 0.0;
    control->progress(p);
  }
};

// The shape of a stage's noise at the load for a file at rate_hz: the output density of
// model/analysis/noise.hpp on the bins of dsp::shaped_noise_length(rate_hz), from 48 points
// a decade interpolated in log-log (a first-order corner, the sharpest shape a stage's
// noise has, bends by at most 1 in ln S per (ln f)^2, so the interpolation errs by under
// 0.15 % at this spacing); the DC bin takes the lowest bin's value.
std::shared_ptr<const dsp::noise_shape> stage_noise_shape(const render_stage& st, double rate_hz) {
  const std::vector<noise_source> sources = noise_sources(st.net, st.op);
  const std::size_t n = dsp::shaped_noise_length(rate_hz);
  const double lo = rate_hz / static_cast<double>(n), hi = rate_hz / 2.0;
  const int points = std::max(2, static_cast<int>(std::ceil(48.0 * std::log10(hi / lo))) + 1);
  std::vector<double> lf(static_cast<std::size_t>(points)), ls(lf.size());
  for (int i = 0; i < points; ++i) {
    const double f = lo * std::pow(hi / lo, static_cast<double>(i) / (points - 1));
    lf[static_cast<std::size_t>(i)] = std::log(f);
    // A density of exactly 0 (no source reaches the load) stays 0 through the interpolation.
    ls[static_cast<std::size_t>(i)] = std::log(std::max(noise_at(st.net, st.op, sources, f).output_v2_hz, 1e-300));
  }
  std::vector<double> density(n / 2 + 1, 0.0);
  std::size_t j = 0;
  for (std::size_t k = 1; k < density.size(); ++k) {
    const double x = std::log(static_cast<double>(k) * lo);
    while (j + 2 < lf.size() && lf[j + 1] < x) ++j;
    const double t = std::clamp((x - lf[j]) / (lf[j + 1] - lf[j]), 0.0, 1.0);
    const double v = std::exp(ls[j] + t * (ls[j + 1] - ls[j]));
    density[k] = v > 1e-290 ? v : 0.0;
  }
  density[0] = density[1];  // continued to DC: a notch there would leak through the taper (dsp/shaped_noise.hpp)
  return std::make_shared<const dsp::noise_shape>(density, rate_hz);
}

// ---- Phase: plan. Every writer first: an output that is the input or exists is refused
// before any work. Then one unit per (stage, channel), the threads, spools and meters.
render_plan plan_render(const render_job& job, const render_control& control, clock_type::time_point t0,
                        render_report& rep) {
  render_plan p;
  p.job = &job;
  p.control = &control;
  p.t0 = t0;
  p.info = rep.input;
  p.ch = static_cast<std::size_t>(p.info.channels);
  p.n_stages = job.stages.size();
  p.n_outputs = output_count(job);
  p.n_units = p.n_stages * p.ch;
  p.two_pass = job.level == output_level::normalize;
  p.block = job.block_frames;

  dsp::write_settings ws;
  ws.rate_hz = p.info.rate_hz;
  ws.channels = p.info.channels;
  ws.format = rep.format;
  ws.tpdf_dither = dsp::quantisation_bits(rep.format) > 0;  // rounding as noise, not distortion
  ws.overwrite = job.overwrite;
  ws.inputs = {job.input};
  for (std::size_t i = 0; i < p.n_outputs; ++i) p.writers.push_back(dsp::sound_writer::create(output_path(job, i), ws));

  p.units.reserve(p.n_units);
  for (const render_stage& st : job.stages)
    for (std::size_t c = 0; c < p.ch; ++c)
      p.units.emplace_back(st.net, st.op, rep.oversample, p.info.rate_hz, p.block, job.engine);
  rep.latency_samples = p.units.front().latency_samples();
  const unsigned cores = std::max(1u, std::thread::hardware_concurrency());
  const std::size_t asked = job.threads > 0 ? static_cast<std::size_t>(job.threads) : cores;
  rep.threads = static_cast<int>(std::min<std::size_t>(asked, std::max<std::size_t>(p.n_units, 1)));
  // With more than one thread, the engines of block i run on their own threads while the
  // calling thread meters and spools block i - 1 (the same work in the same order, so the
  // files do not change).
  rep.pipelined = asked > 1;
  if (p.two_pass)
    for (std::size_t s = 0; s < p.n_stages; ++s) p.spools.push_back(dsp::sample_spool::create(job.stages[s].output));
  for (std::size_t i = 0; i < p.n_outputs; ++i) p.meters.emplace_back(p.info.channels, p.info.rate_hz);
  p.input_peak_v.assign(p.ch, 0.0);
  p.peak_v.assign(p.n_outputs, std::vector<double>(p.ch, 0.0));
  p.gains.assign(p.n_outputs, std::vector<double>(p.ch, 1.0 / job.full_scale_v));
  for (std::size_t s = 0; s < p.n_stages; ++s)
    if (job.stages[s].invert) std::fill(p.gains[s].begin(), p.gains[s].end(), -1.0 / job.full_scale_v);

  rep.outputs.resize(p.n_outputs);
  for (std::size_t i = 0; i < p.n_outputs; ++i) {
    output_report& o = rep.outputs[i];
    o.is_dry = i >= p.n_stages;
    o.path = output_path(job, i);
    o.name = o.is_dry ? "dry" : job.stages[i].name;
  }
  p.fixed_scale = 1.0 / job.full_scale_v;
  if (job.noise) {
    p.hiss.reserve(p.n_units);
    for (std::size_t s = 0; s < p.n_stages; ++s) {
      const auto shape = stage_noise_shape(job.stages[s], p.info.rate_hz);
      rep.outputs[s].noise_rms_v = std::sqrt(shape->variance());
      for (std::size_t c = 0; c < p.ch; ++c) p.hiss.emplace_back(shape, dsp::stream_seed(job.noise_seed, s * p.ch + c));
    }
    p.noise_gains = std::vector<std::vector<double>>(p.gains.begin(), p.gains.begin() + static_cast<std::ptrdiff_t>(p.n_stages));
    for (std::size_t s = 0; s < p.n_stages; ++s) rep.outputs[s].noise_scale = p.fixed_scale;
    if (p.two_pass)
      for (std::size_t s = 0; s < p.n_stages; ++s) p.written_meters.emplace_back(p.info.channels, p.info.rate_hz);
    p.noise_block.resize(p.block + static_cast<std::size_t>(rep.latency_samples));
  }

  p.total_frames = static_cast<double>(p.info.frames);
  // The engine's share scales with the factor; pass 2 does not.
  p.pass2_weight = p.two_pass ? 0.05 * (8.0 / rep.oversample) * static_cast<double>(p.n_outputs) /
                                    static_cast<double>(p.n_units)
                              : 0.0;
  p.total_work = p.total_frames * (1.0 + p.pass2_weight);
  return p;
}

// One set of unit outputs: one set is rendered while the other is consumed.
struct unit_outputs {
  std::vector<std::vector<double>> samples;  // per unit
  std::vector<std::size_t> produced;         // per unit
};

// Interleaves, meters and stores one set of unit outputs (in block order): into the spools
// (two passes) or, scaled, into the files (fixed).
void store_block(render_plan& p, const unit_outputs& set, std::vector<double>& stage_frames, render_report& rep) {
  const std::size_t ch = p.ch;
  for (std::size_t s = 0; s < p.n_stages; ++s) {
    const std::size_t m = set.produced[s * ch];
    for (std::size_t c = 0; c < ch; ++c)
      if (set.produced[s * ch + c] != m) throw internal_error("render: channels of one stage went out of step");
    for (std::size_t c = 0; c < ch; ++c) {
      const double* o = set.samples[s * ch + c].data();
      for (std::size_t k = 0; k < m; ++k) stage_frames[k * ch + c] = o[k];
    }
    const std::span<double> v = std::span<double>(stage_frames).first(m * ch);
    track_peaks(v, p.peak_v[s]);
    if (p.two_pass) {
      p.meters[s].add(v);
      p.spools[s].write(v);
    } else {
      // The peak above is the noiseless output's; the noise goes in, in volts, before the scale.
      if (p.job->noise) add_noise(p.hiss, s, v, std::vector<double>(ch, 1.0), p.noise_block);
      rep.outputs[s].clipped_samples += scale_and_count(v, p.gains[s]);
      p.meters[s].add(v);
      p.writers[s].write(v);
    }
  }
}

// ---- Phase: the first pass. Renders every unit block by block, meters the dry input, and
// stores the stages' blocks (store_block).
void first_pass(render_plan& p, dsp::sound_reader& reader, render_report& rep) {
  const render_job& job = *p.job;
  const std::size_t ch = p.ch, block = p.block, n_units = p.n_units;
  std::vector<double> frames(block * ch);
  std::vector<std::vector<double>> in(ch, std::vector<double>(block));
  const std::size_t out_size = std::max<std::size_t>(block, static_cast<std::size_t>(rep.latency_samples));
  unit_outputs out[2] = {
      {std::vector<std::vector<double>>(n_units, std::vector<double>(out_size)), std::vector<std::size_t>(n_units)},
      {std::vector<std::vector<double>>(rep.pipelined ? n_units : 0, std::vector<double>(out_size)),
       std::vector<std::size_t>(n_units)}};
  std::vector<double> stage_frames(out_size * ch);
  std::vector<double> dry_frames(block * ch);
  std::int64_t read_frames = 0;
  bool input_done = false, have_previous = false;
  int set = 0;
  while (!input_done) {
    check_stop(*p.control);
    const std::size_t n = reader.read(frames);
    if (n > 0) {
      for (std::size_t k = 0; k < n; ++k)
        for (std::size_t c = 0; c < ch; ++c) {
          in[c][k] = frames[k * ch + c] * job.input_peak_v;
          p.input_peak_v[c] = std::max(p.input_peak_v[c], std::abs(in[c][k]));
        }
      if (job.dry_output) {
        for (std::size_t i = 0; i < n * ch; ++i) dry_frames[i] = frames[i] * job.input_peak_v;
        p.meters[p.n_stages].add(std::span<const double>(dry_frames).first(n * ch));
      }
      read_frames += static_cast<std::int64_t>(n);
    } else {
      input_done = true;
    }
    unit_outputs& now = out[set];
    // A unit that starts after a stop does nothing: many units a block (stages times
    // channels) would otherwise delay the stop by the whole block.
    auto work = [&p, &in, &now, ch, n](std::size_t u) {
      if (p.control->stop && p.control->stop->load(std::memory_order_relaxed)) return;
      now.produced[u] = n > 0 ? p.units[u].process(std::span<const double>(in[u % ch]).first(n), now.samples[u])
                              : p.units[u].finish(now.samples[u]);
    };
    if (rep.pipelined) {
      base::run_beside(n_units, rep.threads, work, [&] {
        if (have_previous) store_block(p, out[1 - set], stage_frames, rep);
      });
      check_stop(*p.control);
      have_previous = true;
      if (input_done) store_block(p, out[set], stage_frames, rep);
      set = 1 - set;
    } else {
      base::run_parallel(n_units, 1, work);
      check_stop(*p.control);
      store_block(p, out[set], stage_frames, rep);
    }
    p.report_progress(static_cast<double>(read_frames), static_cast<double>(read_frames));
  }
  for (std::size_t s = 0; s < p.n_stages; ++s)
    for (std::size_t c = 0; c < ch; ++c) rep.outputs[s].engine += p.units[s * ch + c].engine_stats();
  if (job.dry_output) p.peak_v[p.n_stages] = p.input_peak_v;
}

// ---- Phase: the scales. Fixed: the job's. Normalised: each output's peak at the ceiling,
// or, matching loudness, the common loudness no peak exceeds the ceiling at.
// Channels below the silence floor (render.hpp) take no part and are written as zeros.
void decide_scales(render_plan& p, render_report& rep) {
  const render_job& job = *p.job;
  rep.floor_v = render_floor_v(job.engine);
  rep.input_peak_v = *std::max_element(p.input_peak_v.begin(), p.input_peak_v.end());
  for (std::size_t i = 0; i < p.n_outputs; ++i)
    rep.outputs[i].peak_v = *std::max_element(p.peak_v[i].begin(), p.peak_v[i].end());
  if (!p.two_pass) {
    rep.outputs[0].scale = p.fixed_scale;
    return;
  }
  const double ceiling = base::ratio_from_db(job.peak_dbfs);
  std::vector<double> loud(p.n_outputs), peak(p.n_outputs, 0.0);
  for (std::size_t i = 0; i < p.n_outputs; ++i) {
    output_report& o = rep.outputs[i];
    bool input_below = true;
    for (std::size_t c = 0; c < p.ch; ++c) {
      const bool in_below = p.input_peak_v[c] <= rep.floor_v;
      input_below = input_below && in_below;
      if (in_below || p.peak_v[i][c] <= rep.floor_v) o.silent_channels.push_back(static_cast<int>(c) + 1);
      else peak[i] = std::max(peak[i], p.peak_v[i][c]);
    }
    o.silent = o.silent_channels.size() == p.ch;
    o.input_below_floor = o.silent && input_below;
    loud[i] = o.silent ? -std::numeric_limits<double>::infinity() : p.meters[i].integrated_lufs();
  }
  if (job.match_loudness && p.n_outputs > 1) {
    const std::vector<double> scales = loudness_matched_scales(loud, peak, ceiling, rep.target_lufs);
    for (std::size_t i = 0; i < p.n_outputs; ++i) {
      rep.outputs[i].scale = scales[i];
      rep.outputs[i].matched = std::isfinite(loud[i]) && peak[i] > 0.0;
    }
  } else {
    for (std::size_t i = 0; i < p.n_outputs; ++i) rep.outputs[i].scale = peak[i] > 0.0 ? ceiling / peak[i] : 0.0;
  }
  for (std::size_t i = 0; i < p.n_outputs; ++i) {
    const bool flip = i < p.n_stages && job.stages[i].invert;
    std::fill(p.gains[i].begin(), p.gains[i].end(), flip ? -rep.outputs[i].scale : rep.outputs[i].scale);
    for (const int c : rep.outputs[i].silent_channels) p.gains[i][static_cast<std::size_t>(c - 1)] = 0.0;
  }
  // The noise takes the output's scale on every channel, a silent one's too; an output with
  // no scale of its own (below the floor) is scaled as a signal at its clean swing would be.
  for (std::size_t s = 0; job.noise && s < p.n_stages; ++s) {
    output_report& o = rep.outputs[s];
    o.noise_scale = o.scale;
    if (!(o.noise_scale > 0.0)) {
      o.clean_swing_vpk = analyse_headroom(job.stages[s].net, job.stages[s].op, headroom_detail::swing_only).symmetric_output_vpk;
      o.noise_scale = o.clean_swing_vpk > 0.0 ? ceiling / o.clean_swing_vpk : 0.0;
      o.noise_scale_from_swing = true;
    }
    std::fill(p.noise_gains[s].begin(), p.noise_gains[s].end(), o.noise_scale);
  }
}

// ---- Phase: the second pass. Scales the spooled volts (and the input, for dry) into the files.
void second_pass(render_plan& p, render_report& rep) {
  const render_job& job = *p.job;
  const std::size_t ch = p.ch;
  double work = p.total_frames;
  const double per_frame = p.pass2_weight / static_cast<double>(p.n_outputs);
  std::vector<double> buf(p.block * ch);
  for (std::size_t i = 0; i < p.n_outputs; ++i) {
    output_report& o = rep.outputs[i];
    std::optional<dsp::sound_reader> again;
    if (o.is_dry) again.emplace(dsp::sound_reader::open(job.input));
    else p.spools[i].rewind();
    for (;;) {
      check_stop(*p.control);
      std::size_t n = 0;
      if (o.is_dry) {
        n = again->read(buf);
        for (std::size_t k = 0; k < n * ch; ++k) buf[k] *= job.input_peak_v;
      } else {
        n = p.spools[i].read(buf) / ch;
      }
      if (n == 0) break;
      const std::span<double> v = std::span<double>(buf).first(n * ch);
      if (job.noise && !o.is_dry) {
        scale_and_count(v, p.gains[i]);
        add_noise(p.hiss, i, v, p.noise_gains[i], p.noise_block);
        o.clipped_samples += count_beyond(v);
        p.written_meters[i].add(v);
      } else {
        o.clipped_samples += scale_and_count(v, p.gains[i]);
      }
      p.writers[i].write(v);
      work += static_cast<double>(n) * per_frame;
      p.report_progress(work, p.total_frames);
    }
  }
}

// ---- Phase: the report. The figures of the written values, a check that every file is
// complete, then every file is committed at once.
// Two passes: the figures of the written values follow from the pass-1 figures of the
// volts by scaling (loudness + 20 log10(scale), peaks times scale; the float spool
// changes them by a relative 2^-24 at most), which spares a second meter.
void finish_outputs(render_plan& p, render_report& rep) {
  for (std::size_t i = 0; i < p.n_outputs; ++i) {
    output_report& o = rep.outputs[i];
    // With noise, pass 2 metered what it wrote (the noise is not in the pass-1 figures).
    const bool metered_again = p.two_pass && i < p.written_meters.size();
    const dsp::loudness_meter& meter = metered_again ? p.written_meters[i] : p.meters[i];
    const double g = p.two_pass && !metered_again ? rep.outputs[i].scale : 1.0;
    const double l = meter.integrated_lufs();
    o.loudness_lufs = std::isfinite(l) ? l + base::db_from_ratio(g) : l;
    o.sample_peak = meter.sample_peak() * g;
    o.true_peak = meter.true_peak() * g;
    if (dsp::quantisation_bits(rep.format) > 0) o.clipped_samples = p.writers[i].clipped_samples();
    if (p.writers[i].frames_written() != p.info.frames)
      throw internal_error("render: wrote " + std::to_string(p.writers[i].frames_written()) + " frames to " +
                           quoted_path(o.path) + " for " + std::to_string(p.info.frames) + " input frames");
  }
  check_stop(*p.control);
  base::output_set own;
  base::output_set& finished = p.control->outputs ? *p.control->outputs : own;
  for (dsp::sound_writer& w : p.writers) finished.add(w.finish());
  own.commit();
  rep.seconds = std::chrono::duration<double>(clock_type::now() - p.t0).count();
  rep.realtime_factor = rep.seconds > 0 ? p.info.seconds() / rep.seconds : 0.0;
  p.report_progress(p.total_work, p.total_frames);
}

}  // namespace

double render_floor_v(const dk_options& engine) noexcept { return engine.tol_v + detail::rounding_allowance_v; }

render_report render(const render_job& job, const render_control& control) {
  const auto t0 = clock_type::now();
  check_stop(control);
  check_job(job);
  dsp::sound_reader reader = open_input(job.input);
  render_report rep;
  rep.input = reader.info();
  rep.format = job.format ? *job.format : dsp::nearest_sample_format(rep.input);
  choose_factor(job, control, rep);
  render_plan plan = plan_render(job, control, t0, rep);
  first_pass(plan, reader, rep);
  decide_scales(plan, rep);
  if (plan.two_pass) second_pass(plan, rep);
  finish_outputs(plan, rep);
  return rep;
}

}  // namespace pinchoff::model
