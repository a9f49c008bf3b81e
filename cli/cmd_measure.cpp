// pinchoff measure: harmonic analysis of a recorded test tone (the bench half of the loop
// that `pinchoff tone` starts).
#include <algorithm>
#include <cctype>
#include <cmath>
#include <complex>
#include <numbers>
#include <cstdio>
#include <memory>
#include <optional>
#include <sstream>
#include <string>
#include <vector>

#include <CLI/CLI.hpp>
#include <nlohmann/json.hpp>

#include "cli/app.hpp"
#include "cli/common.hpp"
#include "cli/option_text.hpp"
#include "cli/plot.hpp"
#include "cli/text_table.hpp"
#include "base/error.hpp"
#include "dsp/io/sound_file.hpp"
#include "base/units.hpp"
#include "dsp/exp_sweep.hpp"
#include "dsp/level_steps.hpp"
#include "dsp/tone.hpp"
#include "dsp/windowed_analysis.hpp"
#include "model/circuit/stage_file.hpp"
#include "model/analysis/noise.hpp"
#include "model/analysis/response.hpp"
#include "model/analysis/sweep.hpp"
#include "model/circuit/network.hpp"
#include "model/circuit/operating_point.hpp"

namespace pinchoff::cli {
namespace {

using base::format_number;
using base::format_si;
using align = text_table::align;

// The options as typed.
struct measure_options {
  std::filesystem::path devices;  ///< the program's class file
  std::string path;
  std::string freq_text{"auto"};
  int channel{1};
  std::string window_text{"blackman-harris"};
  int harmonics{model::default_harmonics};
  std::string bandwidth_text{"20k"};
  double start_s{0.0};
  double duration_s{0.0};
  std::string plot_path;
  bool json{false};
  // --against STAGE --drive L [--set KEY=VALUE]...: the model's prediction beside it.
  std::string against_path;
  std::string drive_text;
  std::vector<std::string> overrides;
  // --noise [--output-cal L]: a recording of noise alone, read unweighted and weighted.
  bool noise{false};
  std::string output_cal_text;
  // --steps: a staircase, one analysis a step; --input-cal makes dBFS drives volts.
  bool steps{false};
  bool csv{false};
  std::string input_cal_text;
  // --response PLAYED [--sweep FROM..TO] [--points N]: a recorded sweep's linear response.
  std::string response_path;
  std::string sweep_text{"20..20k"};
  int response_points{200};
  std::string latency_text{"auto"};  ///< --latency SECONDS|auto
  /// The options given on the command line (by their long name), to refuse one the chosen
  /// reading does not use.
  std::vector<std::string> given;
};

// Which reading of the recording the options choose.
enum class reading { tone, steps, noise, response };
reading reading_of(const measure_options& o) {
  if (o.noise) return reading::noise;
  if (!o.response_path.empty()) return reading::response;
  if (o.steps) return reading::steps;
  return reading::tone;
}

// Options a reading does not use: given with it, each is refused by name with what it needs,
// rather than silently ignored. (Pairs a reading checks itself, such as --freq with --noise or
// --csv with a tone, are refused there with their own words.)
struct unused_option {
  const char* option;
  std::vector<reading> used_by;
  const char* needs;
};
void refuse_unused(const measure_options& o) {
  static const std::vector<unused_option> table{
      {"--sweep", {reading::response}, "goes with --response PLAYED: the band of the played sweep"},
      {"--points", {reading::response}, "goes with --response PLAYED: the frequencies its response is read at"},
      {"--latency", {reading::response}, "goes with --response PLAYED: the recording chain's latency to remove"},
      {"--window", {reading::tone, reading::steps},
       "goes with a tone or --steps (the window of the harmonic analysis); --response and --noise use none"},
      {"--harmonics", {reading::tone, reading::steps},
       "goes with a tone or --steps (the highest harmonic in THD); --response reads H2..H5, --noise none"},
      {"--bandwidth", {reading::tone, reading::steps, reading::noise},
       "goes with a tone, --steps or --noise (the band's upper edge); --response reads the band of --sweep"},
  };
  const reading r = reading_of(o);
  for (const unused_option& u : table) {
    if (std::find(o.given.begin(), o.given.end(), u.option) == o.given.end()) continue;
    if (std::find(u.used_by.begin(), u.used_by.end(), r) == u.used_by.end())
      throw input_error(std::string(u.option) + " " + u.needs);
  }
}

// --noise: the readings of a recording that holds noise alone, and the stage's predicted
// output noise beside them (--against, in volts through --output-cal).
struct noise_report {
  std::string path;
  dsp::sound_info info;
  int channel{1};
  std::int64_t first_frame{0};
  std::size_t analysed{0};
  std::int64_t available{0};
  dsp::noise_reading reading;
  double cal_vpk{0.0};  ///< the peak volts of a full-scale sine at the recorder's input; 0: not given
  std::string stage_path;
  std::vector<std::string> overrides;
  std::string stage_name;
  model::band_power predicted;  ///< V^2 at the load, with --against
};

// The model's steady state for the same drive at the measured fundamental.
struct prediction {
  std::string path;
  std::vector<std::string> overrides;
  model::stage st;
  double drive_vpk{};
  model::sweep_result sweep;
  std::vector<std::string> warnings;
  const model::sweep_point& point() const { return sweep.points.front(); }
};

struct measure_report {
  std::string path;
  dsp::sound_info info;
  int channel{1};
  dsp::window_kind window{};
  double band_high_hz{};
  std::int64_t first_frame{0};
  std::size_t analysed{0};
  bool trimmed{false};  // ramps at the ends skipped
  std::int64_t available{0};  // frames of the chosen part, before the bound (max_analysed_frames)
  double sample_peak{0.0};
  dsp::windowed_analysis a;
  std::optional<dsp::display_spectrum> spectrum;  // with --plot
  std::optional<prediction> against;
  double output_cal_vpk{0.0};  ///< --output-cal: a full-scale sine's peak volts at the recorder; 0: not given
  double noise_line_dbc{};     ///< what the noise alone reads as a line (noise_line_dbc)
  std::vector<bool> noise_flags;  ///< each harmonic at that floor
};

dsp::window_kind parse_window(const std::string& t) {
  if (t == "blackman-harris") return dsp::window_kind::blackman_harris_4;
  if (t == "flat-top") return dsp::window_kind::hft90d;
  throw input_error("unknown window '" + t + "' (expected blackman-harris or flat-top)");
}

const char* window_description(dsp::window_kind w) {
  return w == dsp::window_kind::hft90d ? "flat-top HFT90D (Heinzel et al. 2002)"
                                       : "4-term Blackman-Harris (Harris 1978)";
}

// dBFS of an rms value, on the scale where a full-scale sine (rms 1/sqrt 2) is 0 dBFS
// (AES17's definition), so a sine of peak A reads 20 log10 A as in `tone`.
double dbfs_from_rms(double rms) { return base::db_from_ratio(rms * base::sqrt2); }

std::string fixed(double v, int decimals) {
  char t[48];
  std::snprintf(t, sizeof t, "%.*f", decimals, v);
  return t;
}

// ---- Calibration and drives (--input-cal, --output-cal, dBFS drives)

// A recorder's or a player's full scale: the peak volts of a full-scale sine there.
double calibration_vpk(const std::string& text, const char* option) {
  if (text.empty()) return 0.0;
  const double v = option_level_vpk(text, option);
  if (!(v >= 1e-3 && v <= 100.0))
    throw input_error(std::string(option) + " must be 1 mV to 100 V peak (a full scale), got " +
                      (v < 1e15 && v >= 1e-15 ? format_si(v, "V") : format_number(v) + " V"));
  return v;
}

bool is_dbfs_text(const std::string& t) {
  std::string l;
  for (char c : t)
    if (!std::isspace(static_cast<unsigned char>(c))) l.push_back(static_cast<char>(std::tolower(static_cast<unsigned char>(c))));
  return l.size() > 4 && l.compare(l.size() - 4, 4, "dbfs") == 0;
}

// One drive at the generator: a voltage level, or a level of the played file in dBFS made
// volts by --input-cal (the generator's peak for a full-scale sine in the file).
double drive_vpk_of(const std::string& text, double input_cal_vpk, const model::stage* source) {
  if (!is_dbfs_text(text)) return option_level_vpk(text, "--drive", source);
  if (input_cal_vpk <= 0.0)
    throw input_error("--drive " + text + " is a level of the played file: give --input-cal, the generator's level "
                      "when the file holds a full-scale sine (such as 1Vpk or +4dBu), to make it volts");
  const double dbfs = parse_db_value(text, "dBFS", "--drive");
  if (dbfs > 0.0) throw input_error("--drive " + text + " is above full scale (0 dBFS at most)");
  return input_cal_vpk * base::ratio_from_db(dbfs);
}

void check_drive_range(double vpk) {
  // A generator's level, as render's --input-peak: beyond these no audio source is met
  // (common practice), and the prediction's figures lose their meaning (1e300 V gave an
  // infinite THD).
  if (!(vpk >= 1e-6 && vpk <= 1e3))
    throw input_error("--drive must be 1 µV to 1 kV peak at the generator, got " +
                      (vpk < 1e15 && vpk >= 1e-15 ? format_si(vpk, "V") : format_number(vpk) + " V"));
}

// --steps --drive: one drive a step, as a comma-separated list of levels or the staircase
// the played file holds (FROM..TO:STEP in dBFS, as `tone --steps` was given it).
std::vector<double> step_drives_vpk(const std::string& text, double input_cal_vpk, const model::stage* source) {
  std::vector<double> d;
  if (looks_like_staircase(text)) {
    if (input_cal_vpk <= 0.0)
      throw input_error("--drive " + text + " is a staircase of the played file's levels: give --input-cal, the "
                        "generator's level when the file holds a full-scale sine (such as 1Vpk), to make them volts");
    const staircase_text st = parse_staircase(text, "--drive");
    for (const dsp::tone_step& s : dsp::level_staircase(st.from_dbfs, st.to_dbfs, st.step_db, 1.0))
      d.push_back(input_cal_vpk * base::ratio_from_db(s.level_dbfs));
  } else {
    std::stringstream ss(text);
    std::string item;
    while (std::getline(ss, item, ',')) d.push_back(drive_vpk_of(item, input_cal_vpk, source));
  }
  for (double v : d) check_drive_range(v);
  return d;
}

// ---- The noise floor under a harmonic

// A measured harmonic within this of the noise in the window's bandwidth reads the noise as
// much as the line (common practice: 10 dB above the noise for a reading within 0.4 dB).
constexpr double noise_floor_margin_db = 10.0;

// The level, re the fundamental, that the record's noise alone gives a line read under the
// window: the noise density (dBc/Hz) over the window's equivalent noise bandwidth, ENBW
// bins of fs / n (Harris 1978).
double noise_line_dbc(const dsp::windowed_analysis& a, dsp::window_kind window, double fs_hz, std::size_t n) {
  const double enbw = dsp::enbw_bins(dsp::make_window(window, 4096));  // in bins, the same at any length to 1e-3
  return a.noise_floor_dbc_per_hz + 10.0 * std::log10(enbw * fs_hz / static_cast<double>(n));
}

// Each counted harmonic: true where it lies within noise_floor_margin_db of that level.
std::vector<bool> at_noise_floor(const dsp::windowed_analysis& a, double line_dbc) {
  std::vector<bool> flags;
  for (const double h : a.harmonics_dbc) flags.push_back(std::isfinite(h) && h <= line_dbc + noise_floor_margin_db);
  return flags;
}

nlohmann::json flags_json(const std::vector<bool>& flags) {
  nlohmann::json j = nlohmann::json::array();
  for (const bool f : flags) j.push_back(f);
  return j;
}

// ---- Run

// --against STAGE with its --drive and --set: the stage to predict, read before the
// recording is analysed.
std::optional<prediction> load_against(const measure_options& o) {
  if (o.against_path.empty()) {
    if (!o.drive_text.empty() || !o.overrides.empty())
      throw input_error("--drive and --set go with --against STAGE (the stage to predict)");
    return std::nullopt;
  }
  if (o.drive_text.empty()) throw input_error("--against needs --drive: the generator level the stage was driven with");
  prediction p;
  p.path = o.against_path;
  p.overrides = o.overrides;
  // A sound pressure level needs the capsule's sensitivity: the stage is read first then.
  const bool spl = is_spl_level(o.drive_text);
  if (spl) p.st = load_stage(p.path, p.overrides, o.devices);
  p.drive_vpk = drive_vpk_of(o.drive_text, calibration_vpk(o.input_cal_text, "--input-cal"), spl ? &p.st : nullptr);
  if (!(p.drive_vpk > 0) || !std::isfinite(p.drive_vpk)) throw input_error("--drive must be above 0 V");
  check_drive_range(p.drive_vpk);
  if (!spl) p.st = load_stage(p.path, p.overrides, o.devices);
  return p;
}

// The most frames measure analyses. The analysis holds the record, its windowed copies and
// their transforms, about 70 bytes a frame (2.0 GB for 28.8 million frames, measured), so
// 2^21 frames bound it near 150 MB: 43.7 s at 48 kHz, 10.9 s at 192 kHz; far more than the
// resolution and noise floor of a bench measurement need. A longer part is analysed from
// its start and the report says how much was left out.
constexpr std::int64_t max_analysed_frames = std::int64_t{1} << 21;

// The rms of each whole block of `block` frames of one channel of [first, first + count).
std::vector<double> stream_block_rms(dsp::sound_reader& rd, int channel, std::int64_t first, std::int64_t count,
                                     std::size_t block, std::int64_t* read = nullptr) {
  rd.seek(first);
  const auto ch = static_cast<std::size_t>(rd.info().channels);
  std::vector<double> buf(8192 * ch), rms;
  double sum = 0.0;
  std::size_t in_block = 0;
  std::int64_t done = 0;
  while (done < count) {
    const std::size_t want = static_cast<std::size_t>(std::min<std::int64_t>(8192, count - done));
    const std::size_t got = rd.read(std::span<double>(buf).first(want * ch));
    if (got == 0) break;
    for (std::size_t i = 0; i < got; ++i) {
      const double v = buf[i * ch + static_cast<std::size_t>(channel)];
      sum += v * v;
      if (++in_block == block) {
        rms.push_back(std::sqrt(sum / static_cast<double>(block)));
        sum = 0.0;
        in_block = 0;
      }
    }
    done += static_cast<std::int64_t>(got);
  }
  if (read) *read = done;
  return rms;
}

// The analysis settings every tone measurement takes from its options: the window, the
// harmonics, the band's top (--bandwidth) and the tone's frequency (--freq, or found).
dsp::windowed_settings analysis_settings(const measure_options& o, dsp::window_kind window) {
  dsp::windowed_settings s;
  s.window = window;
  s.harmonics = o.harmonics;
  s.band_high_hz = option_frequency_hz(o.bandwidth_text, "--bandwidth");
  if (!(s.band_high_hz > s.band_low_hz))
    throw input_error("--bandwidth " + o.bandwidth_text + " must lie above the band's low edge, " +
                      format_si(s.band_low_hz, "Hz") + " (AES17)");
  if (o.freq_text != "auto") s.approx_fundamental_hz = option_frequency_hz(o.freq_text, "--freq");
  return s;
}

// The band's top cut to the file's Nyquist frequency (AES17's 20 kHz applies from 40 kHz
// sampling up), and a --freq above it refused; returns the band's top.
double fit_to_rate(dsp::windowed_settings& s, const measure_options& o, double fs) {
  s.band_high_hz = std::min(s.band_high_hz, fs / 2);
  if (s.approx_fundamental_hz >= fs / 2)
    throw input_error("--freq " + o.freq_text + " lies above half the file's sample rate (" + format_si(fs / 2, "Hz") + ")");
  return s.band_high_hz;
}

// Streams one channel of [first, first + count) and finds its steady part (dsp::steady_part,
// from 10 ms block rms values), in frames relative to `first`; holds only the block values.
dsp::sample_range stream_steady_part(dsp::sound_reader& rd, int channel, std::int64_t first, std::int64_t count) {
  const std::size_t block = dsp::steady_block_samples(rd.info().rate_hz);
  std::int64_t done = 0;
  const std::vector<double> rms = stream_block_rms(rd, channel, first, count, block, &done);
  return dsp::steady_part_of_blocks(rms, block, static_cast<std::size_t>(done));
}

// The recording opened and checked, and the part --start and --duration choose:
// [first, first + count) in frames.
struct recording_part {
  dsp::sound_reader rd;
  std::int64_t first{0}, count{0};
};
recording_part open_part(const measure_options& o, const char* why_a_file) {
  dsp::require_seekable_file(o.path, why_a_file);
  recording_part p{dsp::sound_reader::open(o.path)};
  const dsp::sound_info& info = p.rd.info();
  if (o.channel < 1 || o.channel > info.channels)
    throw input_error("'" + o.path + "' has " + std::to_string(info.channels) + " channel" + (info.channels == 1 ? "" : "s") +
                      "; --channel " + std::to_string(o.channel) + " does not exist");
  if (info.frames <= 0) throw input_error("'" + o.path + "' holds no audio (a header and no frames)");
  const double fs = info.rate_hz;
  // In seconds first: a time far beyond the file does not fit in a count of frames.
  if (!(o.start_s * fs < static_cast<double>(info.frames) - 0.5))
    throw input_error("--start " + format_number(o.start_s) + " s lies beyond the end of '" + o.path + "' (" +
                      format_number(info.seconds(), 4) + " s)");
  p.first = static_cast<std::int64_t>(std::llround(o.start_s * fs));
  p.count = info.frames - p.first;
  if (o.duration_s > 0.0 && o.duration_s * fs < static_cast<double>(p.count))
    p.count = static_cast<std::int64_t>(std::llround(o.duration_s * fs));
  return p;
}

// How far a tone's level may move within the span analysed (dsp::level_spread_db): a steady
// tone reads under 0.6 dB, the nearest steps of a staircase 1 dB and up apart.
constexpr double max_level_spread_db = 3.0;

measure_report analyse(const measure_options& o) {
  measure_report r;
  r.path = o.path;
  r.window = parse_window(o.window_text);
  if (o.harmonics < 2 || o.harmonics > 100) throw input_error("--harmonics must be 2 to 100, got " + std::to_string(o.harmonics));
  if (!(o.start_s >= 0.0) || !(o.duration_s >= 0.0)) throw input_error("--start and --duration must not be negative");
  dsp::windowed_settings s = analysis_settings(o, r.window);

  recording_part part = open_part(o, "measure reads the recording twice (to find its steady part, then to analyse it)");
  dsp::sound_reader& rd = part.rd;
  r.info = rd.info();
  r.channel = o.channel;
  const double fs = r.info.rate_hz;
  r.band_high_hz = fit_to_rate(s, o, fs);
  if (o.freq_text != "auto" && s.approx_fundamental_hz < s.band_low_hz)
    throw input_error("--freq " + o.freq_text + " lies below the measurement band, which starts at " +
                      format_si(s.band_low_hz, "Hz") + " (AES17)");
  r.first_frame = part.first;
  std::int64_t count = part.count;
  if (o.start_s == 0.0 && o.duration_s == 0.0) {
    const dsp::sample_range keep = stream_steady_part(rd, o.channel - 1, r.first_frame, count);
    r.trimmed = keep.begin != 0 || static_cast<std::int64_t>(keep.end) != count;
    r.first_frame += static_cast<std::int64_t>(keep.begin);
    count = static_cast<std::int64_t>(keep.end - keep.begin);
  }
  r.available = count;
  rd.seek(r.first_frame);
  std::vector<double> x = dsp::read_channel(rd, o.channel - 1, std::min(count, max_analysed_frames));
  if (x.size() < 64)
    throw input_error("'" + o.path + "' holds " + std::to_string(x.size()) + " frames to analyse; at least 64 are needed");
  // One THD+N over several levels means nothing (the notch takes one fundamental's level):
  // a span whose level moves by more than a few dB is refused with the way to measure it.
  if (const double spread = dsp::level_spread_db(x, fs); spread > max_level_spread_db)
    throw input_error("'" + o.path + "': the level changes by " + format_number(spread, 3) + " dB within the span analysed (" +
                      fixed(static_cast<double>(r.first_frame) / fs, 3) + " s to " +
                      fixed(static_cast<double>(r.first_frame + static_cast<std::int64_t>(x.size())) / fs, 3) +
                      " s): it holds several levels, and one THD+N over them means nothing. Measure each level with "
                      "--steps, or choose one with --start and --duration");
  x.resize(dsp::fast_analysis_length(x.size()));
  r.analysed = x.size();
  for (double v : x) r.sample_peak = std::max(r.sample_peak, std::abs(v));
  try {
    r.a = dsp::analyse_windowed(x, fs, s);
  } catch (const input_error& e) {
    throw input_error("'" + o.path + "': " + e.what());  // "no tone found" must say in which file
  }

  r.noise_line_dbc = noise_line_dbc(r.a, r.window, fs, x.size());
  r.noise_flags = at_noise_floor(r.a, r.noise_line_dbc);
  if (!o.plot_path.empty())
    r.spectrum = dsp::spectrum_for_display(x, fs, r.window, std::min(10.0, fs / 2 / 100), fs / 2);
  return r;
}

// Simulated at the measured fundamental with the same harmonics and band as the
// measurement, so both THD figures count the same lines.
void predict(measure_report& r, const measure_options& o) {
  prediction& p = *r.against;
  model::sweep_settings s;
  s.frequency_hz = r.a.fundamental_hz;
  s.drives_vpk = {p.drive_vpk};
  s.harmonics = o.harmonics;
  s.bandwidth_hz = r.band_high_hz;
  if (!(s.frequency_hz < 0.5 * s.base_rate_hz))
    throw input_error("the recording's fundamental, " + format_si(s.frequency_hz, "Hz") + ", lies above the " +
                      format_si(0.5 * s.base_rate_hz, "Hz") + " the model's test tone can reach");
  p.sweep = model::run_sweep(p.st, s);  // checks the settings
  const model::sweep_point& pt = p.point();
  if (pt.newton.failed > 0)
    p.warnings.push_back(std::to_string(pt.newton.failed) + " samples of the prediction did not converge even sub-stepped");
  if (!pt.converged)
    p.warnings.push_back("the prediction's steady state was not reached (state still changes " + format_si(pt.state_change_v, "V") +
                         " a period)");
}

// ---- Formatters

std::string db_text(double v, const char* unit) { return std::isfinite(v) ? format_number(v, 4) + " " + unit : "n/a"; }
std::string dbc_text(double v) {
  if (!std::isfinite(v)) return "n/a";
  char t[32];
  std::snprintf(t, sizeof t, "%.2f dBc", v);
  return t;
}

std::string signed_db(double v) {
  if (!std::isfinite(v)) return "-";
  char t[32];
  std::snprintf(t, sizeof t, "%+.2f dB", std::fabs(v) < 0.005 ? 0.0 : v);  // no "-0.00"
  return t;
}

// ---- Noise alone (--noise)

noise_report analyse_noise_recording(const measure_options& o) {
  if (!o.drive_text.empty())
    throw input_error("--drive goes with a tone: --noise reads a recording of the stage's output with no signal");
  if (o.steps) throw input_error("--steps and --noise: choose one (a staircase of tones, or a recording of noise alone)");
  if (!o.input_cal_text.empty())
    throw input_error("--input-cal goes with a tone's --drive: --noise reads a recording with no signal");
  if (o.csv) throw input_error("--csv goes with --steps (one row a step)");
  if (o.freq_text != "auto") throw input_error("--freq goes with a tone: --noise reads a recording with no signal");
  if (!o.plot_path.empty()) throw input_error("--plot draws a tone's spectrum; with --noise there is no tone to mark");
  if (!o.against_path.empty() && o.output_cal_text.empty())
    throw input_error("--noise --against compares volts: give --output-cal, the level a full-scale sine has at the "
                      "recorder's input (such as 1.55Vpk or +6dBu)");
  if (!o.overrides.empty() && o.against_path.empty()) throw input_error("--set goes with --against STAGE (the stage to predict)");
  if (!(o.start_s >= 0.0) || !(o.duration_s >= 0.0)) throw input_error("--start and --duration must not be negative");
  noise_report r;
  r.path = o.path;
  if (!o.output_cal_text.empty()) {
    r.cal_vpk = option_level_vpk(o.output_cal_text, "--output-cal");
    if (!(r.cal_vpk >= 1e-3 && r.cal_vpk <= 100.0))
      throw input_error("--output-cal must be 1 mV to 100 V peak (a recorder's full scale), got " + format_si(r.cal_vpk, "V"));
  }
  const double band_high = option_frequency_hz(o.bandwidth_text, "--bandwidth");
  if (!(band_high > 20.0))
    throw input_error("--bandwidth " + o.bandwidth_text + " must lie above the band's low edge, 20 Hz (AES17)");
  std::optional<model::stage> st;
  if (!o.against_path.empty()) st = load_stage(o.against_path, o.overrides, o.devices);

  recording_part part = open_part(o, "measure reads the recording from a file");
  dsp::sound_reader& rd = part.rd;
  r.info = rd.info();
  r.channel = o.channel;
  const double fs = r.info.rate_hz;
  r.first_frame = part.first;
  const std::int64_t count = part.count;
  r.available = count;
  rd.seek(r.first_frame);
  std::vector<double> x = dsp::read_channel(rd, o.channel - 1, std::min(count, max_analysed_frames));
  // A quarter of a second puts 5 bins below the band's 20 Hz edge (the Hann window's main
  // lobe is 2 bins wide); a few seconds read steadier.
  if (static_cast<double>(x.size()) < 0.25 * fs)
    throw input_error("'" + o.path + "' holds " + format_number(static_cast<double>(x.size()) / fs, 3) +
                      " s to analyse; a noise reading needs at least 0.25 s (a few seconds read steadier)");
  x.resize(dsp::fast_analysis_length(x.size()));
  r.analysed = x.size();
  r.reading = dsp::analyse_noise_record(x, fs, 20.0, std::min(band_high, fs / 2));
  if (st) {
    r.stage_path = o.against_path;
    r.overrides = o.overrides;
    r.stage_name = st->name;
    const model::network net = model::build_network(*st);
    const model::operating_point op = model::solve_operating_point(net);
    model::noise_settings s;
    s.band_lo_hz = 20.0;
    s.band_hi_hz = std::min(band_high, fs / 2);
    s.from_hz = s.band_lo_hz;
    s.to_hz = s.band_hi_hz;
    s.points = 2;
    r.predicted = model::analyse_noise(net, op, s).output;
  }
  return r;
}

// The three readings' rms (full-scale units) and the predicted ones (V^2), in order.
struct noise_row {
  const char* label;
  const char* key;
  double rms_fs;
  double predicted_v2;
};
std::vector<noise_row> noise_rows(const noise_report& r) {
  return {{"unweighted", "noise", r.reading.rms_v, r.predicted.unweighted},
          {"A-weighted", "noise_a", r.reading.a_rms_v, r.predicted.a},
          {"ITU-R 468 (rms)", "noise_468", r.reading.itu468_rms_v, r.predicted.itu468}};
}

void write_noise_text(const noise_report& r, std::ostream& out) {
  const double fs = r.info.rate_hz;
  out << r.path << ": " << r.info.format_text << ", "
      << (fs == std::floor(fs) ? std::to_string(static_cast<long long>(fs)) : format_number(fs, 6)) << " Hz, " << r.info.channels
      << (r.info.channels == 1 ? " channel, " : " channels, ") << format_number(r.info.seconds(), 4) << " s\n";
  out << "  channel " << r.channel << ", " << format_number(static_cast<double>(r.analysed) / fs, 4) << " s analysed from "
      << fixed(static_cast<double>(r.first_frame) / fs, 3) << " s, all of it read as noise (no tone is looked for)"
      << (r.available > max_analysed_frames
              ? "\n  (the first part of " + format_number(static_cast<double>(r.available) / fs, 4) +
                    " s: measure analyses at most " + std::to_string(max_analysed_frames) + " frames)"
              : std::string())
      << "\n  band " << format_si(r.reading.band_low_hz, "Hz", 3) << " to " << format_si(r.reading.band_high_hz, "Hz", 3)
      << ", Hann window\n";
  const bool cal = r.cal_vpk > 0.0;
  out << "\nNoise\n";
  text_table t(cal ? std::vector<align>{align::left, align::right, align::right, align::right}
                   : std::vector<align>{align::left, align::right});
  if (cal) t.add({"", "dBFS", "dBu", "rms"});
  for (const noise_row& n : noise_rows(r)) {
    std::vector<std::string> row{n.label, fixed(dbfs_from_rms(n.rms_fs), 1) + (cal ? "" : " dBFS")};
    if (cal) {
      const double v = n.rms_fs * r.cal_vpk;
      row.push_back(fixed(model::dbu_of_rms(v), 1));
      row.push_back(format_si(v, "V"));
    }
    t.add(row);
  }
  t.write(out);
  out << "  dBFS: 0 for a full-scale sine's rms (AES17)"
      << (cal ? ";\n  volts: a full-scale sine is " + format_si(r.cal_vpk, "V") + " peak at the recorder (--output-cal)"
              : std::string())
      << ".\n  ITU-R 468 here is its weighting filter read as rms, not the recommendation's quasi-peak meter.\n";
  if (r.stage_path.empty()) return;
  out << "\nAgainst the model\n  " << r.stage_path;
  for (const std::string& o : r.overrides) out << " --set " << o;
  out << ": " << r.stage_name << ", its noise at the load over the same band\n\n";
  text_table a({align::left, align::right, align::right, align::right});
  a.add({"", "measured", "predicted", "difference"});
  for (const noise_row& n : noise_rows(r)) {
    const double m = model::dbu_of_rms(n.rms_fs * r.cal_vpk), q = model::dbu_of_rms(std::sqrt(n.predicted_v2));
    a.add({n.label, fixed(m, 1) + " dBu", fixed(q, 1) + " dBu", signed_db(m - q)});
  }
  a.write(out);
  out << "  difference: measured minus predicted. The recorder's own noise adds to the stage's in power:\n"
         "  record the recorder with its input terminated too, and trust a difference only where the\n"
         "  stage's reading lies 10 dB or more above that floor.\n";
}

void write_noise_json(const noise_report& r, std::ostream& out) {
  const double fs = r.info.rate_hz;
  nlohmann::json j{{"path", r.path},
                   {"mode", "noise"},
                   {"rate_hz", fs},
                   {"channel", r.channel},
                   {"start_s", static_cast<double>(r.first_frame) / fs},
                   {"duration_s", static_cast<double>(r.analysed) / fs},
                   {"band_hz", {r.reading.band_low_hz, r.reading.band_high_hz}}};
  const bool cal = r.cal_vpk > 0.0;
  if (cal) j["output_cal_vpk"] = r.cal_vpk;
  nlohmann::json pred = nlohmann::json::object(), diff = nlohmann::json::object();
  for (const noise_row& n : noise_rows(r)) {
    const std::string key = n.key;
    j[key + "_dbfs"] = dbfs_from_rms(n.rms_fs);
    if (cal) {
      j[key + "_v"] = n.rms_fs * r.cal_vpk;
      j[key + "_dbu"] = model::dbu_of_rms(n.rms_fs * r.cal_vpk);
    }
    if (!r.stage_path.empty()) {
      const double q = model::dbu_of_rms(std::sqrt(n.predicted_v2));
      pred[key + "_dbu"] = q;
      pred[key + "_v"] = std::sqrt(n.predicted_v2);
      diff[key + "_db"] = model::dbu_of_rms(n.rms_fs * r.cal_vpk) - q;
    }
  }
  if (!r.stage_path.empty())
    j["against"] = {{"stage_path", r.stage_path}, {"overrides", r.overrides}, {"name", r.stage_name},
                    {"predicted", pred}, {"difference", diff}};
  out << json_text(j) << '\n';
}


void write_against_text(const measure_report& r, std::ostream& out) {
  const prediction& p = *r.against;
  const model::sweep_point& pt = p.point();
  const dsp::windowed_analysis& a = r.a;
  out << "\nAgainst the model\n  " << p.path;
  for (const std::string& o : p.overrides) out << " --set " << o;
  out << ": " << p.st.name << "\n  drive " << format_si(p.drive_vpk, "Vpk") << " (" << fixed(base::dbu_from_vpk(p.drive_vpk), 2)
      << " dBu) at " << fixed(p.sweep.frequency_hz, 3) << " Hz ("
      << (std::fabs(p.sweep.frequency_hz - a.fundamental_hz) < 5e-4
              ? std::string("the measured fundamental")
              : "the measured " + fixed(a.fundamental_hz, 3) + " Hz, snapped to whole cycles")
      << "), " << p.sweep.oversample << "x oversampling\n  predicted output " << format_si(pt.output_vpk, "Vpk") << " ("
      << fixed(base::dbu_from_vpk(pt.output_vpk), 2) << " dBu) at the load; the recording holds it at "
      << fixed(base::db_from_ratio(a.fundamental_vpk), 2) << " dBFS\n";
  for (const std::string& w : p.warnings) out << "  ! " << w << '\n';
  out << '\n';
  text_table t({align::left, align::right, align::right, align::right});
  t.add({"", "measured", "predicted", "difference"});
  for (std::size_t i = 0; i < a.harmonics_dbc.size(); ++i) {
    const int n = static_cast<int>(i) + 2;
    if (n > a.highest_harmonic) break;
    const double m = a.harmonics_dbc[i];
    const double q = i < pt.harmonics_dbc.size() ? pt.harmonics_dbc[i] : std::nan("");
    const bool is_floor = below_numerical_floor(q);  // a mark, not a number (cli/common.hpp)
    const bool is_noise = r.noise_flags[i];
    t.add({"H" + std::to_string(n), dbc_text(m) + (is_noise ? " (noise)" : ""),
           is_floor ? std::string(floor_mark) + " dBc" : dbc_text(q), is_floor && is_noise ? std::string("-") : signed_db(m - q)});
  }
  t.add({"THD", format_number(a.thd_percent, 4) + " %", format_number(pt.thd_percent, 4) + " %",
         signed_db(base::db_from_ratio(a.thd_ratio / pt.thd_ratio))});
  if (r.output_cal_vpk > 0.0) {
    const double gain_db = base::db_from_ratio(a.fundamental_vpk * r.output_cal_vpk / p.drive_vpk);
    t.add({"gain", fixed(gain_db, 2) + " dB", fixed(pt.gain_db, 2) + " dB", signed_db(gain_db - pt.gain_db)});
  }
  t.write(out);
  out << "  difference: measured minus predicted; dBc figures do not depend on the recording's gain.\n"
         "  A measured harmonic near the noise floor reads the noise, not the "
      << (p.st.is_chain() ? "chain" : "stage") << ".\n";
}

void write_text(const measure_report& r, std::ostream& out) {
  const dsp::windowed_analysis& a = r.a;
  const double fs = r.info.rate_hz;
  out << r.path << ": " << r.info.format_text << ", "
      << (fs == std::floor(fs) ? std::to_string(static_cast<long long>(fs)) : format_number(fs, 6)) << " Hz, " << r.info.channels
      << (r.info.channels == 1 ? " channel, " : " channels, ") << format_number(r.info.seconds(), 4) << " s\n";
  out << "  channel " << r.channel << ", " << format_number(static_cast<double>(r.analysed) / fs, 4) << " s analysed from "
      << fixed(static_cast<double>(r.first_frame) / fs, 3) << " s" << (r.trimmed ? " (fades or silence at the ends skipped)" : "")
      << (r.available > max_analysed_frames
              ? "\n  (the first part of " + format_number(static_cast<double>(r.available) / fs, 4) +
                    " s: measure analyses at most " + std::to_string(max_analysed_frames) + " frames)"
              : std::string())
      << "\n  window " << window_description(r.window) << "; band 20 Hz to " << format_si(r.band_high_hz, "Hz") << " (AES17)\n";
  if (!r.info.is_float && r.sample_peak >= 32767.0 / 32768.0)
    out << "  ! samples at full scale: the recording may be clipped, which adds harmonics of its own\n";

  out << "\nFundamental\n";
  text_table f({align::left, align::right});
  f.add({"frequency", fixed(a.fundamental_hz, 4) + " Hz"});
  f.add({"level", fixed(base::db_from_ratio(a.fundamental_vpk), 2) + " dBFS"});
  if (r.output_cal_vpk > 0.0)
    f.add({"output", format_si(a.fundamental_vpk * r.output_cal_vpk, "Vpk") + " (" +
                         fixed(base::dbu_from_vpk(a.fundamental_vpk * r.output_cal_vpk), 2) + " dBu, --output-cal)"});
  f.add({"DC", fixed(base::db_from_ratio(std::abs(a.dc_v)), 1) + " dBFS"});
  f.write(out);

  out << "\nHarmonics (relative to the fundamental)\n";
  text_table h({align::left, align::right, align::right, align::right});
  for (std::size_t i = 0; i < a.harmonics_dbc.size(); ++i) {
    const int n = static_cast<int>(i) + 2;
    const double fh = n * a.fundamental_hz;
    if (n > a.highest_harmonic) {
      h.add({"H" + std::to_string(n), format_si(fh, "Hz", 4), "above the band", ""});
      continue;
    }
    h.add({"H" + std::to_string(n), format_si(fh, "Hz", 4), dbc_text(a.harmonics_dbc[i]),
           fixed(base::db_from_ratio(a.harmonics_vpk[i]), 2) + " dBFS" + (r.noise_flags[i] ? "  at the noise floor" : "")});
  }
  h.write(out);
  out << "  at the noise floor: within " << format_number(noise_floor_margin_db, 2) << " dB of what the noise alone reads there ("
      << fixed(r.noise_line_dbc, 1) << " dBc in the window's bandwidth)\n";

  out << "\nTotals\n";
  text_table t({align::left, align::right, align::right});
  const std::string range = a.highest_harmonic >= 2 ? "H2..H" + std::to_string(a.highest_harmonic) : "no harmonic in band";
  t.add({"THD (" + range + ")", format_number(a.thd_percent, 4) + " %", db_text(a.thd_db, "dB")});
  t.add({"THD+N (band, AES17)", format_number(a.thd_n_percent, 4) + " %", db_text(a.thd_n_db, "dB")});
  t.add({"noise (band, lines removed)", fixed(dbfs_from_rms(a.noise_rms_v), 1) + " dBFS", dbc_text(a.noise_dbc)});
  t.add({"  A-weighted", fixed(dbfs_from_rms(a.noise_a_rms_v), 1) + " dBFS", ""});
  t.add({"  ITU-R 468 (rms)", fixed(dbfs_from_rms(a.noise_468_rms_v), 1) + " dBFS", ""});
  t.add({"noise density", "", fixed(a.noise_floor_dbc_per_hz, 1) + " dBc/Hz"});
  t.write(out);
  out << "  THD: harmonics relative to the fundamental; THD+N: everything but the fundamental\n"
         "  relative to the total rms in the band; dBFS: 0 for a sine reaching full scale.\n";
  if (r.against) write_against_text(r, out);
}

void write_json(const measure_report& r, std::ostream& out) {
  const dsp::windowed_analysis& a = r.a;
  nlohmann::json dbc = nlohmann::json::array(), dbfs = nlohmann::json::array();
  for (std::size_t i = 0; i < a.harmonics_dbc.size(); ++i) {
    dbc.push_back(number_or_null(a.harmonics_dbc[i]));
    dbfs.push_back(number_or_null(std::isfinite(a.harmonics_vpk[i]) ? base::db_from_ratio(a.harmonics_vpk[i])
                                                                    : a.harmonics_vpk[i]));
  }
  const double fs = r.info.rate_hz;
  nlohmann::json j{{"path", r.path},
                   {"rate_hz", fs},
                   {"channel", r.channel},
                   {"start_s", static_cast<double>(r.first_frame) / fs},
                   {"duration_s", static_cast<double>(r.analysed) / fs},
                   {"ends_skipped", r.trimmed},
                   {"available_s", static_cast<double>(r.available) / fs},
                   {"max_analysed_frames", max_analysed_frames},
                   {"window", std::string(dsp::window_name(r.window))},
                   {"bandwidth_hz", r.band_high_hz},
                   {"fundamental_hz", a.fundamental_hz},
                   {"fundamental_dbfs", base::db_from_ratio(a.fundamental_vpk)},
                   {"dc_dbfs", base::db_from_ratio(std::abs(a.dc_v))},
                   {"highest_harmonic", a.highest_harmonic},
                   {"harmonics_dbc", dbc},
                   {"harmonics_dbfs", dbfs},
                   {"thd_percent", a.thd_percent},
                   {"thd_db", a.thd_db},
                   {"thd_n_percent", a.thd_n_percent},
                   {"thd_n_db", a.thd_n_db},
                   {"noise_dbfs", dbfs_from_rms(a.noise_rms_v)},
                   {"noise_dbc", a.noise_dbc},
                   {"noise_a_dbfs", dbfs_from_rms(a.noise_a_rms_v)},
                   {"noise_468_dbfs", dbfs_from_rms(a.noise_468_rms_v)},
                   {"noise_density_dbc_per_hz", a.noise_floor_dbc_per_hz},
                   {"sample_peak_dbfs", base::db_from_ratio(r.sample_peak)},
                   {"noise_line_dbc", r.noise_line_dbc},
                   {"harmonics_at_noise_floor", flags_json(r.noise_flags)}};
  if (r.output_cal_vpk > 0.0) {
    j["output_cal_vpk"] = r.output_cal_vpk;
    j["output_vpk"] = a.fundamental_vpk * r.output_cal_vpk;
  }
  if (r.against) {
    const prediction& p = *r.against;
    const model::sweep_point& pt = p.point();
    // A predicted level below the numerical floor is no figure: null, flagged, and so is its
    // difference (cli/common.hpp).
    nlohmann::json hs = nlohmann::json::array(), diff = nlohmann::json::array();
    std::vector<double> predicted;
    for (std::size_t i = 0; i < a.harmonics_dbc.size(); ++i) {
      const double q = i < pt.harmonics_dbc.size() ? pt.harmonics_dbc[i] : std::nan("");
      predicted.push_back(q);
      hs.push_back(dbc_or_null(q));
      // Two floors (the model's numerical one, the recording's noise) have no difference.
      diff.push_back(below_numerical_floor(q) && r.noise_flags[i] ? nlohmann::json(nullptr)
                                                                   : number_or_null(a.harmonics_dbc[i] - q));
    }
    j["against"] = {{"stage_path", p.path},
                    {"overrides", p.overrides},
                    {"name", p.st.name},
                    {"drive_vpk", p.drive_vpk},
                    {"drive_dbu", base::dbu_from_vpk(p.drive_vpk)},
                    {"frequency_hz", p.sweep.frequency_hz},
                    {"requested_frequency_hz", p.sweep.requested_hz},
                    {"oversampling", p.sweep.oversample},
                    {"output_vpk", pt.output_vpk},
                    {"output_dbu", base::dbu_from_vpk(pt.output_vpk)},
                    {"harmonics_dbc", hs},
                    {"harmonics_below_floor", below_floor_json(predicted)},
                    {"numerical_floor_dbc", model::numerical_floor_dbc},
                    {"difference_db", diff},
                    {"thd_percent", pt.thd_percent},
                    {"thd_db", pt.thd_db},
                    {"thd_difference_db", number_or_null(base::db_from_ratio(a.thd_ratio / pt.thd_ratio))},
                    {"steady_state_converged", pt.converged},
                    {"warnings", p.warnings}};
    j["against"]["gain_db"] = pt.gain_db;
    if (r.output_cal_vpk > 0.0) {
      const double gain_db = base::db_from_ratio(a.fundamental_vpk * r.output_cal_vpk / p.drive_vpk);
      j["against"]["measured_gain_db"] = gain_db;
      j["against"]["gain_difference_db"] = gain_db - pt.gain_db;
    }
  }
  out << json_text(j) << '\n';
}

// The spectrum with the harmonics marked, as SVG.
void write_plot(const measure_report& r, const measure_options& o, base::output_set& outputs) {
  const double top_hz = r.info.rate_hz / 2;
  const dsp::display_spectrum& sp = *r.spectrum;
  line_plot p;
  p.title = "Spectrum of " + std::filesystem::path(o.path).filename().string() + ", channel " + std::to_string(o.channel);
  p.x = axis{"frequency (Hz)", axis_scale::log10, std::min(10.0, top_hz / 100), top_hz};
  series line{"windowed spectrum (" + std::string(dsp::window_name(r.window)) + ")", sp.frequency_hz, {}};
  double lowest = 0.0;
  for (double a : sp.amplitude_vpk) {
    line.y.push_back(base::db_from_ratio(a));
    if (std::isfinite(line.y.back())) lowest = std::min(lowest, line.y.back());
  }
  p.top.y = axis{"level (dBFS, sine peak)", axis_scale::linear, std::max(-200.0, 20.0 * std::floor(lowest / 20.0)), 0.0};
  p.top.lines.push_back(std::move(line));
  p.markers.push_back({r.a.fundamental_hz, "H1"});
  // Label a harmonic only where it stands clear of the one before (3 % of the axis width),
  // so the labels do not overprint; the unlabelled lines follow in order.
  const double decades = std::log10(top_hz / *p.x.min);
  for (int h = 2; h <= r.a.highest_harmonic; ++h) {
    const bool is_clear = std::log10(h / (h - 1.0)) > 0.03 * decades;
    p.markers.push_back({h * r.a.fundamental_hz, is_clear ? "H" + std::to_string(h) : std::string()});
  }
  add_svg_output(outputs, o.plot_path, render_svg(p));
}

measure_report run(const measure_options& o) {
  if (o.csv) throw input_error("--csv goes with --steps (one row a step); a single tone's report is --json");
  if (!o.input_cal_text.empty() && o.against_path.empty())
    throw input_error("--input-cal goes with --against and its --drive: it makes drives in dBFS of the played file volts");
  const double output_cal = calibration_vpk(o.output_cal_text, "--output-cal");
  std::optional<prediction> against = load_against(o);
  measure_report r = analyse(o);
  r.output_cal_vpk = output_cal;
  r.against = std::move(against);
  if (r.against) predict(r, o);
  return r;
}

// ---- A staircase (--steps)

struct step_row {
  std::int64_t first_frame{0};  ///< in the file
  std::size_t analysed{0};
  dsp::windowed_analysis a;
  double noise_line_dbc{};
  std::vector<bool> noise_flags;  ///< each harmonic at the noise floor
};

struct steps_report {
  std::string path;
  dsp::sound_info info;
  int channel{1};
  dsp::window_kind window{};
  double band_high_hz{};
  int harmonics{model::default_harmonics};
  std::int64_t first_frame{0}, count{0};  ///< the part searched
  std::vector<step_row> steps;
  std::vector<dsp::sample_range> no_tone;  ///< plateaus without a tone, in frames of the file
  double input_cal_vpk{0.0}, output_cal_vpk{0.0};
  std::optional<prediction> against;       ///< one sweep point a step, in order
};

// A plateau whose band power lies mostly off its strongest line holds no tone: noise, or the
// recorder's floor between takes. A square wave, the most distorted test tone there is,
// reads 43 % THD+N; this is far past it.
constexpr double no_tone_thd_n = 0.9;

steps_report analyse_steps(const measure_options& o) {
  steps_report r;
  r.path = o.path;
  r.window = parse_window(o.window_text);
  r.harmonics = o.harmonics;
  if (o.harmonics < 2 || o.harmonics > 100) throw input_error("--harmonics must be 2 to 100, got " + std::to_string(o.harmonics));
  if (!(o.start_s >= 0.0) || !(o.duration_s >= 0.0)) throw input_error("--start and --duration must not be negative");
  r.input_cal_vpk = calibration_vpk(o.input_cal_text, "--input-cal");
  r.output_cal_vpk = calibration_vpk(o.output_cal_text, "--output-cal");
  dsp::windowed_settings s = analysis_settings(o, r.window);

  recording_part part = open_part(o, "measure --steps reads the recording twice (to find its steps, then to analyse each)");
  dsp::sound_reader& rd = part.rd;
  r.info = rd.info();
  r.channel = o.channel;
  const double fs = r.info.rate_hz;
  r.band_high_hz = fit_to_rate(s, o, fs);
  r.first_frame = part.first;
  r.count = part.count;
  const std::size_t block = dsp::step_block_samples(fs);
  const std::vector<double> rms = stream_block_rms(rd, o.channel - 1, part.first, part.count, block);
  const std::vector<dsp::sample_range> found = dsp::find_level_steps(rms, block);
  if (found.empty())
    throw input_error("'" + o.path + "': no step found: no level holds for " +
                      format_number(static_cast<double>(dsp::step_settings{}.min_step_blocks) * dsp::step_block_seconds, 2) +
                      " s or more within " + format_number(dsp::step_settings{}.tolerance_db, 2) +
                      " dB (a staircase's steps must differ by more than 1 dB)");

  // Each step read on its own; the loudest first, without a frequency unless --freq gave
  // one, and the others at its frequency, so a quiet step near the floor does not lock onto
  // hum.
  std::size_t loudest = 0;
  double loudest_rms = -1.0;
  for (std::size_t k = 0; k < found.size(); ++k) {
    double sum = 0.0;
    for (std::size_t b = found[k].begin / block; b < found[k].end / block; ++b) sum += rms[b] * rms[b];
    const double m = sum / static_cast<double>(std::max<std::size_t>(1, (found[k].end - found[k].begin) / block));
    if (m > loudest_rms) {
      loudest_rms = m;
      loudest = k;
    }
  }
  std::vector<std::optional<step_row>> rows(found.size());
  const auto analyse_one = [&](std::size_t k, const dsp::windowed_settings& ws) {
    step_row row;
    row.first_frame = part.first + static_cast<std::int64_t>(found[k].begin);
    rd.seek(row.first_frame);
    std::vector<double> x =
        dsp::read_channel(rd, o.channel - 1, std::min<std::int64_t>(static_cast<std::int64_t>(found[k].end - found[k].begin), max_analysed_frames));
    x.resize(dsp::fast_analysis_length(x.size()));
    row.analysed = x.size();
    try {
      row.a = dsp::analyse_windowed(x, fs, ws);
    } catch (const input_error&) {
      return std::optional<step_row>{};  // no tone in it (silence under noise, DC)
    }
    if (row.a.thd_n_ratio > no_tone_thd_n) return std::optional<step_row>{};
    row.noise_line_dbc = noise_line_dbc(row.a, ws.window, fs, x.size());
    row.noise_flags = at_noise_floor(row.a, row.noise_line_dbc);
    return std::optional<step_row>{row};
  };
  rows[loudest] = analyse_one(loudest, s);
  if (!rows[loudest])
    throw input_error("'" + o.path + "': no tone found in its loudest step (from " +
                      fixed(static_cast<double>(part.first + static_cast<std::int64_t>(found[loudest].begin)) / fs, 3) + " s)");
  dsp::windowed_settings at = s;
  at.approx_fundamental_hz = rows[loudest]->a.fundamental_hz;
  for (std::size_t k = 0; k < found.size(); ++k)
    if (k != loudest) rows[k] = analyse_one(k, at);
  for (std::size_t k = 0; k < found.size(); ++k) {
    if (rows[k]) r.steps.push_back(std::move(*rows[k]));
    else
      r.no_tone.push_back({static_cast<std::size_t>(part.first) + found[k].begin, static_cast<std::size_t>(part.first) + found[k].end});
  }
  return r;
}

// The model at every step's drive, in one sweep at the loudest step's frequency.
void predict_steps(steps_report& r, const measure_options& o) {
  prediction& p = *r.against;
  const bool spl = is_spl_level(o.drive_text);
  const std::vector<double> drives = step_drives_vpk(o.drive_text, r.input_cal_vpk, spl ? &p.st : nullptr);
  if (drives.size() != r.steps.size()) {
    std::string where;
    for (std::size_t k = 0; k < r.steps.size() && k < 12; ++k)
      where += (k ? ", " : "") + fixed(static_cast<double>(r.steps[k].first_frame) / r.info.rate_hz, 2) + " s";
    throw input_error("--drive gives " + std::to_string(drives.size()) + " level" + (drives.size() == 1 ? "" : "s") +
                      " but the recording holds " + std::to_string(r.steps.size()) + " step" +
                      (r.steps.size() == 1 ? "" : "s") + " with a tone (from " + where + (r.steps.size() > 12 ? ", ..." : "") +
                      "): give one drive a step, in the order they were played");
  }
  double f_hz = 0.0, loudest = -1.0;
  for (const step_row& s : r.steps)
    if (s.a.fundamental_vpk > loudest) {
      loudest = s.a.fundamental_vpk;
      f_hz = s.a.fundamental_hz;
    }
  model::sweep_settings s;
  s.frequency_hz = f_hz;
  s.drives_vpk = drives;
  s.harmonics = o.harmonics;
  s.bandwidth_hz = r.band_high_hz;
  if (!(s.frequency_hz < 0.5 * s.base_rate_hz))
    throw input_error("the recording's fundamental, " + format_si(s.frequency_hz, "Hz") + ", lies above the " +
                      format_si(0.5 * s.base_rate_hz, "Hz") + " the model's test tone can reach");
  p.drive_vpk = drives.front();
  p.sweep = model::run_sweep(p.st, s);
  int failed = 0, unsettled = 0;
  for (const model::sweep_point& pt : p.sweep.points) {
    failed += static_cast<int>(pt.newton.failed);
    unsettled += pt.converged ? 0 : 1;
  }
  if (failed > 0) p.warnings.push_back(std::to_string(failed) + " samples of the prediction did not converge even sub-stepped");
  if (unsettled > 0)
    p.warnings.push_back("the prediction's steady state was not reached at " + std::to_string(unsettled) + " drive" +
                         (unsettled == 1 ? "" : "s"));
}

steps_report run_steps(const measure_options& o) {
  if (o.json && o.csv) throw input_error("--json and --csv: choose one");
  if (!o.input_cal_text.empty() && o.against_path.empty())
    throw input_error("--input-cal goes with --against and its --drive: it makes drives in dBFS of the played file volts");
  if (!o.drive_text.empty() && o.against_path.empty())
    throw input_error("--drive and --set go with --against STAGE (the stage to predict)");
  if (!o.against_path.empty() && o.drive_text.empty())
    throw input_error("--steps --against needs --drive: one generator level a step (a list, or the staircase the played "
                      "file holds, such as -40dBFS..0dBFS:6 with --input-cal)");
  std::optional<prediction> against;
  if (!o.against_path.empty()) {
    against.emplace();
    against->path = o.against_path;
    against->overrides = o.overrides;
    against->st = load_stage(o.against_path, o.overrides, o.devices);
  } else if (!o.overrides.empty()) {
    throw input_error("--drive and --set go with --against STAGE (the stage to predict)");
  }
  steps_report r = analyse_steps(o);
  r.against = std::move(against);
  if (r.against) predict_steps(r, o);
  return r;
}

// A measured harmonic, or a predicted one, as text ("n/a" above the band).
std::string step_dbc(double v) { return std::isfinite(v) ? fixed(v, 1) : "n/a"; }
std::string predicted_dbc(double v) {
  if (below_numerical_floor(v)) return floor_mark;
  return step_dbc(v);
}
double harmonic_of(const std::vector<double>& h, int n) {
  const auto i = static_cast<std::size_t>(n - 2);
  return i < h.size() ? h[i] : std::nan("");
}

void write_steps_text(const steps_report& r, std::ostream& out) {
  const double fs = r.info.rate_hz;
  out << r.path << ": " << r.info.format_text << ", "
      << (fs == std::floor(fs) ? std::to_string(static_cast<long long>(fs)) : format_number(fs, 6)) << " Hz, " << r.info.channels
      << (r.info.channels == 1 ? " channel, " : " channels, ") << format_number(r.info.seconds(), 4) << " s\n";
  out << "  channel " << r.channel << ", " << r.steps.size() << " step" << (r.steps.size() == 1 ? "" : "s")
      << " with a tone found from " << fixed(static_cast<double>(r.first_frame) / fs, 3) << " s to "
      << fixed(static_cast<double>(r.first_frame + r.count) / fs, 3) << " s; each read alone, "
      << format_number(dsp::step_block_seconds * 1000.0, 3) << " ms left at each end\n"
      << "  window " << window_description(r.window) << "; band 20 Hz to " << format_si(r.band_high_hz, "Hz") << " (AES17)\n";
  for (const dsp::sample_range& n : r.no_tone)
    out << "  ! a level held from " << fixed(static_cast<double>(n.begin) / fs, 3) << " s to "
        << fixed(static_cast<double>(n.end) / fs, 3) << " s holds no tone (noise or silence): left out\n";
  const bool cal = r.output_cal_vpk > 0.0;
  out << "\nSteps\n";
  std::vector<align> al(cal ? 10 : 9, align::right);
  text_table t(al);
  std::vector<std::string> head{"step", "from", "length", "frequency", "level"};
  if (cal) head.push_back("output");
  for (const char* h : {"THD", "THD+N", "H2", "H3"}) head.push_back(h);
  t.add(head);
  for (std::size_t k = 0; k < r.steps.size(); ++k) {
    const step_row& s = r.steps[k];
    std::vector<std::string> row{std::to_string(k + 1), fixed(static_cast<double>(s.first_frame) / fs, 3) + " s",
                                 fixed(static_cast<double>(s.analysed) / fs, 3) + " s", fixed(s.a.fundamental_hz, 2) + " Hz",
                                 fixed(base::db_from_ratio(s.a.fundamental_vpk), 2) + " dBFS"};
    if (cal) row.push_back(format_si(s.a.fundamental_vpk * r.output_cal_vpk, "Vpk"));
    row.push_back(format_number(s.a.thd_percent, 3) + " %");
    row.push_back(format_number(s.a.thd_n_percent, 3) + " %");
    for (int n : {2, 3})
      row.push_back(step_dbc(harmonic_of(s.a.harmonics_dbc, n)) + " dBc" +
                    (static_cast<std::size_t>(n - 2) < s.noise_flags.size() && s.noise_flags[static_cast<std::size_t>(n - 2)] ? "*" : " "));
    t.add(row);
  }
  t.write(out);
  out << "  *: at the noise floor, within " << format_number(noise_floor_margin_db, 2)
      << " dB of what the step's noise alone reads as a line.\n";
  out << "  level: the fundamental's peak in dBFS (0 for a sine reaching full scale)"
      << (cal ? "; output: in volts through --output-cal" : "")
      << ";\n  THD counts H2..H" << r.harmonics << " in the band (--json and --csv give each harmonic).\n";
  if (!r.against) return;
  const prediction& p = *r.against;
  out << "\nAgainst the model\n  " << p.path;
  for (const std::string& ov : p.overrides) out << " --set " << ov;
  out << ": " << p.st.name << ", at " << fixed(p.sweep.frequency_hz, 3) << " Hz, " << p.sweep.oversample << "x oversampling\n";
  for (const std::string& w : p.warnings) out << "  ! " << w << '\n';
  out << '\n';
  std::vector<std::string> head2{"step", "drive", "THD", "predicted", "H2", "predicted", "H3", "predicted"};
  if (cal) {
    head2.push_back("gain");
    head2.push_back("predicted");
  }
  text_table a(std::vector<align>(head2.size(), align::right));
  a.add(head2);
  for (std::size_t k = 0; k < r.steps.size(); ++k) {
    const dsp::windowed_analysis& m = r.steps[k].a;
    const model::sweep_point& pt = p.sweep.points[k];
    std::vector<std::string> row{std::to_string(k + 1), fixed(base::dbu_from_vpk(pt.drive_vpk), 2) + " dBu",
                                 format_number(m.thd_percent, 3) + " %", format_number(pt.thd_percent, 3) + " %",
                                 step_dbc(harmonic_of(m.harmonics_dbc, 2)), predicted_dbc(harmonic_of(pt.harmonics_dbc, 2)),
                                 step_dbc(harmonic_of(m.harmonics_dbc, 3)), predicted_dbc(harmonic_of(pt.harmonics_dbc, 3))};
    if (cal) {
      row.push_back(fixed(base::db_from_ratio(m.fundamental_vpk * r.output_cal_vpk / pt.drive_vpk), 2) + " dB");
      row.push_back(fixed(pt.gain_db, 2) + " dB");
    }
    a.add(row);
  }
  a.write(out);
  out << "  H2, H3 in dBc; drive: the generator's level at each step"
      << (r.input_cal_vpk > 0.0 ? " (the played file's levels through --input-cal)" : "")
      << (cal ? ";\n  gain: from the generator to the load, measured through --output-cal" : "")
      << ".\n  A measured harmonic near the noise floor reads the noise, not the " << (p.st.is_chain() ? "chain" : "stage")
      << ".\n";
}

nlohmann::json harmonics_json(const std::vector<double>& h) {
  nlohmann::json a = nlohmann::json::array();
  for (double v : h) a.push_back(number_or_null(v));
  return a;
}

void write_steps_json(const steps_report& r, std::ostream& out) {
  const double fs = r.info.rate_hz;
  nlohmann::json steps = nlohmann::json::array();
  for (std::size_t k = 0; k < r.steps.size(); ++k) {
    const step_row& s = r.steps[k];
    nlohmann::json j{{"start_s", static_cast<double>(s.first_frame) / fs},
                     {"duration_s", static_cast<double>(s.analysed) / fs},
                     {"fundamental_hz", s.a.fundamental_hz},
                     {"fundamental_dbfs", base::db_from_ratio(s.a.fundamental_vpk)},
                     {"highest_harmonic", s.a.highest_harmonic},
                     {"harmonics_dbc", harmonics_json(s.a.harmonics_dbc)},
                     {"thd_percent", s.a.thd_percent},
                     {"thd_n_percent", s.a.thd_n_percent},
                     {"noise_dbc", s.a.noise_dbc},
                     {"noise_line_dbc", s.noise_line_dbc},
                     {"harmonics_at_noise_floor", flags_json(s.noise_flags)}};
    if (r.output_cal_vpk > 0.0) j["output_vpk"] = s.a.fundamental_vpk * r.output_cal_vpk;
    if (r.against) {
      const model::sweep_point& pt = r.against->sweep.points[k];
      nlohmann::json hs = nlohmann::json::array();
      for (double v : pt.harmonics_dbc) hs.push_back(dbc_or_null(v));
      j["predicted"] = {{"drive_vpk", pt.drive_vpk},
                        {"drive_dbu", base::dbu_from_vpk(pt.drive_vpk)},
                        {"output_vpk", pt.output_vpk},
                        {"gain_db", pt.gain_db},
                        {"thd_percent", pt.thd_percent},
                        {"harmonics_dbc", hs},
                        {"harmonics_below_floor", below_floor_json(pt.harmonics_dbc)},
                        {"steady_state_converged", pt.converged}};
      if (r.output_cal_vpk > 0.0) j["gain_db"] = base::db_from_ratio(s.a.fundamental_vpk * r.output_cal_vpk / pt.drive_vpk);
    }
    steps.push_back(j);
  }
  nlohmann::json no_tone = nlohmann::json::array();
  for (const dsp::sample_range& n : r.no_tone)
    no_tone.push_back({{"start_s", static_cast<double>(n.begin) / fs}, {"duration_s", static_cast<double>(n.end - n.begin) / fs}});
  nlohmann::json j{{"path", r.path},
                   {"mode", "steps"},
                   {"rate_hz", fs},
                   {"channel", r.channel},
                   {"window", std::string(dsp::window_name(r.window))},
                   {"bandwidth_hz", r.band_high_hz},
                   {"steps", steps},
                   {"without_tone", no_tone}};
  if (r.input_cal_vpk > 0.0) j["input_cal_vpk"] = r.input_cal_vpk;
  if (r.output_cal_vpk > 0.0) j["output_cal_vpk"] = r.output_cal_vpk;
  if (r.against) {
    const prediction& p = *r.against;
    j["against"] = {{"stage_path", p.path},     {"overrides", p.overrides},
                    {"name", p.st.name},         {"frequency_hz", p.sweep.frequency_hz},
                    {"oversampling", p.sweep.oversample}, {"numerical_floor_dbc", model::numerical_floor_dbc},
                    {"warnings", p.warnings}};
  }
  out << json_text(j) << '\n';
}

// CSV: one row a step, the harmonics one column each; the model's beside them with --against.
void write_steps_csv(const steps_report& r, std::ostream& out) {
  const double fs = r.info.rate_hz;
  const int n = r.harmonics;
  const bool cal = r.output_cal_vpk > 0.0;
  out << "step,start_s,duration_s,fundamental_hz,fundamental_dbfs,thd_percent,thd_n_percent";
  for (int h = 2; h <= n; ++h) out << ",h" << h << "_dbc";
  if (cal) out << ",output_vpk";
  if (r.against) {
    out << ",drive_vpk,predicted_output_vpk,predicted_gain_db,predicted_thd_percent";
    for (int h = 2; h <= n; ++h) out << ",predicted_h" << h << "_dbc";
    if (cal) out << ",gain_db";
  }
  out << '\n';
  const auto num = [](double v) { return std::isfinite(v) ? format_number(v, 9) : std::string(); };
  for (std::size_t k = 0; k < r.steps.size(); ++k) {
    const dsp::windowed_analysis& a = r.steps[k].a;
    out << k + 1 << ',' << num(static_cast<double>(r.steps[k].first_frame) / fs) << ','
        << num(static_cast<double>(r.steps[k].analysed) / fs) << ',' << num(a.fundamental_hz) << ','
        << num(base::db_from_ratio(a.fundamental_vpk)) << ',' << num(a.thd_percent) << ',' << num(a.thd_n_percent);
    for (int h = 2; h <= n; ++h) out << ',' << num(harmonic_of(a.harmonics_dbc, h));
    if (cal) out << ',' << num(a.fundamental_vpk * r.output_cal_vpk);
    if (r.against) {
      const model::sweep_point& pt = r.against->sweep.points[k];
      out << ',' << num(pt.drive_vpk) << ',' << num(pt.output_vpk) << ',' << num(pt.gain_db) << ',' << num(pt.thd_percent);
      for (int h = 2; h <= n; ++h) {
        const double v = harmonic_of(pt.harmonics_dbc, h);
        out << ',' << (below_numerical_floor(v) ? std::string() : num(v));  // below the floor: no figure
      }
      if (cal) out << ',' << num(base::db_from_ratio(a.fundamental_vpk * r.output_cal_vpk / pt.drive_vpk));
    }
    out << '\n';
  }
}

// THD, H2 and H3 against the step's level, measured and (with --against) predicted.
void write_steps_plot(const steps_report& r, const measure_options& o, base::output_set& outputs) {
  const bool cal = r.output_cal_vpk > 0.0;
  line_plot p;
  p.title = "Steps of " + std::filesystem::path(o.path).filename().string() + ", channel " + std::to_string(o.channel);
  p.x = axis{cal ? "output level (dBu)" : "output level (dBFS, sine peak)", axis_scale::linear, {}, {}, false};
  p.top.y = axis{"re the fundamental (dB)", axis_scale::linear, {}, {}, false};
  const auto level = [&](const step_row& s) {
    return cal ? base::dbu_from_vpk(s.a.fundamental_vpk * r.output_cal_vpk) : base::db_from_ratio(s.a.fundamental_vpk);
  };
  const char* names[] = {"THD", "H2", "H3"};
  for (int which = 0; which < 3; ++which) {
    series m{std::string(names[which]) + " measured", {}, {}, true};
    series q{std::string(names[which]) + " model", {}, {}, true};
    for (std::size_t k = 0; k < r.steps.size(); ++k) {
      const step_row& s = r.steps[k];
      const double x = level(s);
      m.x.push_back(x);
      m.y.push_back(which == 0 ? s.a.thd_db : harmonic_of(s.a.harmonics_dbc, which + 1));
      if (r.against) {
        const model::sweep_point& pt = r.against->sweep.points[k];
        const double v = which == 0 ? pt.thd_db : harmonic_of(pt.harmonics_dbc, which + 1);
        q.x.push_back(x);
        q.y.push_back(below_numerical_floor(v) ? std::nan("") : v);  // below the floor: no point
      }
    }
    p.top.lines.push_back(std::move(m));
    if (r.against) p.top.lines.push_back(std::move(q));
  }
  add_svg_output(outputs, o.plot_path, render_svg(p));
}

// ---- A frequency response from a recorded sweep (--response PLAYED)

struct response_report {
  std::string path, played_path;
  dsp::sound_info info;
  int channel{1};
  dsp::exp_sweep_plan plan;
  double delay_s{};             ///< the latency removed: the peak's, to the sample, or the one given
  double peak_s{};              ///< where the linear impulse response peaks (to the sample)
  bool latency_given{false};    ///< --latency SECONDS: delay_s removed exactly, as a linear phase
  double trusted_low_hz{}, trusted_high_hz{};
  std::vector<double> frequency_hz;
  std::vector<std::complex<double>> measured;  ///< recording re played file (full scale per full scale), or V/V calibrated
  std::vector<std::vector<double>> harmonics_dbc;  ///< H2..H5 a point; NaN outside the band
  double input_cal_vpk{0.0}, output_cal_vpk{0.0};
  bool calibrated() const { return input_cal_vpk > 0.0 && output_cal_vpk > 0.0; }
  double reference_hz{};  ///< uncalibrated: both curves read re their value here
  // --against
  std::string stage_path;
  std::vector<std::string> overrides;
  std::string stage_name;
  std::vector<std::complex<double>> model;  ///< V/V at the load re the generator
};

constexpr int response_harmonics = 5;  // H2..H5 read from the sweep

// --latency SECONDS|auto: nullopt for auto (the peak's, to the sample).
std::optional<double> latency_of(const std::string& text) {
  if (text == "auto") return std::nullopt;
  const std::optional<double> v = base::try_parse_value(text, base::unit::none);
  if (!v || !std::isfinite(*v) || *v < 0.0)
    throw input_error("--latency '" + text + "': give auto, or the recording chain's latency in seconds (0 or more, "
                      "such as 0.0021 or 2.1m)");
  return v;
}

response_report analyse_response_recording(const measure_options& o) {
  if (!o.drive_text.empty())
    throw input_error("--drive goes with a tone: --response reads a recorded sweep, whose level is the played file's");
  if (o.steps || o.noise) throw input_error("--response, --steps and --noise: choose one");
  if (o.freq_text != "auto") throw input_error("--freq goes with a tone: a sweep covers the band given by --sweep");
  if (o.json && o.csv) throw input_error("--json and --csv: choose one");
  if (!o.overrides.empty() && o.against_path.empty()) throw input_error("--set goes with --against STAGE (the stage to predict)");
  if (!(o.response_points >= 2 && o.response_points <= 2000))
    throw input_error("--points must be 2 to 2000, got " + std::to_string(o.response_points));
  response_report r;
  r.path = o.path;
  r.played_path = o.response_path;
  r.input_cal_vpk = calibration_vpk(o.input_cal_text, "--input-cal");
  r.output_cal_vpk = calibration_vpk(o.output_cal_text, "--output-cal");
  if ((r.input_cal_vpk > 0.0) != (r.output_cal_vpk > 0.0))
    throw input_error("--response compares volts only with both calibrations: --input-cal (the generator's level for a "
                      "full-scale sine in the played file) and --output-cal (a full-scale sine's level at the recorder)");
  const base::value_range band = base::parse_range(o.sweep_text, base::unit::hertz, "--sweep");
  const std::optional<double> latency = latency_of(o.latency_text);
  std::optional<model::stage> st;
  if (!o.against_path.empty()) st = load_stage(o.against_path, o.overrides, o.devices);

  recording_part part = open_part(o, "measure --response reads the recording from a file");
  r.info = part.rd.info();
  r.channel = o.channel;
  const double fs = r.info.rate_hz;
  part.rd.seek(part.first);
  const std::vector<double> y = dsp::read_channel(part.rd, o.channel - 1, std::min<std::int64_t>(part.count, 2 * static_cast<std::int64_t>(dsp::max_sweep_frames)));

  dsp::sound_reader played = dsp::sound_reader::open(o.response_path);
  if (played.info().rate_hz != fs)
    throw input_error("'" + o.response_path + "' is at " + format_number(played.info().rate_hz) + " Hz and '" + o.path + "' at " +
                      format_number(fs) + " Hz: record at the rate the sweep was played");
  if (played.info().frames > static_cast<std::int64_t>(dsp::max_sweep_frames))
    throw input_error("'" + o.response_path + "' holds " + std::to_string(played.info().frames) + " frames; a sweep is at most " +
                      std::to_string(dsp::max_sweep_frames));
  const std::vector<double> x = dsp::read_channel(played, 0);
  r.plan.start_hz = band.lo;
  r.plan.end_hz = band.hi;
  r.plan.rate_hz = fs;
  r.plan.seconds = static_cast<double>(x.size()) / fs;
  r.plan.level_dbfs = 0.0;     // the played file's own samples are divided out: its level is in them
  r.plan.fade_seconds = 0.0;   // and so are its fades
  dsp::sweep_deconvolution d;
  try {
    d = dsp::deconvolve_sweep(y, x, r.plan);
  } catch (const setting_error& e) {
    const std::string f = e.field();
    throw input_error((f == "seconds" ? "'" + o.response_path + "' (the played sweep): " : std::string("--sweep ") + o.sweep_text + ": ") +
                      e.what());
  } catch (const input_error& e) {
    throw input_error("'" + o.path + "': " + e.what());
  }
  r.peak_s = static_cast<double>(d.linear_index) / fs;
  r.delay_s = r.peak_s;
  if (latency) {
    const double flat_s = dsp::linear_window_flat_samples(d) / fs;
    if (!(std::fabs(*latency - r.peak_s) <= flat_s))
      throw input_error("--latency " + o.latency_text + ": the impulse response peaks at " + format_si(r.peak_s, "s", 4) +
                        ", and a latency more than " + format_si(flat_s, "s", 3) +
                        " from it is not this recording's (the response is read in a window around the peak)");
    r.delay_s = *latency;
    r.latency_given = true;
  }
  r.trusted_low_hz = d.trusted_low_hz();
  r.trusted_high_hz = d.trusted_high_hz();
  for (int i = 0; i < o.response_points; ++i)
    r.frequency_hz.push_back(r.trusted_low_hz *
                             std::pow(r.trusted_high_hz / r.trusted_low_hz, static_cast<double>(i) / (o.response_points - 1)));
  r.measured = dsp::linear_response(d, r.frequency_hz, r.delay_s * fs);
  const double scale = r.calibrated() ? r.output_cal_vpk / r.input_cal_vpk : 1.0;
  for (std::complex<double>& v : r.measured) v *= scale;
  r.harmonics_dbc.assign(r.frequency_hz.size(), std::vector<double>(response_harmonics - 1, std::nan("")));
  for (int n = 2; n <= response_harmonics; ++n) {
    const std::vector<double> h = dsp::harmonic_ratio(d, n, r.frequency_hz);
    for (std::size_t i = 0; i < h.size(); ++i) r.harmonics_dbc[i][static_cast<std::size_t>(n - 2)] = base::db_from_ratio(h[i]);
  }
  // Uncalibrated, both curves are read re their value at the point nearest 1 kHz (or the band's
  // middle, in log frequency, when 1 kHz lies outside it).
  const double ref = r.trusted_low_hz <= 1000.0 && r.trusted_high_hz >= 1000.0 ? 1000.0 : std::sqrt(r.trusted_low_hz * r.trusted_high_hz);
  r.reference_hz = ref;
  if (st) {
    r.stage_path = o.against_path;
    r.overrides = o.overrides;
    r.stage_name = st->name;
    const model::network net = model::build_network(*st);
    const model::operating_point op = model::solve_operating_point(net);
    for (const double f : r.frequency_hz) r.model.push_back(model::response_at(net, op, f).gain);
  }
  return r;
}

// The magnitude in dB as reported: calibrated, the gain in dB; else re the value at the
// point nearest the reference frequency. `curve` is the measured or the model's.
std::vector<double> reported_db(const response_report& r, const std::vector<std::complex<double>>& curve) {
  std::vector<double> db;
  double ref = 1.0;
  if (!r.calibrated()) {
    std::size_t best = 0;
    for (std::size_t i = 0; i < r.frequency_hz.size(); ++i)
      if (std::fabs(std::log(r.frequency_hz[i] / r.reference_hz)) < std::fabs(std::log(r.frequency_hz[best] / r.reference_hz)))
        best = i;
    ref = std::abs(curve[best]);
  }
  for (const std::complex<double>& v : curve) db.push_back(base::db_from_ratio(std::abs(v) / ref));
  return db;
}
double phase_deg(std::complex<double> v) { return std::arg(v) * 180.0 / std::numbers::pi; }

void write_response_text(const response_report& r, std::ostream& out) {
  const double fs = r.info.rate_hz;
  out << r.path << ": " << r.info.format_text << ", "
      << (fs == std::floor(fs) ? std::to_string(static_cast<long long>(fs)) : format_number(fs, 6)) << " Hz, "
      << format_number(r.info.seconds(), 4) << " s, channel " << r.channel << "\n  the answer to " << r.played_path << ", a sweep "
      << format_si(r.plan.start_hz, "Hz", 3) << " to " << format_si(r.plan.end_hz, "Hz", 3) << " in " << format_number(r.plan.seconds, 4)
      << " s (Farina 2000: deconvolved, harmonics separated in time)\n  latency " << fixed(1000.0 * r.delay_s, 4)
      << (r.latency_given ? " ms (given, removed exactly; the impulse response peaks at " + fixed(1000.0 * r.peak_s, 4) + " ms)"
                          : std::string(" ms (the impulse response's peak, removed to the sample)"))
      << "; read from " << format_si(r.trusted_low_hz, "Hz", 3) << " to "
      << format_si(r.trusted_high_hz, "Hz", 3) << '\n';
  const std::vector<double> m = reported_db(r, r.measured);
  const std::vector<double> q = r.model.empty() ? std::vector<double>{} : reported_db(r, r.model);
  out << "\nResponse (" << (r.calibrated() ? "gain from the generator to the recorder's input, through --input-cal and --output-cal"
                                           : "re its value at " + format_si(r.reference_hz, "Hz", 3) + "; give --input-cal and --output-cal for the gain")
      << ")\n";
  std::vector<std::string> head{"frequency", "magnitude", "phase", "H2", "H3"};
  if (!r.model.empty()) {
    head.insert(head.end(), {"model", "model phase", "difference"});
  }
  text_table t(std::vector<align>(head.size(), align::right));
  t.add(head);
  // About 24 rows: every k-th point.
  const std::size_t every = std::max<std::size_t>(1, r.frequency_hz.size() / 24);
  for (std::size_t i = 0; i < r.frequency_hz.size(); i += every) {
    std::vector<std::string> row{format_si(r.frequency_hz[i], "Hz", 3), fixed(m[i], 2) + " dB", fixed(phase_deg(r.measured[i]), 1) + "°",
                                 std::isfinite(r.harmonics_dbc[i][0]) ? fixed(r.harmonics_dbc[i][0], 1) + " dBc" : "-",
                                 std::isfinite(r.harmonics_dbc[i][1]) ? fixed(r.harmonics_dbc[i][1], 1) + " dBc" : "-"};
    if (!r.model.empty()) {
      row.push_back(fixed(q[i], 2) + " dB");
      row.push_back(fixed(phase_deg(r.model[i]), 1) + "°");
      row.push_back(signed_db(m[i] - q[i]));
    }
    t.add(row);
  }
  t.write(out);
  if (r.latency_given)
    out << "  phase: with the latency given removed exactly.";
  else
    out << "  phase: referred to the impulse response's peak; a recording chain's latency that is not a whole\n"
           "  number of samples adds up to 180 f / fs degrees ("
        << fixed(180.0 * 1000.0 / fs, 1) << "° at 1 kHz here); --latency removes a known one exactly.";
  out << " H2, H3: the\n  harmonic at the frequency played re the fundamental, \"-\" where it lies outside the band read.\n";
  if (!r.model.empty()) {
    out << "  model: " << r.stage_path;
    for (const std::string& ov : r.overrides) out << " --set " << ov;
    out << " (" << r.stage_name << "), its small-signal response at the load as `pinchoff response` gives it.\n";
  }
}

void write_response_json(const response_report& r, std::ostream& out) {
  const std::vector<double> m = reported_db(r, r.measured);
  nlohmann::json pts = nlohmann::json::array();
  for (std::size_t i = 0; i < r.frequency_hz.size(); ++i) {
    nlohmann::json h = nlohmann::json::array();
    for (double v : r.harmonics_dbc[i]) h.push_back(number_or_null(v));
    pts.push_back({{"frequency_hz", r.frequency_hz[i]}, {"magnitude_db", m[i]}, {"phase_deg", phase_deg(r.measured[i])}, {"harmonics_dbc", h}});
  }
  nlohmann::json j{{"path", r.path},
                   {"mode", "response"},
                   {"played_path", r.played_path},
                   {"rate_hz", r.info.rate_hz},
                   {"channel", r.channel},
                   {"sweep", {{"start_hz", r.plan.start_hz}, {"end_hz", r.plan.end_hz}, {"seconds", r.plan.seconds}}},
                   {"latency_s", r.delay_s},
                   {"latency_given", r.latency_given},
                   {"peak_s", r.peak_s},
                   {"band_hz", {r.trusted_low_hz, r.trusted_high_hz}},
                   {"calibrated", r.calibrated()},
                   {"points", pts}};
  if (!r.calibrated()) j["reference_hz"] = r.reference_hz;
  else {
    j["input_cal_vpk"] = r.input_cal_vpk;
    j["output_cal_vpk"] = r.output_cal_vpk;
  }
  if (!r.model.empty()) {
    const std::vector<double> q = reported_db(r, r.model);
    nlohmann::json mp = nlohmann::json::array();
    for (std::size_t i = 0; i < r.frequency_hz.size(); ++i)
      mp.push_back({{"frequency_hz", r.frequency_hz[i]}, {"magnitude_db", q[i]}, {"phase_deg", phase_deg(r.model[i])}});
    j["model"] = {{"stage_path", r.stage_path}, {"overrides", r.overrides}, {"name", r.stage_name}, {"points", mp}};
  }
  out << json_text(j) << '\n';
}

void write_response_csv(const response_report& r, std::ostream& out) {
  const std::vector<double> m = reported_db(r, r.measured);
  const std::vector<double> q = r.model.empty() ? std::vector<double>{} : reported_db(r, r.model);
  out << "frequency_hz,magnitude_db,phase_deg";
  for (int n = 2; n <= response_harmonics; ++n) out << ",h" << n << "_dbc";
  if (!r.model.empty()) out << ",model_magnitude_db,model_phase_deg";
  out << '\n';
  const auto num = [](double v) { return std::isfinite(v) ? format_number(v, 9) : std::string(); };
  for (std::size_t i = 0; i < r.frequency_hz.size(); ++i) {
    out << num(r.frequency_hz[i]) << ',' << num(m[i]) << ',' << num(phase_deg(r.measured[i]));
    for (double v : r.harmonics_dbc[i]) out << ',' << num(v);
    if (!r.model.empty()) out << ',' << num(q[i]) << ',' << num(phase_deg(r.model[i]));
    out << '\n';
  }
}

void write_response_plot(const response_report& r, const measure_options& o, base::output_set& outputs) {
  line_plot p;
  p.title = "Response of " + std::filesystem::path(o.path).filename().string() + " to " +
            std::filesystem::path(o.response_path).filename().string();
  p.x = axis{"frequency (Hz)", axis_scale::log10, r.trusted_low_hz, r.trusted_high_hz};
  p.top.y = axis{r.calibrated() ? "gain (dB)" : "magnitude (dB re " + format_si(r.reference_hz, "Hz", 3) + ")", axis_scale::linear, {}, {}, false};
  p.top.lines.push_back({"measured", r.frequency_hz, reported_db(r, r.measured), false});
  // The phase drawn continuous (each step taken within +-180 degrees), from its value at the
  // lowest frequency: an inverting stage's phase near 180 degrees would otherwise jump
  // between +180 and -180 across the band.
  const auto unwrapped = [](const std::vector<std::complex<double>>& curve) {
    std::vector<double> deg;
    for (const std::complex<double>& v : curve) {
      double d = phase_deg(v);
      if (!deg.empty()) d -= 360.0 * std::round((d - deg.back()) / 360.0);
      deg.push_back(d);
    }
    return deg;
  };
  panel ph;
  ph.y = axis{"phase (degrees)", axis_scale::linear, {}, {}, false};
  ph.lines.push_back({"measured", r.frequency_hz, unwrapped(r.measured), false});
  if (!r.model.empty()) {
    p.top.lines.push_back({"model", r.frequency_hz, reported_db(r, r.model), false});
    ph.lines.push_back({"model", r.frequency_hz, unwrapped(r.model), false});
  }
  p.bottom = std::move(ph);
  add_svg_output(outputs, o.plot_path, render_svg(p));
}

// ---- Setup: the options, their help and the worked examples.
CLI::App* setup(CLI::App& app, measure_options& o) {
  CLI::App* sub = app.add_subcommand("measure", "Harmonics, THD, THD+N and noise of a recorded test tone");
  sub->add_option("REC", o.path, "Recording to analyse (WAV, FLAC, AIFF, ...)")->required();
  sub->add_option("--freq", o.freq_text, "The tone's frequency, roughly (searched within 10 %), or auto: the strongest line")
      ->type_name("FREQ|auto")
      ->capture_default_str();
  sub->add_option("--channel", o.channel, "Channel to analyse, counted from 1")->capture_default_str();
  sub->add_option("--window", o.window_text, "blackman-harris (4-term, -92 dB sidelobes) or flat-top (HFT90D)")
      ->capture_default_str();
  sub->add_option("--harmonics", o.harmonics, "Highest harmonic counted in THD")->capture_default_str();
  sub->add_option("--bandwidth", o.bandwidth_text, "Upper edge of the measurement band")
      ->type_name("FREQ")
      ->capture_default_str();
  sub->add_option("--start", o.start_s, "Skip this many seconds at the start")->type_name("SECONDS");
  sub->add_option("--duration", o.duration_s, "Analyse this many seconds (default: to the end)")->type_name("SECONDS");
  sub->add_option("--plot", o.plot_path,
                  "Write the spectrum with the harmonics marked as SVG (with --steps: THD, H2 and H3 against the "
                  "step's level; with --response: magnitude and phase against frequency)")
      ->type_name("FILE.svg");
  sub->add_flag("--json", o.json, "Machine-readable output (keys carry their unit as a suffix)");
  sub->add_option("--against", o.against_path, "Stage file (TOML) whose prediction is shown beside the measurement")
      ->type_name("STAGE");
  sub->add_option("--drive", o.drive_text,
                  "With --against: the generator level the stage was driven with, e.g. 100mVpk, or -20dBFS with "
                  "--input-cal; with --steps one a step, as a list or the played staircase FROM..TO:STEP in dBFS")
      ->type_name("LEVEL");
  sub->add_option("--set", o.overrides, "With --against: override a stage-file value, KEY=VALUE (repeatable)")
      ->type_name("KEY=VALUE")
      ->expected(1)
      ->allow_extra_args(false)
      ->multi_option_policy(CLI::MultiOptionPolicy::TakeAll);
  sub->add_flag("--noise", o.noise,
                "The recording holds noise alone (the stage's output, its input shorted or terminated): read it "
                "unweighted, A-weighted and ITU-R 468 weighted");
  sub->add_option("--output-cal", o.output_cal_text,
                  "The level of a full-scale sine at the recorder's input, e.g. 1.55Vpk or +6dBu, so readings are in "
                  "volts and dBu (and with --against, the measured gain beside the model's)")
      ->type_name("LEVEL");
  sub->add_option("--input-cal,--drive-per-dbfs", o.input_cal_text,
                  "The generator's level when the played file holds a full-scale sine, e.g. 1Vpk or +4dBu, so --drive "
                  "may be given in dBFS of the played file (--drive-per-dbfs: the same calibration)")
      ->type_name("LEVEL");
  sub->add_flag("--steps", o.steps,
                "The recording holds a staircase of levels (as 'pinchoff tone --steps' writes): find each step and "
                "measure it alone");
  sub->add_flag("--csv", o.csv, "With --steps or --response: the rows as CSV");
  sub->add_option("--response", o.response_path,
                  "The recording is a stage's answer to this played sweep ('pinchoff tone --sweep'): its frequency "
                  "response by deconvolution, and its harmonics separated in time")
      ->type_name("PLAYED");
  sub->add_option("--sweep", o.sweep_text, "With --response: the band the played sweep covers, as given to tone --sweep")
      ->type_name("FROM..TO")
      ->capture_default_str();
  sub->add_option("--points", o.response_points, "With --response: frequencies read, log-spaced over the band")
      ->capture_default_str();
  sub->add_option("--latency", o.latency_text,
                  "With --response: the recording chain's latency, removed exactly (a fraction of a sample as a "
                  "linear phase), or auto: the impulse response's peak, to the sample")
      ->type_name("SECONDS|auto")
      ->capture_default_str();
  sub->footer(
      "Examples:\n"
      "  pinchoff measure stage-out.wav\n"
      "      the strongest tone, its harmonics H2..H10, THD, THD+N and noise\n"
      "  pinchoff measure stage-out.wav --freq 1k --channel 2 --plot spectrum.svg\n"
      "  pinchoff measure staircase-out.wav --steps\n"
      "      every step of a recorded 'pinchoff tone --steps' staircase: level, THD, THD+N, H2..H10\n"
      "  pinchoff measure staircase-out.wav --steps --against presets/bass-booster-9v.toml \\\n"
      "      --drive -40dBFS..0dBFS:6 --input-cal 0.5Vpk --output-cal 1.55Vpk --plot steps.svg\n"
      "      each step beside the model at its drive: the played staircase (as given to tone --steps),\n"
      "      the generator at 0.5 V peak for a full-scale sine, the recorder's full scale 1.55 V peak\n"
      "  pinchoff measure sweep-out.wav --response sweep.wav --sweep 20..20k --plot response.svg\n"
      "      the answer to a played 'pinchoff tone --sweep 20..20k' sweep: magnitude and phase from\n"
      "      28 Hz to 15.9 kHz (half an octave in from the start, a third from the end), H2..H5\n"
      "  pinchoff measure sweep-out.wav --response sweep.wav --against presets/bass-booster-9v.toml \\\n"
      "      --input-cal 1Vpk --output-cal 10Vpk\n"
      "      the gain in volts beside what 'pinchoff response' predicts\n"
      "  pinchoff measure staircase-out.wav --start 4.01 --duration 1.98 --json\n"
      "      one step of a staircase by hand (tone prints where each step holds)\n"
      "  pinchoff measure booster-out.wav --against presets/bass-booster-9v.toml --drive 100mVpk\n"
      "      beside each harmonic, what the model predicts for that drive at the measured frequency\n"
      "  pinchoff measure hiss.wav --noise --output-cal 1.55Vpk --against presets/phantom-mic-follower.toml\n"
      "      a recording of the output with no signal, unweighted, A- and 468-weighted, in dBFS and dBu,\n"
      "      beside the noise `pinchoff noise` predicts at the load\n"
      "The fundamental is found to a fraction of a bin and subtracted before the harmonics and\n"
      "the noise are read, so a recording need not hold whole cycles. Use a flat-top window for\n"
      "a level read without scallop loss in the plot; the figures are read at the exact\n"
      "frequencies under either window. Record at least a second: the noise floor and the\n"
      "resolution between close lines improve with length, up to 2097152 frames (43.7 s at 48 kHz,\n"
      "10.9 s at 192 kHz; a longer recording is analysed from the start of its steady part, and\n"
      "memory stays near 150 MB whatever the file's length). The recording must be a file, not a\n"
      "pipe: it is read twice. --drive is the generator's open-circuit\n"
      "level as in `sweep`; the comparison is in dBc, so the recording's own gain does not matter\n"
      "(give --output-cal to compare the gain too). A span whose level moves by more than 3 dB is\n"
      "refused: one THD+N over several levels means nothing; use --steps. --steps finds plateaus\n"
      "held 0.3 s or more within 0.5 dB (steps 1 dB or more apart), leaves 50 ms at each end, and\n"
      "leaves out a plateau that holds no tone (noise, the recorder's floor).");
  return sub;
}

}  // namespace

void register_measure(CLI::App& app, std::vector<command>& commands, const data_files& data) {
  auto opt = std::make_shared<measure_options>();
  opt->devices = data.devices;
  CLI::App* sub = setup(app, *opt);
  commands.push_back({sub,
                      [opt, sub](std::ostream& out, std::ostream&, base::output_set& outputs) {
                        opt->given.clear();
                        for (const CLI::Option* op : sub->get_options())
                          if (op->count() > 0 && !op->get_lnames().empty()) opt->given.push_back("--" + op->get_lnames().front());
                        refuse_unused(*opt);
                        if (opt->noise) {
                          const noise_report n = analyse_noise_recording(*opt);
                          if (opt->json) write_noise_json(n, out);
                          else write_noise_text(n, out);
                          return;
                        }
                        if (!opt->response_path.empty()) {
                          const response_report r = analyse_response_recording(*opt);
                          if (!opt->plot_path.empty()) write_response_plot(r, *opt, outputs);
                          if (opt->json) write_response_json(r, out);
                          else if (opt->csv) write_response_csv(r, out);
                          else write_response_text(r, out);
                          return;
                        }
                        if (opt->steps) {
                          const steps_report r = run_steps(*opt);
                          if (!opt->plot_path.empty()) write_steps_plot(r, *opt, outputs);
                          if (opt->json) write_steps_json(r, out);
                          else if (opt->csv) write_steps_csv(r, out);
                          else write_steps_text(r, out);
                          return;
                        }
                        const measure_report r = run(*opt);
                        if (r.spectrum) write_plot(r, *opt, outputs);
                        if (opt->json) write_json(r, out);
                        else write_text(r, out);
                      },
                      {},
                      [opt] {
                        command_files f;
                        f.inputs.push_back({"the recording", opt->path});
                        if (!opt->response_path.empty()) f.inputs.push_back({"the played sweep", opt->response_path});
                        if (!opt->against_path.empty()) add_stage_inputs(f, opt->against_path, opt->devices, "the --against stage file");
                        if (!opt->plot_path.empty()) f.outputs.push_back({"--plot", opt->plot_path});
                        return f;
                      }});
}

}  // namespace pinchoff::cli
