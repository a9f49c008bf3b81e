// pinchoff measure: harmonic analysis of a recorded test tone (the bench half of the loop
// that `pinchoff tone` starts).
#include <algorithm>
#include <cmath>
#include <cstdio>
#include <memory>
#include <optional>
#include <string>
#include <vector>

#include <CLI/CLI.hpp>
#include <nlohmann/json.hpp>

#include "cli/app.hpp"
#include "cli/common.hpp"
#include "cli/plot.hpp"
#include "cli/text_table.hpp"
#include "base/error.hpp"
#include "dsp/io/sound_file.hpp"
#include "base/units.hpp"
#include "dsp/windowed_analysis.hpp"
#include "model/circuit/stage_file.hpp"
#include "model/analysis/noise.hpp"
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
};

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
  p.drive_vpk = option_level_vpk(o.drive_text, "--drive", spl ? &p.st : nullptr);
  if (!(p.drive_vpk > 0) || !std::isfinite(p.drive_vpk)) throw input_error("--drive must be above 0 V");
  // A generator's level, as render's --input-peak: beyond these no audio source is met
  // (common practice), and the prediction's figures lose their meaning (1e300 V gave an
  // infinite THD).
  if (!(p.drive_vpk >= 1e-6 && p.drive_vpk <= 1e3))
    throw input_error("--drive must be 1 µV to 1 kV peak at the generator, got " +
                      (p.drive_vpk < 1e15 && p.drive_vpk >= 1e-15 ? format_si(p.drive_vpk, "V") : format_number(p.drive_vpk) + " V"));
  if (!spl) p.st = load_stage(p.path, p.overrides, o.devices);
  return p;
}

// The most frames measure analyses. The analysis holds the record, its windowed copies and
// their transforms, about 70 bytes a frame (2.0 GB for 28.8 million frames, measured), so
// 2^21 frames bound it near 150 MB: 43.7 s at 48 kHz, 10.9 s at 192 kHz; far more than the
// resolution and noise floor of a bench measurement need. A longer part is analysed from
// its start and the report says how much was left out.
constexpr std::int64_t max_analysed_frames = std::int64_t{1} << 21;

