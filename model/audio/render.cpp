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
#include "dsp/io/sample_spool.hpp"
#include "base/units.hpp"

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
    else scales[i] = peak[i] > 0.0 ? ceiling / peak[i] : 1.0;
  }
  return scales;
}

// ---------------------------------------------------------------------------------------
// The job

namespace {

using clock_type = std::chrono::steady_clock;


void check_stop(const render_control& c) {
  if (c.stop && c.stop->load(std::memory_order_relaxed)) throw interrupted("interrupted; no output written");
}

// Scales `values` in place and counts the samples a float file keeps beyond full scale.
long long scale_and_count(std::span<double> values, double scale) {
  long long beyond = 0;
  for (double& v : values) {
    v *= scale;
    beyond += std::abs(v) > 1.0;
  }
  return beyond;
}

void add_stats(dk_stats& sum, const dk_stats& s) {
  sum.samples += s.samples;
  sum.evaluations += s.evaluations;
  sum.max_evaluations = std::max(sum.max_evaluations, s.max_evaluations);
  sum.substepped += s.substepped;
  sum.failed += s.failed;
  sum.bound_misses += s.bound_misses;
}

void check_job(const render_job& job) {
  if (job.stages.empty()) throw input_error("render: no stage given");
  if (!(job.input_peak_v > 0.0) || !std::isfinite(job.input_peak_v))
    throw input_error("--input-peak must be a level above 0 V, got " + base::format_number(job.input_peak_v));
  if (job.oversample < 0 || job.oversample > 64 || (job.oversample & (job.oversample - 1)) != 0)
    throw input_error("--oversample must be 1, 2, 4, 8, 16, 32, 64 or auto, got " + std::to_string(job.oversample));
  if (job.level == output_level::fixed && !(job.full_scale_v > 0.0 && std::isfinite(job.full_scale_v)))
    throw input_error("--output-peak must be a level above 0 V, got " + base::format_number(job.full_scale_v));
  if (!(job.peak_dbfs <= 0.0) || !std::isfinite(job.peak_dbfs) || job.peak_dbfs < -100.0)
    throw input_error("--normalize must be a peak from -100 to 0 dBFS, got " + base::format_number(job.peak_dbfs) + " dBFS");
  const std::size_t outputs = job.stages.size() + (job.dry_output ? 1 : 0);
  if (job.level == output_level::fixed && (job.match_loudness || outputs > 1))
    throw input_error("--output-peak fixes the scale of one output; several outputs are loudness-matched instead");
  if (job.block_frames < 1) throw internal_error("render: block_frames must be at least 1");
  std::vector<fs::path> seen;
  std::error_code ec;
  for (std::size_t i = 0; i < outputs; ++i) {
    const fs::path p = i < job.stages.size() ? job.stages[i].output : *job.dry_output;
    const fs::path canon = fs::weakly_canonical(fs::absolute(p, ec), ec);
    if (std::find(seen.begin(), seen.end(), canon) != seen.end())
      throw input_error("two outputs would both be written to " + quoted_path(p) + " (stage files with the same name?)");
    seen.push_back(canon);
  }
}

}  // namespace

