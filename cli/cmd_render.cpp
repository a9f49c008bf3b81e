// pinchoff render: recorded audio through one or several stages, to listen to before
// building; several stages come out loudness-matched so that the louder one does not win.

#include <algorithm>
#include <cctype>
#include <cmath>
#include <cstdint>
#include <cstdio>
#include <filesystem>
#include <map>
#include <memory>
#include <optional>
#include <string>
#include <vector>

#include <CLI/CLI.hpp>
#include <nlohmann/json.hpp>

#include "cli/app.hpp"
#include "cli/common.hpp"
#include "base/output_file.hpp"
#include "cli/interrupt.hpp"
#include "cli/progress_bar.hpp"
#include "cli/text_table.hpp"
#include "base/error.hpp"
#include "dsp/io/sound_file.hpp"
#include "base/units.hpp"
#include "model/circuit/network.hpp"
#include "model/circuit/operating_point.hpp"
#include "model/analysis/small_signal.hpp"
#include "model/audio/render.hpp"
#include "model/circuit/stage_file.hpp"

namespace pinchoff::cli {
namespace {

namespace fs = std::filesystem;
using base::format_number;
using base::format_si;
using align = text_table::align;

// The options as typed.
struct render_options {
  std::filesystem::path devices;  ///< the program's class file
  std::vector<std::string> stages;
  std::string input, output;
  std::string input_peak{"1V"};
  std::string output_peak;
  std::string normalize{"-1dBFS"};
  std::string oversample{"auto"};
  std::string format;
  int threads{0};
  bool dry{false}, force{false}, quiet{false}, json{false};
  bool invert{false};  ///< write an inverting stage's output with its polarity restored
  bool noise{false};   ///< add each stage's modelled noise
  std::uint64_t seed{1};
};

// The fields the model names in its errors (model/audio/render.hpp, render_job), and the
// options that set them.
const std::map<std::string, std::string, std::less<>> render_options_of_fields{
    {"input_peak_v", "--input-peak"}, {"oversampling", "--oversample"}, {"full_scale_v", "--output-peak"},
    {"level", "--output-peak"},       {"peak_dbfs", "--normalize"}};

// What the formatters print: the model's report and the values the run was asked for.
struct render_outcome {
  model::render_report report;
  std::string input;  // as given
  std::optional<double> input_peak_db_spl;  // --input-peak as a sound pressure (capsule stages)
  double input_peak_v{};
  double peak_dbfs{};
  bool fixed_level{false};
  bool dry{false};
  bool noise{false};
  std::uint64_t seed{1};
  std::size_t stage_count{};  // stage files
  std::vector<std::size_t> chain_lengths;  // stages in each stage file, in order
  std::vector<bool> inverting;             // each stage file's mid-band gain is negative
  std::vector<bool> restored;              // and --invert wrote it restored
  std::vector<std::string> warnings;
};

std::string lower(std::string s) {
  std::transform(s.begin(), s.end(), s.begin(), [](unsigned char c) { return static_cast<char>(std::tolower(c)); });
  return s;
}


// "-1dBFS", "-1 dBFS", "-1". The range is the model's to check (render_job::peak_dbfs).
double parse_dbfs(const std::string& text, const char* what) {
  std::string t = text;
  const std::string l = lower(t);
  if (l.size() >= 4 && l.compare(l.size() - 4, 4, "dbfs") == 0) t = t.substr(0, t.size() - 4);
  while (!t.empty() && std::isspace(static_cast<unsigned char>(t.back()))) t.pop_back();
  std::size_t used = 0;
  double v = 0;
  try {
    v = std::stod(t, &used);
  } catch (const std::exception&) {
    used = 0;
  }
  if (t.empty() || used != t.size() || !std::isfinite(v))
    throw input_error(std::string(what) + " '" + text + "' is not a level in dBFS, e.g. -1dBFS");
  return v;
}

// "auto" (0: the model chooses) or a whole number; which factors run is the model's to check.
int parse_oversampling(const std::string& text) {
  if (text == "auto") return 0;
  std::size_t used = 0;
  int v = 0;
  try {
    v = std::stoi(text, &used);
  } catch (const std::exception&) {
    used = 0;
  }
  if (text.empty() || used != text.size()) throw input_error("--oversample '" + text + "': expected a whole number or auto");
  return v;
}

const char* extension_for(dsp::sample_format f) { return f == dsp::sample_format::flac24 ? ".flac" : ".wav"; }

// A single output's name must say what it holds: .wav for WAV, .flac for FLAC.
void check_extension(const fs::path& out, dsp::sample_format f) {
  const std::string ext = lower(out.extension().string());
  const bool is_flac = f == dsp::sample_format::flac24;
  if (is_flac ? ext == ".flac" : (ext == ".wav" || ext == ".wave")) return;
  throw input_error("--output " + quoted_path(out) + " would hold " + (is_flac ? "FLAC" : "WAV") + " (" +
                    std::string(dsp::sample_format_name(f)) + "); name it " +
                    (out.stem().string() + extension_for(f)) + ", or choose the format with --format wav16|wav24|float|flac");
}

// dB figures with two decimals (loudness matching is checked to 0.1 LU).
std::string db_text(double db, const char* unit) {
  char t[48];
  std::snprintf(t, sizeof t, "%.2f %s", std::abs(db) < 0.005 ? 0.0 : db, unit);
  return t;
}

std::string dbfs_text(double ratio, const char* unit) {
  return ratio > 0.0 ? db_text(base::db_from_ratio(ratio), unit) : std::string("-inf ") + unit;
}

std::string lufs_text(double lufs) { return std::isfinite(lufs) ? db_text(lufs, "LUFS") : "silent"; }

std::string rate_text(double rate_hz) {
  return rate_hz == std::floor(rate_hz) ? std::to_string(static_cast<long long>(rate_hz)) : format_number(rate_hz, 6);
}

std::string volts_text(double v) { return format_si(v, "V", 3); }

// "channel 2" or "channels 1 and 2", counted from 1.
std::string channel_list(const std::vector<int>& channels) {
  std::string t = channels.size() == 1 ? "channel " : "channels ";
  for (std::size_t i = 0; i < channels.size(); ++i) {
    if (i > 0) t += i + 1 == channels.size() ? " and " : ", ";
    t += std::to_string(channels[i]);
  }
  return t + (channels.size() == 1 ? " is" : " are");
}

// ---- Formatters

void write_text(const render_outcome& run, std::ostream& out) {
  const model::render_report& r = run.report;
  const auto& in = r.input;
  const std::size_t n_out = r.outputs.size();
  // A stage file may hold a chain: it is then named as one, with its number of stages.
  const bool chains = std::any_of(run.chain_lengths.begin(), run.chain_lengths.end(), [](std::size_t k) { return k > 1; });
  out << "Rendered " << run.input << " through ";
  if (!chains)
    out << run.stage_count << (run.stage_count == 1 ? " stage" : " stages");
  else if (run.stage_count == 1)
    out << "a chain of " << run.chain_lengths.front() << " stages";
  else
    out << run.stage_count << " designs";
  if (n_out > 1) out << (run.dry ? " and the dry input" : "") << ", loudness-matched";
  out << '\n';
  out << "  input   " << in.format_text << ", " << rate_text(in.rate_hz) << " Hz, " << in.channels
      << (in.channels == 1 ? " channel, " : " channels, ") << format_number(in.seconds(), 4) << " s; 0 dBFS = "
      << volts_text(run.input_peak_v) << " peak at the generator";
  if (run.input_peak_db_spl)
    out << " (a sine at " << format_number(*run.input_peak_db_spl, 4) << " dB SPL at the capsule)";
  out << '\n';
  out << "  engine  " << r.oversample << "x oversampling (" << format_si(r.engine_rate_hz, "Hz", 3) << "), "
      << r.latency_samples << " samples of filter latency compensated, " << r.threads
      << (r.threads == 1 ? " engine thread" : " engine threads") << (r.pipelined ? " and one for files" : "") << '\n';
  if (r.oversample_chosen) {
    const model::oversampling_choice& c = r.choice;
    if (c.probes.empty()) {
      out << "  rate    auto: " << r.oversample << "x (the input is silent or below the floor)\n";
    } else {
      out << "  rate    auto: " << r.oversample << "x, the lowest at which a " << format_si(c.probe_hz, "Hz", 3)
          << " sine at " << volts_text(c.probe_vpk) << " peak (the input's peak\n"
          << "          level and 99 % power edge) folds below " << format_number(c.target_dbc, 3) << " dBc:";
      for (const model::oversampling_probe& p : c.probes)
        out << ' ' << p.factor << "x " << format_number(p.alias_dbc, 3) << (&p == &c.probes.back() ? " dBc" : ",");
      out << (c.target_met ? "" : " (64x is the highest offered)") << '\n';
    }
  }
  const std::string ceiling = db_text(run.peak_dbfs, "dBFS");
  if (run.fixed_level)
    out << "  level   fixed: 0 dBFS = " << volts_text(1.0 / r.outputs[0].scale) << " peak at the load\n";
  else if (n_out > 1 && std::isfinite(r.target_lufs))
    out << "  level   " << lufs_text(r.target_lufs) << " each (ITU-R BS.1770), the loudest at which no peak exceeds "
        << ceiling << '\n';
  else
    out << "  level   peak normalised to " << ceiling << '\n';
  model::dk_stats newton;
  for (const model::output_report& x : r.outputs) newton += x.engine;
  out << "  newton  " << (newton.failed == 0 ? std::string("every sample converged") : std::to_string(newton.failed) + " samples did not converge")
      << ", " << format_number(newton.mean_evaluations(), 3) << " iterations a sample on average, " << newton.max_evaluations
      << " at most\n";
  for (const model::output_report& x : r.outputs)
    if (run.noise && !x.is_dry) {
      out << "  noise   " << (n_out > 1 ? x.name + ": " : std::string()) << volts_text(x.noise_rms_v)
          << " rms at the load (the modelled hiss, 0 to " << format_si(in.rate_hz / 2.0, "Hz", 3) << ", seed " << run.seed
          << "), written at " << dbfs_text(x.noise_rms_v * x.noise_scale, "dBFS") << " rms\n";
      if (x.noise_scale_from_swing)
        out << "          the output's signal is below the floor, so the hiss is scaled as a signal peaking at\n"
            << "          the clean swing (" << volts_text(x.clean_swing_vpk) << ") would be, at " << ceiling << '\n';
    }
  out << '\n';

  text_table t({align::left, align::right, align::right, align::right, align::right, align::right, align::right});
  t.add({"file", "applied gain", "0 dBFS =", "loudness", "sample peak", "true peak", "clipped"});
  for (const model::output_report& x : r.outputs) {
    const double gain_db = base::db_from_ratio(x.scale * (x.is_dry ? run.input_peak_v : 1.0));
    t.add({x.path.string() + (x.is_dry ? " (dry)" : ""), x.silent ? std::string("none") : db_text(gain_db, "dB"),
           x.silent ? std::string("-") : volts_text(1.0 / x.scale), lufs_text(x.loudness_lufs),
           dbfs_text(x.sample_peak, "dBFS"), dbfs_text(x.true_peak, "dBTP"), std::to_string(x.clipped_samples)});
  }
  t.write(out);
  out << "  applied gain: from volts at the load to full scale (0 dB: 1 V reads 0 dBFS); for the dry\n"
         "  file, from the input file's level. 0 dBFS =: the peak voltage that reads full scale.\n";

  bool notes = false;
  auto note = [&](const std::string& line) {
    if (!notes) out << '\n';
    notes = true;
    out << "  ! " << line << '\n';
  };
  // The outputs are the stage files' in order, then the dry input.
  auto what = [&](std::size_t i, const model::output_report& x) -> std::string {
    if (x.is_dry) return "input";
    return i < run.chain_lengths.size() && run.chain_lengths[i] > 1 ? "chain's output" : "stage's output";
  };
  for (std::size_t i = 0; i < r.outputs.size(); ++i) {
    const model::output_report& x = r.outputs[i];
    if (x.silent && run.noise && !x.is_dry)
      note(x.path.string() + " holds only the modelled noise: " +
           (x.input_below_floor ? "the input peaks at " + volts_text(r.input_peak_v) + " at the generator"
                                : "the " + what(i, x) + " peaks at " + volts_text(x.peak_v)) +
           ",\n    not above the floor of " + volts_text(r.floor_v) + " (the engine's accepted error a sample)");
    else if (x.silent)
      note(x.path.string() + " is written as silence: " +
           (x.input_below_floor ? "the input peaks at " + volts_text(r.input_peak_v) + " at the generator"
                                : "the " + what(i, x) + " peaks at " + volts_text(x.peak_v)) +
           ",\n    not above the floor of " + volts_text(r.floor_v) +
           " (the engine's accepted error a sample): normalising would lift only numerical residue");
    else if (!x.silent_channels.empty())
      note(x.path.string() + ": " + channel_list(x.silent_channels) +
           " below the floor of " + volts_text(r.floor_v) + " (the engine's accepted error a sample),\n    written as silence");
    const double lift_db = base::db_from_ratio(x.scale * (x.is_dry ? run.input_peak_v : 1.0));
    if (!x.silent && lift_db > 60.0)
      note(x.path.string() + " was lifted by " + db_text(lift_db, "dB") + " to reach its level: its " +
           what(i, x) + " peaks at only " + volts_text(x.peak_v) +
           ".\n    A click or hum that quiet comes out loud; check --input-peak, or fix the level with --output-peak");
    if (x.engine.failed > 0)
      note(x.path.string() + ": " + std::to_string(x.engine.failed) + " of " + std::to_string(x.engine.samples) +
           " engine samples did not converge (each held its previous solution); try a higher --oversample");
    if (x.clipped_samples > 0)
      note(x.path.string() + ": " + std::to_string(x.clipped_samples) + " samples beyond full scale" +
           (dsp::quantisation_bits(r.format) > 0 ? " were clipped" : " (kept in the float file; a player will clip them)") +
           "; raise --output-peak or leave it out to normalise");
    if (!x.matched && !x.silent)
      note(x.path.string() + " is silent (no 400 ms above -70 LUFS) and was left out of the loudness matching");
    if (x.true_peak > 1.0)
      note(x.path.string() + ": true peak above 0 dBTP; a converter may clip between samples (try --normalize -2dBFS)");
    if (!x.is_dry && i < run.inverting.size() && run.inverting[i])
      note(x.path.string() + (run.restored[i]
                                  ? ": the " + what(i, x) + " is inverted; written with its polarity restored (--invert)"
                                  : ": the " + what(i, x) + " is inverted (upside down against the input); --invert "
                                    "restores its polarity for A/B listening"));
  }
  out << "\n  speed " << format_number(r.realtime_factor, 3) << "x real time (" << format_number(r.seconds, 3) << " s)\n";
  out << "\nCaution: start playback quietly and raise it slowly; a distorting " << (chains ? "chain" : "stage")
      << " can be much\nlouder than its input, and full-scale audio can harm hearing and speakers.\n";
}

nlohmann::json level_json(double ratio) {
  return ratio > 0.0 ? nlohmann::json(base::db_from_ratio(ratio)) : nlohmann::json(nullptr);
}

// null for an explicit --oversample; otherwise the survey and the probes behind the choice.
nlohmann::json choice_json(const model::render_report& r) {
  if (!r.oversample_chosen) return nullptr;
  nlohmann::json probes = nlohmann::json::array();
  for (const model::oversampling_probe& p : r.choice.probes) probes.push_back({{"factor", p.factor}, {"alias_dbc", p.alias_dbc}});
  return {{"input_sample_peak", r.survey.sample_peak},
          {"input_edge_hz", r.survey.edge_hz},
          {"probe_hz", r.choice.probe_hz},
          {"probe_vpk", r.choice.probe_vpk},
          {"target_dbc", r.choice.target_dbc},
          {"target_met", r.choice.target_met},
          {"probes", probes}};
}

void write_json(const render_outcome& run, std::ostream& out) {
  const model::render_report& r = run.report;
  nlohmann::json outputs = nlohmann::json::array();
  for (const model::output_report& x : r.outputs) {
    nlohmann::json j{{"path", x.path.string()},
                     {"name", x.name},
                     {"dry", x.is_dry},
                     {"scale", x.scale},
                     {"full_scale_v", x.scale > 0.0 ? nlohmann::json(1.0 / x.scale) : nlohmann::json(nullptr)},
                     {"silent", x.silent},
                     {"silent_channels", x.silent_channels},
                     {"peak_v", x.peak_v},
                     {"loudness_lufs", number_or_null(x.loudness_lufs)},
                     {"sample_peak_dbfs", level_json(x.sample_peak)},
                     {"true_peak_dbtp", level_json(x.true_peak)},
                     {"clipped_samples", x.clipped_samples},
                     {"loudness_matched", x.matched && r.outputs.size() > 1}};
    const std::size_t k = static_cast<std::size_t>(&x - r.outputs.data());
    if (!x.is_dry && k < run.inverting.size()) {
      j["inverting"] = static_cast<bool>(run.inverting[k]);
      j["polarity_restored"] = static_cast<bool>(run.restored[k]);
    }
    if (!x.is_dry)
      j["noise"] = run.noise ? nlohmann::json{{"rms_v", x.noise_rms_v},
                                              {"dbfs_rms", level_json(x.noise_rms_v * x.noise_scale)},
                                              {"scale", x.noise_scale},
                                              {"scaled_by", x.noise_scale_from_swing ? "clean_swing"
                                                            : run.fixed_level      ? "fixed"
                                                                                   : "signal"},
                                              {"clean_swing_vpk", x.noise_scale_from_swing ? nlohmann::json(x.clean_swing_vpk)
                                                                                           : nlohmann::json(nullptr)}}
                             : nlohmann::json(nullptr);
    if (!x.is_dry)
      j["engine"] = {{"samples", x.engine.samples},
                     {"newton_failures", x.engine.failed},
                     {"substepped", x.engine.substepped},
                     {"mean_iterations", x.engine.mean_evaluations()},
                     {"max_iterations", x.engine.max_evaluations}};
    outputs.push_back(std::move(j));
  }
  const nlohmann::json j{{"input",
                          {{"path", run.input},
                           {"rate_hz", r.input.rate_hz},
                           {"channels", r.input.channels},
                           {"frames", r.input.frames},
                           {"duration_s", r.input.seconds()},
                           {"format", r.input.format_text},
                           {"full_scale_vpk", run.input_peak_v},
                           {"full_scale_db_spl", run.input_peak_db_spl ? nlohmann::json(*run.input_peak_db_spl) : nlohmann::json(nullptr)}}},
                         {"format", std::string(dsp::sample_format_name(r.format))},
                         {"oversampling", r.oversample},
                         {"oversampling_choice", choice_json(r)},
                         {"engine_rate_hz", r.engine_rate_hz},
                         {"latency_samples", r.latency_samples},
                         {"threads", r.threads},
                         {"files_beside", r.pipelined},
                         {"level", run.fixed_level ? "fixed" : (r.outputs.size() > 1 ? "loudness_matched" : "normalized")},
                         {"target_lufs", r.outputs.size() > 1 ? number_or_null(r.target_lufs) : nlohmann::json(nullptr)},
                         {"silence_floor_v", r.floor_v},
                         {"noise_seed", run.noise ? nlohmann::json(run.seed) : nlohmann::json(nullptr)},
                         {"input_peak_v", r.input_peak_v},
                         {"outputs", outputs},
                         {"warnings", run.warnings},
                         {"seconds", r.seconds},
                         {"realtime_factor", r.realtime_factor}};
  out << json_text(j) << '\n';
}

// ---- Run

// The job as the options give it: values only, which the model checks (render_job).
model::render_job job_from(const render_options& o) {
  model::render_job job;
  job.input = o.input;
  // A sound pressure level needs the capsule's sensitivity: set once the stages are read.
  if (!is_spl_level(o.input_peak)) job.input_peak_v = option_level_vpk(o.input_peak, "--input-peak");
  job.oversample = parse_oversampling(o.oversample);
  job.overwrite = o.force;
  job.threads = o.threads;
  if (!o.format.empty()) job.format = dsp::parse_sample_format(o.format);
  job.peak_dbfs = parse_dbfs(o.normalize, "--normalize");
  if (!o.output_peak.empty()) {
    job.level = model::output_level::fixed;
    job.full_scale_v = option_level_vpk(o.output_peak, "--output-peak");
  }
  job.noise = o.noise;
  job.noise_seed = o.seed;
  return job;
}

// Reads each stage file and solves its rest point, printing its cautions (and keeping them
// for the JSON report).
// `read` gets the stage files as read.
std::vector<model::render_stage> load_stages(const render_options& o, std::ostream& err, std::vector<std::string>& warnings,
                                             std::vector<model::stage>& read) {
  std::vector<model::render_stage> stages;
  for (const std::string& path : o.stages) {
    const fs::path file(path);
    const model::stage& s = read.emplace_back(model::read_stage_file(path, {}, o.devices));
    model::render_stage st;
    st.name = file.stem().string();
    st.net = model::build_network(s);
    st.op = model::solve_operating_point(st.net);
    // An inverting stage (a common-source one, or an odd count of them in a chain) puts its
    // output upside down against the input; --invert writes it back the right way up.
    st.invert = o.invert && model::analyse_small_signal(st.net, st.op).gain_midband < 0.0;
    const std::vector<std::string> w =
        rest_point_warnings(s, st.net, st.op, "render", err, o.stages.size() > 1 ? file.filename().string() : "");
    warnings.insert(warnings.end(), w.begin(), w.end());
    stages.push_back(std::move(st));
  }
  return stages;
}

// Names the outputs. One stage: the file --output names, whose extension must match the
// format. Several stages or --dry: one file each in the folder --output names, made if
// missing (and removed again, if left empty, when the outputs are not committed),
// loudness-matched.
void place_outputs(const render_options& o, model::render_job& job, base::output_set& outputs) {
  // The format decides the names; the input must open to know it.
  dsp::require_seekable_file(o.input, "render reads its input more than once (survey, passes)");
  const dsp::sound_info info = dsp::sound_reader::open(o.input).info();
  const dsp::sample_format format = job.format ? *job.format : dsp::nearest_sample_format(info);
  const fs::path out_path(o.output);
  if (job.stages.size() == 1 && !o.dry) {
    check_extension(out_path, format);
    job.stages[0].output = out_path;
    return;
  }
  std::error_code ec;
  if (fs::exists(out_path, ec) && !fs::is_directory(out_path, ec))
    throw io_error("--output " + quoted_path(out_path) + " is a file; several outputs need a folder there");
  if (!fs::exists(out_path, ec)) {
    const fs::path parent = out_path.has_parent_path() ? out_path.parent_path() : fs::path(".");
    if (!fs::is_directory(parent, ec))
      throw io_error("cannot make the folder " + quoted_path(out_path) + ": " + quoted_path(parent) + " does not exist");
    if (!fs::create_directory(out_path, ec) || ec)
      throw io_error("cannot make the folder " + quoted_path(out_path) + ": " + ec.message());
    outputs.add_made_folder(out_path);
  }
  for (model::render_stage& st : job.stages) st.output = out_path / (st.name + extension_for(format));
  job.dry_output = o.dry ? std::optional<fs::path>(out_path / (std::string("dry") + extension_for(format))) : std::nullopt;
  job.match_loudness = true;
}

// What render reads and writes, for the check before it runs (command::files): the output
// names follow place_outputs.
command_files render_files(const render_options& o) {
  command_files f;
  for (const std::string& s : o.stages) add_stage_inputs(f, s, o.devices);
  f.inputs.push_back({"--input", o.input});
  if (o.stages.size() == 1 && !o.dry) {
    f.outputs.push_back({"--output", o.output, false, o.force});
    return f;
  }
  std::error_code ec;
  if (fs::exists(o.output, ec) && !fs::is_directory(o.output, ec))
    throw io_error("--output " + quoted_path(o.output) + " is a file; several outputs need a folder there");
  // The format names the files: from --format, else from the input's header (a pipe is not
  // opened twice: its name's extension stands in; the writer checks the input again).
  const bool readable_twice = fs::is_regular_file(o.input, ec);
  const dsp::sample_format format =
      !o.format.empty() ? dsp::parse_sample_format(o.format)
      : readable_twice  ? dsp::nearest_sample_format(dsp::sound_reader::open(o.input).info())
      : fs::path(o.input).extension() == ".flac" ? dsp::sample_format::flac24
                                                 : dsp::sample_format::wav24;
  for (const std::string& s : o.stages)
    f.outputs.push_back({"--output (for " + quoted_path(s) + ")", fs::path(o.output) / (fs::path(s).stem().string() + extension_for(format)), true, o.force});
  if (o.dry) f.outputs.push_back({"--output (for --dry)", fs::path(o.output) / (std::string("dry") + extension_for(format)), true, o.force});
  return f;
}

// Calls the model once, with a progress bar on a terminal and Ctrl-C or SIGTERM as its
// stop. The files are left in `outputs`, for the caller to commit.
render_outcome run(const render_options& o, std::ostream& err, base::output_set& outputs) {
  // Ctrl-C from the start: whatever phase it lands in, the run stops at its next check.
  const interrupt_guard guard;
  render_outcome r;
  model::render_job job = job_from(o);
  std::vector<model::stage> read;
  job.stages = load_stages(o, err, r.warnings, read);
  if (is_spl_level(o.input_peak)) {
    // One recording drives every stage: a sound pressure stands for one voltage only when
    // every stage has a capsule of the same sensitivity.
    for (std::size_t i = 1; i < read.size(); ++i)
      if (read[i].has_capsule() && read[0].has_capsule() &&
          read[i].capsule.sensitivity_v_per_pa != read[0].capsule.sensitivity_v_per_pa)
        throw input_error("--input-peak " + o.input_peak + ": " + o.stages[0] + " and " + o.stages[i] +
                          " have capsules of different sensitivity, so one sound pressure is a different voltage for "
                          "each; render them one at a time, or give --input-peak in volts");
    for (std::size_t i = 0; i < read.size(); ++i)
      if (!read[i].has_capsule())
        job.input_peak_v = option_level_vpk(o.input_peak, "--input-peak", &read[i]);  // says why it cannot be
    job.input_peak_v = option_level_vpk(o.input_peak, "--input-peak", &read[0]);
    r.input_peak_db_spl = base::parse_spl_db(o.input_peak);
  }
  place_outputs(o, job, outputs);

  progress_bar bar(err, !o.quiet && stderr_is_terminal());
  model::render_control control;
  control.stop = guard.flag();
  control.outputs = &outputs;
  if (bar.enabled())
    control.progress = [&bar](const model::render_progress& p) { bar.update(p.fraction, p.realtime_factor, p.seconds_left); };
  try {
    r.report = model::render(job, control);
  } catch (const interrupted&) {
    guard.check();  // the model knows only that it was stopped; the guard knows the signal (143 for SIGTERM)
    throw;
  }
  bar.clear();
  r.input = o.input;
  r.input_peak_v = job.input_peak_v;
  r.peak_dbfs = job.peak_dbfs;
  r.fixed_level = job.level == model::output_level::fixed;
  r.dry = o.dry;
  r.noise = o.noise;
  r.seed = o.seed;
  r.stage_count = job.stages.size();
  for (const model::render_stage& st : job.stages) {
    r.chain_lengths.push_back(std::max<std::size_t>(1, st.net.stages.size()));
    r.inverting.push_back(model::analyse_small_signal(st.net, st.op).gain_midband < 0.0);
    r.restored.push_back(st.invert);
  }
  return r;
}

// ---- Setup: the options, their help and the worked examples.
CLI::App* setup(CLI::App& app, render_options& o) {
  CLI::App* sub = app.add_subcommand("render", "Render a recording through one or several stages, to listen to them");
  sub->add_option("STAGE", o.stages, "Stage files (TOML); several are rendered side by side, loudness-matched")
      ->required()
      ->expected(1, -1);
  sub->add_option("--input", o.input, "Recording to play into the stage (WAV, FLAC, AIFF; 44.1 to 768 kHz; a file, not a pipe)")
      ->required()
      ->type_name("IN");
  sub->add_option("--output", o.output,
                  "One stage: the file to write. Several stages or --dry: a folder (made if missing), one file per "
                  "stage named after its stage file")
      ->required()
      ->type_name("OUT");
  sub->add_option("--input-peak", o.input_peak,
                  "Generator voltage (peak) that full scale in the input stands for; see below")
      ->type_name("LEVEL")
      ->capture_default_str();
  auto* fixed = sub->add_option("--output-peak", o.output_peak,
                                "Fix the scale instead of normalising: this voltage (peak) at the load is 0 dBFS; "
                                "samples beyond it are counted as clipped")
                    ->type_name("LEVEL");
  auto* norm = sub->add_option("--normalize", o.normalize, "Peak level of the output (several: the loudest allowed)")
                   ->type_name("dBFS")
                   ->capture_default_str();
  fixed->excludes(norm);
  sub->add_option("--oversample", o.oversample,
                  "Engine oversampling factor: 1, 2, 4, 8, 16, 32 or 64, or auto (8x, raised for inputs that would "
                  "alias when clipped; see below)")
      ->type_name("TEXT:{auto,1,2,4,8,16,32,64}")  // the values; the model checks them
      ->capture_default_str();
  sub->add_option("--format", o.format,
                  "wav16, wav24, float (32-bit float WAV) or flac (24-bit); default: as the input")
      ->type_name("FORMAT");
  sub->add_option("--threads", o.threads, "Threads, 0 (one per core) to 256: engines on up to one each per channel and stage, and from 2 on, one more "
                  "meters and writes beside them; results do not depend on it")
      ->capture_default_str()
      ->check(CLI::Range(0, 256));
  sub->add_flag("--dry", o.dry, "Also write the input itself, matched in loudness, to compare against");
  sub->add_flag("--invert", o.invert,
                "Write an inverting stage's output (common-source) with its polarity restored, for A/B listening");
  sub->add_flag("--noise", o.noise,
                "Add each stage's modelled hiss at the load (Gaussian, with the output noise density `noise` computes), "
                "at its level against the signal through --input-peak; never normalised on its own");
  sub->add_option("--seed", o.seed, "Seed of the --noise streams, 0 or more (the same seed gives the same file)")
      ->capture_default_str()
      ->check(CLI::Validator(
          [](const std::string& v) {
            const bool digits = !v.empty() && v.size() <= 19 &&
                                std::all_of(v.begin(), v.end(), [](unsigned char c) { return std::isdigit(c) != 0; });
            return digits ? std::string() : "expected a whole number from 0 to 9999999999999999999, got '" + v + "'";
          },
          "N"));
  sub->add_flag("--force", o.force, "Replace outputs that exist");
  sub->add_flag("--quiet", o.quiet, "No progress bar");
  sub->add_flag("--json", o.json, "Machine-readable summary of what was written");
  sub->footer(
      "Calibration: full scale (0 dBFS) in the input file stands for --input-peak volts peak at\n"
      "the generator, 1 V by default. That is common practice for instrument and line sources:\n"
      "a hot passive pickup played hard, or a line-level output, peaks around 1 V (single notes\n"
      "from a passive pickup are more like 10-300 mV). A quieter source drives a stage less hard:\n"
      "give the peak your source reaches, e.g. --input-peak 300mV for a vintage-output pickup.\n"
      "With a capsule source it may be a sound pressure: --input-peak 120dBSPL makes a full-scale\n"
      "sine stand for a 120 dB SPL sine at the capsule (its sensitivity times the pressure).\n"
      "\n"
      "Output level: normalised so the peak is at --normalize (-1 dBFS), and the applied gain is\n"
      "printed; --output-peak fixes it instead (the same stage always sounds as loud). Several\n"
      "stages (and --dry) come out at one integrated loudness (ITU-R BS.1770), so that the\n"
      "comparison is not won by the louder stage. A channel whose input or stage output peaks\n"
      "no higher than the engine's accepted error a sample (10.1 nV) is written as silence, never\n"
      "lifted: an all-zero input gives all-zero files (with --noise, the hiss alone, scaled as a\n"
      "signal at the stage's clean swing would be). Each channel runs through its own copy of\n"
      "the stage, starting at its DC operating point; the output keeps the input's length, rate,\n"
      "channels and sample format (unless --format), and is aligned with it sample for sample.\n"
      "Nothing is written until the output is complete: an existing file is kept (unless\n"
      "--force), and Ctrl-C leaves no file behind (exit status 130).\n"
      "\n"
      "Oversampling: a stage clipped hard by bright material makes harmonics far above the\n"
      "audio band, and the engine's sampling folds them back into it; no filter after the\n"
      "engine can remove them. --oversample auto (the default) surveys the input (its peak and\n"
      "the frequency below which 99 % of its power lies), simulates a sine at that level and\n"
      "frequency at 8x, 16x, 32x and 64x, and runs at the lowest factor whose folded products\n"
      "stay below -80 dBc, printing the figures. A number runs at exactly that factor.\n"
      "\n"
      "Examples:\n"
      "  pinchoff render presets/bass-booster-9v.toml --input samples/pluck-phrase-48k.wav --output boosted.wav\n"
      "  pinchoff render presets/bass-booster-9v.toml presets/clean-preamp-18v.toml \\\n"
      "      --input samples/pluck-phrase-48k.wav --output compare --dry\n"
      "      writes compare/bass-booster-9v.wav, compare/clean-preamp-18v.wav and compare/dry.wav\n"
      "      at the same loudness\n"
      "  pinchoff render presets/three-stage-overdrive-9v.toml --input samples/pluck-phrase-48k.wav \\\n"
      "      --output hiss.wav --noise\n"
      "      the chain's own hiss under the phrase, at its level against the signal\n"
      "  pinchoff render presets/bass-booster-9v.toml --input di-take.wav --output hot.wav \\\n"
      "      --input-peak 2V --output-peak 5V\n"
      "      a hotter source, and a fixed scale: 5 V peak at the load is full scale");
  return sub;
}

}  // namespace

void register_render(CLI::App& app, std::vector<command>& commands, const data_files& data) {
  auto opt = std::make_shared<render_options>();
  opt->devices = data.devices;
  CLI::App* sub = setup(app, *opt);
  commands.push_back({sub,
                      [opt](std::ostream& out, std::ostream& err, base::output_set& outputs) {
                        const render_outcome r = run(*opt, err, outputs);
                        if (opt->json) write_json(r, out);
                        else write_text(r, out);
                      },
                      render_options_of_fields,
                      [opt] { return render_files(*opt); }});
}

}  // namespace pinchoff::cli
