// pinchoff tone: a sine test tone, or a staircase of levels, written to an audio file to
// play into a built stage.
#include <algorithm>
#include <cctype>
#include <cmath>
#include <cstdio>
#include <map>
#include <memory>
#include <optional>
#include <string>
#include <vector>

#include <CLI/CLI.hpp>
#include <nlohmann/json.hpp>

#include "cli/app.hpp"
#include "cli/common.hpp"
#include "cli/interrupt.hpp"
#include "cli/option_text.hpp"
#include "cli/text_table.hpp"
#include "base/error.hpp"
#include "dsp/io/sound_file.hpp"
#include "dsp/exp_sweep.hpp"
#include "dsp/tone.hpp"
#include "base/units.hpp"

namespace pinchoff::cli {
namespace {

using base::format_number;
using base::format_si;
using align = text_table::align;

// The options as typed.
struct tone_options {
  std::string output;
  std::string freq_text{"1k"};
  std::string level_text{"-20dBFS"};
  double seconds{5.0};
  std::string steps_text;
  double step_seconds{1.0};
  std::string sweep_text;  ///< --sweep FROM..TO: an exponential sine sweep instead of a tone
  double rate_hz{48000.0};
  std::string format_text{"wav24"};
  int channels{1};
  double fade_ms{10.0};
  bool no_dither{false};
  bool force{false};
  bool json{false};
};

// The fields dsp::tone_generator names in its errors, and the options that set them.
// dsp::exp_sweep_plan's fields too.
const std::map<std::string, std::string, std::less<>> tone_options_of_fields{
    {"fade_seconds", "--fade-ms"}, {"rate_hz", "--rate"},   {"start_hz", "--sweep"},
    {"end_hz", "--sweep"},         {"seconds", "--seconds"}, {"level_dbfs", "--level"}};

// FROM..TO:STEP, e.g. "-40dBFS..0dBFS:10" or "-40..0:6dB" (cli/option_text.hpp).
std::vector<dsp::tone_step> parse_steps(const std::string& text, double seconds) {
  const staircase_text st = parse_staircase(text, "--steps");
  return dsp::level_staircase(st.from_dbfs, st.to_dbfs, st.step_db, seconds);
}

// What was written, for the formatters.
struct tone_report {
  std::string path;
  dsp::tone_plan plan;
  dsp::sample_format format{};
  int channels{1};
  bool dither{false};
  std::int64_t frames{0};
  double sample_peak{0.0};
  std::int64_t clipped{0};
  std::vector<dsp::steady_span> spans;
  double ceiling_dbfs{0.0};  // < 0 when levels near full scale were lowered to fit the codes
  std::optional<dsp::exp_sweep_plan> sweep;  // --sweep: the sweep written instead of a tone
};

std::string dbfs_text(double level_dbfs) {
  char t[32];
  std::snprintf(t, sizeof t, "%.1f dBFS", level_dbfs == 0.0 ? 0.0 : level_dbfs);
  return t;
}
std::string seconds_text(std::int64_t frames, double rate_hz) {
  char t[32];
  std::snprintf(t, sizeof t, "%.3f s", static_cast<double>(frames) / rate_hz);
  return t;
}
std::string rate_text(double rate_hz) {
  return rate_hz == std::floor(rate_hz) ? std::to_string(static_cast<long long>(rate_hz)) : format_number(rate_hz, 6);
}

const char* format_description(dsp::sample_format f) {
  switch (f) {
    case dsp::sample_format::wav16: return "WAV, 16-bit integer";
    case dsp::sample_format::wav24: return "WAV, 24-bit integer";
    case dsp::sample_format::wav_float: return "WAV, 32-bit float";
    case dsp::sample_format::flac24: return "FLAC, 24-bit integer";
  }
  return "";
}

// ---- Formatters

void write_text(const tone_report& r, std::ostream& out) {
  const auto& p = r.plan;
  out << "Wrote " << r.path << '\n';
  if (r.sweep) {
    const dsp::exp_sweep_plan& w = *r.sweep;
    out << "  exponential sine sweep " << format_si(w.start_hz, "Hz", 4) << " to " << format_si(w.end_hz, "Hz", 4) << ", "
        << dbfs_text(w.level_dbfs) << ", " << seconds_text(r.frames, w.rate_hz) << " (" << r.frames << " frames)\n";
  } else {
    out << "  " << format_si(p.frequency_hz, "Hz", 4) << " sine, ";
    if (p.steps.size() == 1) out << dbfs_text(p.steps[0].level_dbfs);
    else
      out << p.steps.size() << " levels from " << dbfs_text(p.steps.front().level_dbfs) << " to "
          << dbfs_text(p.steps.back().level_dbfs);
    out << ", " << seconds_text(r.frames, p.rate_hz) << " (" << r.frames << " frames)\n";
  }
  out << "  " << rate_text(p.rate_hz) << " Hz, " << r.channels << (r.channels == 1 ? " channel, " : " channels (all the same), ")
      << format_description(r.format)
      << (dsp::quantisation_bits(r.format) == 0 ? "" : (r.dither ? ", TPDF dither" : ", no dither")) << '\n';
  out << "  sample peak " << dbfs_text(base::db_from_ratio(r.sample_peak)) << " (0 dBFS: a sine reaching full scale); "
      << format_number(p.fade_seconds * 1000.0, 3) << " ms raised-cosine fades\n";
  if (r.ceiling_dbfs < 0.0)
    out << "  levels above " << format_number(r.ceiling_dbfs, 2) << " dBFS written at that level, the largest sine a "
        << dsp::quantisation_bits(r.format) << "-bit file holds" << (r.dither ? " with dither" : "") << " without clipping\n";
  if (r.clipped > 0) out << "  ! " << r.clipped << " samples clipped\n";
  if (r.sweep) {
    const double L = dsp::sweep_rate_constant_s(*r.sweep);
    out << "  rate constant L = T / ln(f2/f1) = " << format_number(L, 4) << " s: harmonic n answers L ln n ahead of the\n"
        << "  linear response (" << format_number(1000.0 * L * std::log(2.0), 4) << " ms for H2), where measure --response "
        << "separates it\n";
  }
  if (p.steps.size() > 1) {
    out << "\nSteps (steady: where the level holds, for measuring)\n";
    text_table t({align::right, align::right, align::right, align::right, align::right});
    t.add({"step", "level", "starts", "steady from", "to"});
    for (std::size_t i = 0; i < p.steps.size(); ++i)
      t.add({std::to_string(i + 1), dbfs_text(p.steps[i].level_dbfs),
             seconds_text(i == 0 ? 0 : r.spans[i - 1].end, p.rate_hz),
             seconds_text(r.spans[i].begin, p.rate_hz), seconds_text(r.spans[i].end, p.rate_hz)});
    t.write(out);
  }
  out << "\nCaution: start playback quietly and raise it slowly; a full-scale tone through a\n"
         "power amplifier or headphones is loud enough to harm hearing and speakers.\n";
}

// The keys every tone file's report has: where it went and what it holds.
nlohmann::json file_json(const tone_report& r, double rate_hz, double fade_s) {
  return {{"path", r.path},
          {"rate_hz", rate_hz},
          {"channels", r.channels},
          {"format", std::string(dsp::sample_format_name(r.format))},
          {"dither", r.dither && dsp::quantisation_bits(r.format) != 0},
          {"frames", r.frames},
          {"duration_s", static_cast<double>(r.frames) / rate_hz},
          {"fade_s", fade_s},
          {"sample_peak_dbfs", base::db_from_ratio(r.sample_peak)},
          {"clipped_samples", r.clipped}};
}

void write_json(const tone_report& r, std::ostream& out) {
  const auto& p = r.plan;
  if (r.sweep) {
    const dsp::exp_sweep_plan& w = *r.sweep;
    nlohmann::json j = file_json(r, w.rate_hz, w.fade_seconds);
    j["sweep"] = {{"start_hz", w.start_hz},
                  {"end_hz", w.end_hz},
                  {"seconds", w.seconds},
                  {"level_dbfs", w.level_dbfs},
                  {"rate_constant_s", dsp::sweep_rate_constant_s(w)}};
    out << json_text(j) << '\n';
    return;
  }
  nlohmann::json steps = nlohmann::json::array();
  for (std::size_t i = 0; i < p.steps.size(); ++i)
    steps.push_back({{"level_dbfs", p.steps[i].level_dbfs},
                     {"start_s", static_cast<double>(i == 0 ? 0 : r.spans[i - 1].end) / p.rate_hz},
                     {"steady_from_s", static_cast<double>(r.spans[i].begin) / p.rate_hz},
                     {"steady_to_s", static_cast<double>(r.spans[i].end) / p.rate_hz}});
  nlohmann::json j = file_json(r, p.rate_hz, p.fade_seconds);
  j["frequency_hz"] = p.frequency_hz;
  j["ceiling_dbfs"] = r.ceiling_dbfs;
  j["steps"] = steps;
  out << json_text(j) << '\n';
}

// ---- Run

// The tone as the options give it: frequency, rate, fade and levels, lowered where an
// integer file cannot hold them. dsp::tone_generator checks the plan.
tone_report plan_tone(const tone_options& o) {
  tone_report r;
  r.path = o.output;
  r.format = dsp::parse_sample_format(o.format_text);
  r.channels = o.channels;
  if (o.channels < 1 || o.channels > 64)
    throw input_error("--channels: channel count must be 1 to 64 (what " + quoted_path(o.output) + " can hold), got " +
                      std::to_string(o.channels));
  r.dither = !o.no_dither;
  r.plan.frequency_hz = option_frequency_hz(o.freq_text, "--freq");
  r.plan.rate_hz = o.rate_hz;
  r.plan.fade_seconds = o.fade_ms / 1000.0;
  if (!o.sweep_text.empty()) {
    const base::value_range band = base::parse_range(o.sweep_text, base::unit::hertz, "--sweep");
    dsp::exp_sweep_plan w;
    w.start_hz = band.lo;
    w.end_hz = band.hi;
    w.seconds = o.seconds;
    w.rate_hz = o.rate_hz;
    w.level_dbfs = parse_db_value(o.level_text, "dBFS", "--level");
    w.fade_seconds = o.fade_ms / 1000.0;
    if (w.level_dbfs > 0.0)
      throw input_error("level " + format_number(w.level_dbfs) + " dBFS is above full scale (0 dBFS at most)");
    dsp::validate(w);
    // As a tone's: an integer file's largest code and the dither leave a sine reaching 0 dBFS
    // no room.
    if (const int bits = dsp::quantisation_bits(r.format); bits > 0) {
      const double codes = std::ldexp(1.0, bits - 1);
      const double ceiling = base::db_from_ratio((codes - (r.dither ? 1.5 : 0.5) - 0.01) / codes);
      if (w.level_dbfs > ceiling) w.level_dbfs = r.ceiling_dbfs = ceiling;
    }
    r.sweep = w;
    return r;
  }
  if (o.steps_text.empty()) r.plan.steps = {{parse_db_value(o.level_text, "dBFS", "--level"), o.seconds}};
  else r.plan.steps = parse_steps(o.steps_text, o.step_seconds);

  // An integer file's largest code is one step short of full scale, and dither adds up to
  // one step more: a sine reaching 0 dBFS would clip. Such levels are lowered to the largest
  // that fits (rounding keeps |x| + 1 step below 2^(bits-1) - 1/2 codes). A level above full
  // scale is refused first, as the lowering would hide it.
  for (const dsp::tone_step& st : r.plan.steps)
    if (st.level_dbfs > 0.0)
      throw input_error("level " + format_number(st.level_dbfs) + " dBFS is above full scale (0 dBFS at most)");
  if (const int bits = dsp::quantisation_bits(r.format); bits > 0) {
    const double codes = std::ldexp(1.0, bits - 1);
    const double ceiling = base::db_from_ratio((codes - (r.dither ? 1.5 : 0.5) - 0.01) / codes);
    for (dsp::tone_step& st : r.plan.steps)
      if (st.level_dbfs > ceiling) {
        st.level_dbfs = ceiling;
        r.ceiling_dbfs = ceiling;
      }
  }
  return r;
}

// Writes the planned tone to its file (nothing is left behind if it fails or Ctrl-C
// stops it) and fills in what was written.
// Writes the planned sweep (at most dsp::max_sweep_frames, made in memory).
void write_sweep(const tone_options& o, tone_report& r, base::output_set& outputs) {
  const std::vector<double> x = dsp::exp_sweep_samples(*r.sweep);
  dsp::write_settings ws;
  ws.rate_hz = o.rate_hz;
  ws.channels = o.channels;
  ws.format = r.format;
  ws.tpdf_dither = r.dither;
  ws.overwrite = o.force;
  const interrupt_guard guard;
  dsp::sound_writer w = dsp::sound_writer::create(o.output, ws);
  const auto ch = static_cast<std::size_t>(o.channels);
  std::vector<double> frames(8192 * ch);
  for (std::size_t at = 0; at < x.size(); at += 8192) {
    guard.check();
    const std::size_t n = std::min<std::size_t>(8192, x.size() - at);
    for (std::size_t t = 0; t < n; ++t) {
      r.sample_peak = std::max(r.sample_peak, std::abs(x[at + t]));
      for (std::size_t c = 0; c < ch; ++c) frames[t * ch + c] = x[at + t];
    }
    w.write(std::span<const double>(frames).first(n * ch));
  }
  r.frames = w.frames_written();
  r.clipped = w.clipped_samples();
  outputs.add(w.finish());
}

void write_tone(const tone_options& o, tone_report& r, base::output_set& outputs) {
  // The generator validates the plan before any file is made; a step's length was given by
  // --seconds (a plain tone) or --step-seconds (a staircase).
  std::optional<dsp::tone_generator> made;
  try {
    made.emplace(r.plan);
  } catch (const setting_error& e) {
    if (e.field() != "step_seconds") throw;
    throw input_error(std::string(o.steps_text.empty() ? "--seconds" : "--step-seconds") + ": " + e.what());
  }
  dsp::tone_generator& gen = *made;
  // RIFF sizes are 32-bit: a WAV file cannot hold more than 4 GiB of samples.
  if (r.format != dsp::sample_format::flac24) {
    const int bytes = dsp::quantisation_bits(r.format) == 0 ? 4 : dsp::quantisation_bits(r.format) / 8;
    const double size = static_cast<double>(dsp::tone_frames(r.plan)) * o.channels * bytes;
    if (size > 4294967295.0 - 65536.0)
      throw input_error("the tone needs " + format_number(size / 1073741824.0) +
                        " GiB of samples and a WAV file holds at most 4 GiB: shorten it, lower --rate or --channels, or "
                        "use --format flac");
  }
  r.spans = dsp::steady_spans(r.plan);
  dsp::write_settings ws;
  ws.rate_hz = o.rate_hz;
  ws.channels = o.channels;
  ws.format = r.format;
  ws.tpdf_dither = r.dither;
  ws.overwrite = o.force;
  const interrupt_guard guard;  // Ctrl-C: the writer's temporary is removed as it unwinds
  dsp::sound_writer w = dsp::sound_writer::create(o.output, ws);
  const auto ch = static_cast<std::size_t>(o.channels);
  std::vector<double> mono(8192), frames(8192 * ch);
  for (;;) {
    guard.check();
    const std::size_t n = gen.generate(mono);
    if (n == 0) break;
    for (std::size_t t = 0; t < n; ++t) {
      r.sample_peak = std::max(r.sample_peak, std::abs(mono[t]));
      for (std::size_t c = 0; c < ch; ++c) frames[t * ch + c] = mono[t];
    }
    w.write(std::span<const double>(frames).first(n * ch));
  }
  r.frames = w.frames_written();
  r.clipped = w.clipped_samples();
  outputs.add(w.finish());  // committed once the report is made (cli/app.hpp)
}

tone_report run(const tone_options& o, base::output_set& outputs) {
  tone_report r = plan_tone(o);
  if (r.sweep) write_sweep(o, r, outputs);
  else write_tone(o, r, outputs);
  return r;
}

// ---- Setup: the options, their help and the worked examples.
CLI::App* setup(CLI::App& app, tone_options& o) {
  CLI::App* sub = app.add_subcommand("tone", "Write a sine test tone, or a staircase of levels, to an audio file");
  sub->add_option("OUT", o.output, "Audio file to write (refused if it exists, unless --force)")->required();
  sub->add_option("--freq", o.freq_text, "Tone frequency, e.g. 1k or 440")->type_name("FREQ")->capture_default_str();
  sub->add_option("--level", o.level_text, "Level of a plain tone in dBFS (0 dBFS: the sine's peak reaches full scale)")
      ->type_name("dBFS")
      ->capture_default_str();
  sub->add_option("--seconds", o.seconds, "Length of a plain tone, or of a sweep")->capture_default_str();
  auto* steps = sub->add_option("--steps", o.steps_text,
                                "A staircase of levels instead of one: FROM..TO:STEP, levels in dBFS, step in dB")
                    ->type_name("FROM..TO:STEP");
  sub->add_option("--step-seconds", o.step_seconds, "How long each step of --steps holds")->capture_default_str()->needs(steps);
  auto* sweep = sub->add_option("--sweep", o.sweep_text,
                                "An exponential sine sweep instead of a tone: FROM..TO in hertz, over --seconds, at "
                                "--level, with --fade-ms fades (read back with measure --response)")
                    ->type_name("FROM..TO");
  sweep->excludes(steps);
  sub->add_option("--rate", o.rate_hz, "Sample rate in hertz")->capture_default_str();
  sub->add_option("--format", o.format_text, "wav16, wav24, float (32-bit float WAV) or flac (24-bit)")
      ->capture_default_str();
  sub->add_option("--channels", o.channels, "Number of channels, each holding the same tone")->capture_default_str();
  sub->add_option("--fade-ms", o.fade_ms, "Raised-cosine fade at the start, the end and between steps")
      ->capture_default_str();
  sub->add_flag("--no-dither", o.no_dither, "Round integer formats without TPDF dither (dither is on by default)");
  sub->add_flag("--force", o.force, "Replace OUT if it exists");
  sub->add_flag("--json", o.json, "Machine-readable summary of what was written");
  sub->get_option("--level")->excludes(steps);
  sub->get_option("--seconds")->excludes(steps);
  sub->get_option("--freq")->excludes(sweep);
  sub->footer(
      "Examples:\n"
      "  pinchoff tone --freq 1k --level -10dBFS --seconds 5 tone-1k.wav\n"
      "      five seconds of 1 kHz at -10 dBFS, 48 kHz 24-bit WAV\n"
      "  pinchoff tone --steps -40dBFS..0dBFS:6 --step-seconds 2 staircase.wav\n"
      "      -40 to -4 dBFS in 6 dB steps (0 dBFS is not a whole step away), 2 s each, to find\n"
      "      where a stage starts to distort\n"
      "  pinchoff tone --freq 100 --level -20dBFS --format float --rate 96000 low.wav\n"
      "  pinchoff tone --sweep 20..20k --seconds 10 --level -20dBFS sweep.wav\n"
      "      an exponential sine sweep (A. Farina, AES 108th Convention, 2000): x(t) = A sin(2 pi f1 L\n"
      "      (exp(t/L) - 1)), L = T / ln(f2/f1), with raised-cosine fades of --fade-ms at both ends;\n"
      "      record the stage's answer a second or more past its end and read it with\n"
      "      'pinchoff measure REC.wav --response sweep.wav --sweep 20..20k'\n"
      "Play the file into the stage's input, record its output, and read the recording with\n"
      "'pinchoff measure'. Integer formats get triangular (TPDF) dither so that rounding adds\n"
      "noise rather than harmonics.");
  return sub;
}

}  // namespace

void register_tone(CLI::App& app, std::vector<command>& commands, const data_files&) {
  auto opt = std::make_shared<tone_options>();
  CLI::App* sub = setup(app, *opt);
  commands.push_back({sub,
                      [opt](std::ostream& out, std::ostream&, base::output_set& outputs) {
                        const tone_report r = run(*opt, outputs);
                        if (opt->json) write_json(r, out);
                        else write_text(r, out);
                      },
                      tone_options_of_fields,
                      [opt] {
                        command_files f;
                        f.outputs.push_back({"OUT", opt->output, false, opt->force});
                        return f;
                      }});
}

}  // namespace pinchoff::cli