render_report render(const render_job& job, const render_control& control) {
  const auto t0 = clock_type::now();
  check_job(job);

  dsp::sound_reader reader = dsp::sound_reader::open(job.input);
  const dsp::sound_info info = reader.info();
  if (info.frames <= 0) throw input_error(quoted_path(job.input) + " holds no audio");
  if (!(info.rate_hz > 40000.0))
    throw input_error(quoted_path(job.input) + " is at " + base::format_number(info.rate_hz, 6) +
                      " Hz; render needs 44.1 kHz or more (the oversampler keeps 0 to 20 kHz flat and free of "
                      "aliases, which needs a rate above 40 kHz)");

  render_report rep;
  rep.input = info;
  rep.format = job.format ? *job.format : dsp::nearest_sample_format(info);
  rep.oversample = job.oversample;
  if (job.oversample == 0) {
    rep.oversample_chosen = true;
    rep.survey = survey_input(job.input, control.stop);
    std::vector<stage_ref> refs;
    for (const render_stage& st : job.stages) refs.push_back({&st.net, &st.op});
    rep.choice = choose_oversampling(refs, rep.survey.sample_peak * job.input_peak_v, rep.survey.edge_hz, info.rate_hz);
    rep.oversample = rep.choice.factor;
  }
  rep.engine_rate_hz = info.rate_hz * rep.oversample;

  const auto ch = static_cast<std::size_t>(info.channels);
  const std::size_t n_stages = job.stages.size();
  const std::size_t n_outputs = n_stages + (job.dry_output ? 1 : 0);
  const std::size_t n_units = n_stages * ch;
  const bool two_pass = job.level == output_level::normalize;
  const std::size_t block = job.block_frames;

  // Every writer first: an output that is the input or exists is refused before any work.
  dsp::write_settings ws;
  ws.rate_hz = info.rate_hz;
  ws.channels = info.channels;
  ws.format = rep.format;
  ws.tpdf_dither = dsp::quantisation_bits(rep.format) > 0;  // rounding as noise, not distortion
  ws.overwrite = job.overwrite;
  ws.inputs = {job.input};
  std::vector<dsp::sound_writer> writers;
  for (std::size_t i = 0; i < n_outputs; ++i)
    writers.push_back(dsp::sound_writer::create(i < n_stages ? job.stages[i].output : *job.dry_output, ws));

  std::vector<channel_renderer> units;
  units.reserve(n_units);
  for (const render_stage& st : job.stages)
    for (std::size_t c = 0; c < ch; ++c)
      units.emplace_back(st.net, st.op, rep.oversample, info.rate_hz, block, job.engine);
  rep.latency_samples = units.front().latency_samples();
  const unsigned cores = std::max(1u, std::thread::hardware_concurrency());
  const std::size_t asked = job.threads > 0 ? static_cast<std::size_t>(job.threads) : cores;
  rep.threads = static_cast<int>(std::min<std::size_t>(asked, std::max<std::size_t>(n_units, 1)));
  // With more than one thread, the engines of block i run on their own threads while the
  // calling thread meters and spools block i - 1 (the same work in the same order, so the
  // files do not change).
  rep.pipelined = asked > 1;
  std::vector<dsp::sample_spool> spools;
  if (two_pass)
    for (std::size_t s = 0; s < n_stages; ++s) spools.push_back(dsp::sample_spool::create(job.stages[s].output));
  // Pass-1 meters: on volts (two passes) or on the written values (fixed).
  std::vector<dsp::loudness_meter> meters;
  for (std::size_t i = 0; i < n_outputs; ++i) meters.emplace_back(info.channels, info.rate_hz);

  rep.outputs.resize(n_outputs);
  for (std::size_t i = 0; i < n_outputs; ++i) {
    output_report& o = rep.outputs[i];
    o.is_dry = i >= n_stages;
    o.path = o.is_dry ? *job.dry_output : job.stages[i].output;
    o.name = o.is_dry ? "dry" : job.stages[i].name;
  }
  const double fixed_scale = 1.0 / job.full_scale_v;

  // Progress: pass 1 costs a frame per unit-frame of engine work; a pass-2 frame of one
  // output (read, scale, write) is far cheaper (about 1/20 of an 8x engine frame).
  const double total_frames = static_cast<double>(info.frames);
  // The engine's share scales with the factor; pass 2 does not.
  const double pass2_weight =
      two_pass ? 0.05 * (8.0 / rep.oversample) * static_cast<double>(n_outputs) / static_cast<double>(n_units) : 0.0;
  const double total_work = total_frames * (1.0 + pass2_weight);
  auto report_progress = [&](double work_done, double frames_rendered) {
    if (!control.progress) return;
    const double elapsed = std::chrono::duration<double>(clock_type::now() - t0).count();
    render_progress p;
    p.fraction = std::clamp(work_done / total_work, 0.0, 1.0);
    p.realtime_factor = elapsed > 0 ? frames_rendered / info.rate_hz / elapsed : 0.0;
    p.seconds_left = p.fraction > 0 ? elapsed * (1.0 - p.fraction) / p.fraction : 0.0;
    control.progress(p);
  };

  // ---- Pass 1: render every unit, block by block.
  std::vector<double> frames(block * ch);
  std::vector<std::vector<double>> in(ch, std::vector<double>(block));
  const std::size_t out_size = std::max<std::size_t>(block, static_cast<std::size_t>(rep.latency_samples));
  // Two sets of unit outputs: one being rendered while the other is consumed.
  std::vector<std::vector<double>> out[2] = {std::vector<std::vector<double>>(n_units, std::vector<double>(out_size)),
                                             std::vector<std::vector<double>>(rep.pipelined ? n_units : 0,
                                                                              std::vector<double>(out_size))};
  std::vector<std::size_t> produced[2] = {std::vector<std::size_t>(n_units), std::vector<std::size_t>(n_units)};
  std::vector<double> stage_frames(out_size * ch);
  std::vector<double> dry_frames(block * ch);
  // Interleaves, meters and stores one set of unit outputs (in block order).
  auto consume = [&](int set) {
    for (std::size_t s = 0; s < n_stages; ++s) {
      const std::size_t m = produced[set][s * ch];
      for (std::size_t c = 0; c < ch; ++c)
        if (produced[set][s * ch + c] != m) throw internal_error("render: channels of one stage went out of step");
      for (std::size_t c = 0; c < ch; ++c) {
        const double* o = out[set][s * ch + c].data();
        for (std::size_t k = 0; k < m; ++k) stage_frames[k * ch + c] = o[k];
      }
      const std::span<double> v = std::span<double>(stage_frames).first(m * ch);
      if (two_pass) {
        meters[s].add(v);
        spools[s].write(v);
      } else {
        rep.outputs[s].clipped_samples += scale_and_count(v, fixed_scale);
        meters[s].add(v);
        writers[s].write(v);
      }
    }
  };
  std::int64_t read_frames = 0;
  bool input_done = false, have_previous = false;
  int set = 0;
  while (!input_done) {
    check_stop(control);
    const std::size_t n = reader.read(frames);
    if (n > 0) {
      for (std::size_t k = 0; k < n; ++k)
        for (std::size_t c = 0; c < ch; ++c) in[c][k] = frames[k * ch + c] * job.input_peak_v;
      if (job.dry_output) {
        for (std::size_t i = 0; i < n * ch; ++i) dry_frames[i] = frames[i] * job.input_peak_v;
        meters[n_stages].add(std::span<const double>(dry_frames).first(n * ch));
      }
      read_frames += static_cast<std::int64_t>(n);
    } else {
      input_done = true;
    }
    auto work = [&, set, n](std::size_t u) {
      produced[set][u] = n > 0 ? units[u].process(std::span<const double>(in[u % ch]).first(n), out[set][u])
                               : units[u].finish(out[set][u]);
    };
    if (rep.pipelined) {
      base::run_beside(n_units, rep.threads, work, [&] {
        if (have_previous) consume(1 - set);
      });
      have_previous = true;
      if (input_done) consume(set);
      set = 1 - set;
    } else {
      base::run_parallel(n_units, 1, work);
      consume(set);
    }
    report_progress(static_cast<double>(read_frames), static_cast<double>(read_frames));
  }
  for (std::size_t s = 0; s < n_stages; ++s)
    for (std::size_t c = 0; c < ch; ++c) add_stats(rep.outputs[s].engine, units[s * ch + c].engine_stats());

  // ---- Scales.
  if (!two_pass) {
    rep.outputs[0].scale = fixed_scale;
  } else {
    const double ceiling = base::ratio_from_db(job.peak_dbfs);
    std::vector<double> loud(n_outputs), peak(n_outputs);
    for (std::size_t i = 0; i < n_outputs; ++i) {
      loud[i] = meters[i].integrated_lufs();
      peak[i] = meters[i].sample_peak();
    }
    if (job.match_loudness && n_outputs > 1) {
      const std::vector<double> scales = loudness_matched_scales(loud, peak, ceiling, rep.target_lufs);
      for (std::size_t i = 0; i < n_outputs; ++i) {
        rep.outputs[i].scale = scales[i];
        rep.outputs[i].matched = std::isfinite(loud[i]) && peak[i] > 0.0;
      }
    } else {
      for (std::size_t i = 0; i < n_outputs; ++i) rep.outputs[i].scale = peak[i] > 0.0 ? ceiling / peak[i] : 1.0;
    }
  }

  // ---- Pass 2: scale the spooled volts (and the input, for dry) into the files.
  if (two_pass) {
    double work = total_frames;
    const double per_frame = pass2_weight / static_cast<double>(n_outputs);
    std::vector<double> buf(block * ch);
    for (std::size_t i = 0; i < n_outputs; ++i) {
      output_report& o = rep.outputs[i];
      std::optional<dsp::sound_reader> again;
      if (o.is_dry) again.emplace(dsp::sound_reader::open(job.input));
      else spools[i].rewind();
      for (;;) {
        check_stop(control);
        std::size_t n = 0;
        if (o.is_dry) {
          n = again->read(buf);
          for (std::size_t k = 0; k < n * ch; ++k) buf[k] *= job.input_peak_v;
        } else {
          n = spools[i].read(buf) / ch;
        }
        if (n == 0) break;
        const std::span<double> v = std::span<double>(buf).first(n * ch);
        o.clipped_samples += scale_and_count(v, o.scale);
        writers[i].write(v);
        work += static_cast<double>(n) * per_frame;
        report_progress(work, total_frames);
      }
    }
  }

  // Two passes: the figures of the written values follow from the pass-1 figures of the
  // volts by scaling (loudness + 20 log10(scale), peaks times scale; the float spool
  // changes them by a relative 2^-24 at most), which spares a second meter.
  for (std::size_t i = 0; i < n_outputs; ++i) {
    output_report& o = rep.outputs[i];
    const double g = two_pass ? rep.outputs[i].scale : 1.0;
    const double l = meters[i].integrated_lufs();
    o.loudness_lufs = std::isfinite(l) ? l + base::db_from_ratio(g) : l;
    o.sample_peak = meters[i].sample_peak() * g;
    o.true_peak = meters[i].true_peak() * g;
    if (dsp::quantisation_bits(rep.format) > 0) o.clipped_samples = writers[i].clipped_samples();
    if (writers[i].frames_written() != info.frames)
      throw internal_error("render: wrote " + std::to_string(writers[i].frames_written()) + " frames to " + quoted_path(o.path) +
                           " for " + std::to_string(info.frames) + " input frames");
  }
  check_stop(control);
  for (dsp::sound_writer& w : writers) w.commit();
  rep.seconds = std::chrono::duration<double>(clock_type::now() - t0).count();
  rep.realtime_factor = rep.seconds > 0 ? info.seconds() / rep.seconds : 0.0;
  report_progress(total_work, total_frames);
  return rep;
}

}  // namespace pinchoff::model