// Streams one channel of [first, first + count) and finds its steady part (dsp::steady_part,
// from 10 ms block rms values), in frames relative to `first`; holds only the block values.
dsp::sample_range stream_steady_part(dsp::sound_reader& rd, int channel, std::int64_t first, std::int64_t count) {
  rd.seek(first);
  const auto ch = static_cast<std::size_t>(rd.info().channels);
  const std::size_t block = dsp::steady_block_samples(rd.info().rate_hz);
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

measure_report analyse(const measure_options& o) {
  measure_report r;
  r.path = o.path;
  r.window = parse_window(o.window_text);
  if (o.harmonics < 2 || o.harmonics > 100) throw input_error("--harmonics must be 2 to 100, got " + std::to_string(o.harmonics));
  if (!(o.start_s >= 0.0) || !(o.duration_s >= 0.0)) throw input_error("--start and --duration must not be negative");
  dsp::windowed_settings s;
  s.window = r.window;
  s.harmonics = o.harmonics;
  auto frequency = [](const std::string& text, const char* option) { return option_frequency_hz(text, option); };
  s.band_high_hz = frequency(o.bandwidth_text, "--bandwidth");
  if (!(s.band_high_hz > s.band_low_hz))
    throw input_error("--bandwidth " + o.bandwidth_text + " must lie above the band's low edge, " +
                      format_si(s.band_low_hz, "Hz") + " (AES17)");
  if (o.freq_text != "auto") s.approx_fundamental_hz = frequency(o.freq_text, "--freq");

  recording_part part = open_part(o, "measure reads the recording twice (to find its steady part, then to analyse it)");
  dsp::sound_reader& rd = part.rd;
  r.info = rd.info();
  r.channel = o.channel;
  const double fs = r.info.rate_hz;
  // The band cannot reach past Nyquist; AES17's 20 kHz applies from 40 kHz sampling up.
  r.band_high_hz = s.band_high_hz = std::min(s.band_high_hz, fs / 2);
  if (s.approx_fundamental_hz >= fs / 2)
    throw input_error("--freq " + o.freq_text + " lies above half the file's sample rate (" + format_si(fs / 2, "Hz") + ")");
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
  x.resize(dsp::fast_analysis_length(x.size()));
  r.analysed = x.size();
  for (double v : x) r.sample_peak = std::max(r.sample_peak, std::abs(v));
  try {
    r.a = dsp::analyse_windowed(x, fs, s);
  } catch (const input_error& e) {
    throw input_error("'" + o.path + "': " + e.what());  // "no tone found" must say in which file
  }

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
    t.add({"H" + std::to_string(n), dbc_text(m), is_floor ? std::string(floor_mark) + " dBc" : dbc_text(q),
           is_floor ? std::string("-") : signed_db(m - q)});
  }
  t.add({"THD", format_number(a.thd_percent, 4) + " %", format_number(pt.thd_percent, 4) + " %",
         signed_db(base::db_from_ratio(a.thd_ratio / pt.thd_ratio))});
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
           fixed(base::db_from_ratio(a.harmonics_vpk[i]), 2) + " dBFS"});
  }
  h.write(out);

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
                   {"sample_peak_dbfs", base::db_from_ratio(r.sample_peak)}};
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
      diff.push_back(below_numerical_floor(q) ? nlohmann::json(nullptr) : number_or_null(a.harmonics_dbc[i] - q));
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
  if (!o.output_cal_text.empty())
    throw input_error("--output-cal goes with --noise (a tone's figures are in dBc and need no calibration)");
  std::optional<prediction> against = load_against(o);
  measure_report r = analyse(o);
  r.against = std::move(against);
  if (r.against) predict(r, o);
  return r;
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
  sub->add_option("--plot", o.plot_path, "Write the spectrum with the harmonics marked as SVG")->type_name("FILE.svg");
  sub->add_flag("--json", o.json, "Machine-readable output (keys carry their unit as a suffix)");
  sub->add_option("--against", o.against_path, "Stage file (TOML) whose prediction is shown beside the measurement")
      ->type_name("STAGE");
  sub->add_option("--drive", o.drive_text, "With --against: the generator level the stage was driven with, e.g. 100mVpk")
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
                  "With --noise: the level of a full-scale sine at the recorder's input, e.g. 1.55Vpk or +6dBu, so "
                  "readings are in volts and dBu")
      ->type_name("LEVEL");
  sub->footer(
      "Examples:\n"
      "  pinchoff measure stage-out.wav\n"
      "      the strongest tone, its harmonics H2..H10, THD, THD+N and noise\n"
      "  pinchoff measure stage-out.wav --freq 1k --channel 2 --plot spectrum.svg\n"
      "  pinchoff measure staircase-out.wav --start 4.01 --duration 1.98 --json\n"
      "      one step of a 'pinchoff tone --steps' recording (tone prints where each step holds)\n"
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
      "level as in `sweep`; the comparison is in dBc, so the recording's own gain does not matter.");
  return sub;
}

}  // namespace

void register_measure(CLI::App& app, std::vector<command>& commands, const data_files& data) {
  auto opt = std::make_shared<measure_options>();
  opt->devices = data.devices;
  CLI::App* sub = setup(app, *opt);
  commands.push_back({sub,
                      [opt](std::ostream& out, std::ostream&, base::output_set& outputs) {
                        if (opt->noise) {
                          const noise_report n = analyse_noise_recording(*opt);
                          if (opt->json) write_noise_json(n, out);
                          else write_noise_text(n, out);
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
                        if (!opt->against_path.empty()) add_stage_inputs(f, opt->against_path, opt->devices, "the --against stage file");
                        if (!opt->plot_path.empty()) f.outputs.push_back({"--plot", opt->plot_path});
                        return f;
                      }});
}

}  // namespace pinchoff::cli
