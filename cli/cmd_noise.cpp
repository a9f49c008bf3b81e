// pinchoff noise: what hisses, how much, and which part to change.
#include <algorithm>
#include <cmath>
#include <memory>
#include <optional>
#include <string>
#include <vector>

#include <CLI/CLI.hpp>
#include <nlohmann/json.hpp>

#include "cli/app.hpp"
#include "cli/common.hpp"
#include "cli/report_json.hpp"
#include "cli/plot.hpp"
#include "cli/text_table.hpp"
#include "base/error.hpp"
#include "base/units.hpp"
#include "model/analysis/compare.hpp"
#include "model/analysis/headroom.hpp"
#include "model/analysis/noise.hpp"
#include "model/circuit/network.hpp"

namespace pinchoff::cli {
namespace {

using base::format_number;
using base::format_si;
using align = text_table::align;

struct noise_options {
  stage_input input;
  std::string from{"10"}, to{"100k"};
  int points{200};
  std::string band{"20..20k"};
  std::string level;
  bool json{false}, csv{false};
  std::string plot;
};

struct noise_report {
  model::stage st;
  model::network net;
  model::operating_point op;
  model::noise_result r;
  model::headroom_figures head;
  std::string level_text;
  double level_vpk{NAN};   ///< --level at the generator, peak; NaN when not given
  std::vector<std::string> warnings;
  std::optional<model::drive_search> max_spl;  ///< a capsule source: 1 % THD, the top of its dynamic range
  double max_spl_db{NAN};
};

// A capsule's dynamic range: the maximum SPL at 1 % THD (1 kHz) over the A-weighted self-noise.
double dynamic_range_db(const noise_report& rep) {
  return rep.max_spl_db -
         model::self_noise_db_spl(rep.r.input_a_v(), rep.st.capsule.sensitivity_v_per_pa);
}

double rms_of_vpk(double vpk) { return vpk / std::sqrt(2.0); }
double snr_db(double signal_rms, double noise_rms) { return 20.0 * std::log10(signal_rms / noise_rms); }

// The chain's clean swing at the load, rms.
double clean_swing_rms(const noise_report& rep) { return rms_of_vpk(rep.head.symmetric_output_vpk); }
// --level carried to the load by the gain at 1 kHz, rms.
double level_at_load_rms(const noise_report& rep) { return rms_of_vpk(rep.level_vpk) * rep.r.gain_1k_abs; }

std::string contribution_name(const model::noise_contribution& c) {
  return c.part + " (" + model::noise_mechanism_name(c.mechanism) + (c.of_source ? ", the source's own" : "") + ")";
}

// Each contribution's output density at every point of the sweep, V^2/Hz.
std::vector<std::vector<double>> contribution_densities(const model::noise_result& r) {
  std::vector<std::vector<double>> out(r.contributions.size(), std::vector<double>(r.density.size(), 0.0));
  for (std::size_t c = 0; c < r.contributions.size(); ++c)
    for (std::size_t j = 0; j < r.sources.size(); ++j)
      if (r.sources[j].part == r.contributions[c].part && r.sources[j].mechanism == r.contributions[c].mechanism)
        for (std::size_t k = 0; k < r.density.size(); ++k) out[c][k] += r.density[k].source_v2_hz[j];
  return out;
}

void write_plot(const noise_report& rep, const std::string& path, base::output_set& outputs) {
  const model::noise_result& r = rep.r;
  line_plot p;
  p.title = rep.st.name + ": noise density at the load";
  p.x = {"frequency (Hz)", axis_scale::log10, r.density.front().frequency_hz, r.density.back().frequency_hz, true};
  series total{"total", {}, {}, false};
  double lo = INFINITY, hi = 0.0;
  for (const model::noise_point& pt : r.density) {
    total.x.push_back(pt.frequency_hz);
    total.y.push_back(std::sqrt(pt.output_v2_hz));
    lo = std::min(lo, total.y.back());
    hi = std::max(hi, total.y.back());
  }
  // Down to 40 dB below the quietest point of the total: a part further down does not matter.
  const double floor = lo / 100.0;
  p.top = {axis{"noise density (V/√Hz)", axis_scale::log10, floor, hi * 2.0, false}, {total}};
  const std::vector<std::vector<double>> dens = contribution_densities(r);
  for (std::size_t c = 0; c < r.contributions.size() && c < 5; ++c) {
    series s{contribution_name(r.contributions[c]), {}, {}, false};
    for (std::size_t k = 0; k < r.density.size(); ++k)
      if (std::sqrt(dens[c][k]) >= floor) {
        s.x.push_back(r.density[k].frequency_hz);
        s.y.push_back(std::sqrt(dens[c][k]));
      }
    if (s.x.size() > 1) p.top.lines.push_back(std::move(s));
  }
  p.markers.push_back({r.band_lo_hz, "band " + format_si(r.band_lo_hz, "Hz")});
  p.markers.push_back({r.band_hi_hz, "band " + format_si(r.band_hi_hz, "Hz")});
  add_svg_output(outputs, path, render_svg(p));
}

nlohmann::json noise_report_json(const noise_report& rep) {
  const model::noise_result& r = rep.r;
  nlohmann::json j;
  j["warnings"] = rep.warnings;
  j["temperature_k"] = r.temperature_k;
  j["band_hz"] = {r.band_lo_hz, r.band_hi_hz};
  j["gain_1k_v_per_v"] = r.gain_1k_abs;
  j["output_noise_v"] = r.output_v();
  j["output_noise_a_v"] = r.output_a_v();
  j["output_noise_468_v"] = r.output_468_v();
  j["input_noise_v"] = number_or_null(r.input_v());
  j["input_noise_a_v"] = number_or_null(r.input_a_v());
  j["input_noise_468_v"] = number_or_null(r.input_468_v());
  j["ein_dbu"] = number_or_null(model::dbu_of_rms(r.input_v()));
  j["ein_a_dbu"] = number_or_null(model::dbu_of_rms(r.input_a_v()));
  j["noise_figure_db"] = number_or_null(r.noise_figure_db);
  j["noise_figure_1k_db"] = number_or_null(r.spot_noise_figure_1k_db);
  j["self_noise_dba_spl"] =
      rep.st.has_capsule() ? number_or_null(model::self_noise_db_spl(r.input_a_v(), rep.st.capsule.sensitivity_v_per_pa))
                           : nlohmann::json(nullptr);
  if (rep.max_spl) {
    const bool found = rep.max_spl->found;
    j["max_spl_1_percent_db"] = found ? number_or_null(rep.max_spl_db) : nlohmann::json(nullptr);
    j["dynamic_range_db"] = found ? number_or_null(dynamic_range_db(rep)) : nlohmann::json(nullptr);
  }
  j["clean_swing_vrms"] = clean_swing_rms(rep);
  j["snr_db"] = number_or_null(snr_db(clean_swing_rms(rep), r.output_v()));
  j["snr_a_db"] = number_or_null(snr_db(clean_swing_rms(rep), r.output_a_v()));
  if (std::isfinite(rep.level_vpk)) {
    j["level_vrms"] = rms_of_vpk(rep.level_vpk);
    j["snr_level_db"] = number_or_null(snr_db(level_at_load_rms(rep), r.output_v()));
    j["snr_level_a_db"] = number_or_null(snr_db(level_at_load_rms(rep), r.output_a_v()));
  }
  nlohmann::json dens = nlohmann::json::array();
  for (const model::noise_point& p : r.density)
    dens.push_back({{"frequency_hz", p.frequency_hz},
                    {"output_v_per_rthz", std::sqrt(p.output_v2_hz)},
                    {"input_v_per_rthz", number_or_null(std::sqrt(p.input_v2_hz))}});
  j["density"] = dens;
  nlohmann::json contrib = nlohmann::json::array();
  for (const model::noise_contribution& c : r.contributions)
    contrib.push_back({{"part", c.part},
                       {"mechanism", model::noise_mechanism_name(c.mechanism)},
                       {"stage", c.stage >= 0 ? nlohmann::json(c.stage + 1) : nlohmann::json(nullptr)},
                       {"source", c.of_source},
                       {"share_percent_100", c.share_percent_100},
                       {"share_percent_1k", c.share_percent_1k},
                       {"share_percent_10k", c.share_percent_10k},
                       {"share_percent", c.share_percent},
                       {"share_percent_a", c.share_percent_a}});
  j["contributions"] = contrib;
  if (r.stages.size() > 1) {
    nlohmann::json stages = nlohmann::json::array();
    const double drive_rms = rms_of_vpk(rep.head.clean_drive_vpk);
    for (const model::noise_stage_figures& s : r.stages) {
      nlohmann::json js = {{"label", s.label},
                           {"output_noise_v", std::sqrt(s.at_output.unweighted)},
                           {"output_noise_a_v", std::sqrt(s.at_output.a)},
                           {"output_noise_468_v", std::sqrt(s.at_output.itu468)},
                           {"gain_1k_v_per_v", s.gain_1k_abs},
                           {"share_percent", s.share_percent},
                           {"share_percent_a", s.share_percent_a},
                           {"snr_db", number_or_null(snr_db(drive_rms * s.gain_1k_abs, std::sqrt(s.at_output.unweighted)))}};
      if (std::isfinite(rep.level_vpk))
        js["snr_level_db"] =
            number_or_null(snr_db(rms_of_vpk(rep.level_vpk) * s.gain_1k_abs, std::sqrt(s.at_output.unweighted)));
      stages.push_back(js);
    }
    j["stages"] = stages;
  }
  return j;
}

void print_json(const noise_report& rep, std::ostream& out) { out << json_text(noise_report_json(rep)) << '\n'; }

void write_csv(const noise_report& rep, std::ostream& out) {
  const model::noise_result& r = rep.r;
  const std::vector<std::vector<double>> dens = contribution_densities(r);
  out << "frequency_hz,output_v_per_rthz,input_v_per_rthz";
  for (const model::noise_contribution& c : r.contributions)
    out << ',' << c.part << ':' << model::noise_mechanism_name(c.mechanism);
  out << '\n';
  out.precision(10);
  for (std::size_t k = 0; k < r.density.size(); ++k) {
    const model::noise_point& p = r.density[k];
    out << p.frequency_hz << ',' << std::sqrt(p.output_v2_hz) << ',' << std::sqrt(p.input_v2_hz);
    for (std::size_t c = 0; c < r.contributions.size(); ++c) out << ',' << std::sqrt(dens[c][k]);
    out << '\n';
  }
}

std::string pct(double v) { return v < 0.1 ? "<0.1 %" : format_number(v, v < 10 ? 2 : 3) + " %"; }
std::string volts_row(double v) { return format_si(v, "V"); }
std::string db_row(double v) { return std::isfinite(v) ? format_number(v, 4) : "-"; }

void print_text(const noise_report& rep, std::ostream& out) {
  const model::noise_result& r = rep.r;
  out << rep.st.name << "\n  noise at the load over " << format_si(r.band_lo_hz, "Hz") << " to "
      << format_si(r.band_hi_hz, "Hz") << ", at " << format_number(r.temperature_k, 5) << " K\n\n";
  text_table t({align::left, align::right, align::right, align::right, align::right});
  t.add({"", "at the load", "dBu", "dBV", "at the input"});
  auto row = [&](const char* name, double v, double in) {
    t.add({name, volts_row(v), db_row(model::dbu_of_rms(v)), db_row(model::dbv_of_rms(v)), volts_row(in)});
  };
  row("unweighted", r.output_v(), r.input_v());
  row("A-weighted", r.output_a_v(), r.input_a_v());
  row("ITU-R 468", r.output_468_v(), r.input_468_v());
  t.write(out);
  out << "\n  EIN " << db_row(model::dbu_of_rms(r.input_v())) << " dBu unweighted, "
      << db_row(model::dbu_of_rms(r.input_a_v())) << " dBu A-weighted (the load's noise / " << format_number(r.gain_1k_abs, 4)
      << " V/V, the gain from the source at 1 kHz)\n";
  if (r.has_source_resistance && std::isfinite(r.noise_figure_db))
    out << "  noise figure " << format_number(r.spot_noise_figure_1k_db, 3) << " dB at 1 kHz, "
        << format_number(r.noise_figure_db, 3) << " dB over the band (against the source's own resistance)\n";
  if (rep.st.has_capsule())
    out << "  self-noise " << format_number(model::self_noise_db_spl(r.input_a_v(), rep.st.capsule.sensitivity_v_per_pa), 3)
        << " dB(A) SPL (the capsule's " << format_si(rep.st.capsule.sensitivity_v_per_pa * 1e3, "mV/Pa") << ")\n";
  if (rep.max_spl) {
    if (rep.max_spl->found)
      out << "  dynamic range " << format_number(dynamic_range_db(rep), 3) << " dB, from the self-noise to the maximum SPL at 1 % THD ("
          << format_number(rep.max_spl_db, 4) << " dB SPL at 1 kHz)\n";
    else
      out << "  dynamic range: no maximum SPL at 1 % THD (" << rep.max_spl->reason << ")\n";
  }
  out << "  signal-to-noise at the clean swing (" << format_si(clean_swing_rms(rep), "V") << " rms at the load): "
      << format_number(snr_db(clean_swing_rms(rep), r.output_v()), 3) << " dB, "
      << format_number(snr_db(clean_swing_rms(rep), r.output_a_v()), 3) << " dB A-weighted\n";
  if (std::isfinite(rep.level_vpk))
    out << "  signal-to-noise at " << rep.level_text << " (" << format_si(level_at_load_rms(rep), "V")
        << " rms at the load): " << format_number(snr_db(level_at_load_rms(rep), r.output_v()), 3) << " dB, "
        << format_number(snr_db(level_at_load_rms(rep), r.output_a_v()), 3) << " dB A-weighted\n";

  out << "\n  which part hisses: share of the noise power at the load\n";
  text_table c({align::left, align::left, align::right, align::right, align::right, align::right});
  c.add({"part", "noise", "100 Hz", "1 kHz", "10 kHz", "A-weighted"});
  for (const model::noise_contribution& k : r.contributions)
    c.add({k.part + (k.of_source ? " (source)" : ""), model::noise_mechanism_name(k.mechanism), pct(k.share_percent_100),
           pct(k.share_percent_1k), pct(k.share_percent_10k), pct(k.share_percent_a)});
  c.write(out);

  if (r.stages.size() > 1) {
    out << "\n  per stage: noise at its output, its parts' share of the load's, signal-to-noise at the chain's clean drive\n"
           "  (S/N: the stage's output at the largest drive the whole chain takes cleanly, " +
               format_si(rep.head.clean_drive_vpk, "V") + " peak at the generator, over its noise;\n"
           "  every stage but the one that limits the chain sits below its own clean swing there)\n";
    text_table s({align::left, align::right, align::right, align::right, align::right});
    s.add({"stage", "noise", "A-weighted", "share (A)", "S/N"});
    const double drive_rms = rms_of_vpk(rep.head.clean_drive_vpk);
    for (const model::noise_stage_figures& st : r.stages)
      s.add({st.label, volts_row(std::sqrt(st.at_output.unweighted)), volts_row(std::sqrt(st.at_output.a)),
             pct(st.share_percent_a),
             format_number(snr_db(drive_rms * st.gain_1k_abs, std::sqrt(st.at_output.unweighted)), 3) + " dB"});
    s.write(out);
  }
}

CLI::App* setup(CLI::App& app, noise_options& opt, const data_files& data) {
  CLI::App* sub = app.add_subcommand("noise", "Noise at the load and referred to the input: EIN, weightings, which part hisses");
  add_stage_input(*sub, opt.input, data);
  sub->add_option("--from", opt.from, "Lowest frequency of the density sweep")->capture_default_str();
  sub->add_option("--to", opt.to, "Highest frequency of the density sweep")->capture_default_str();
  sub->add_option("--points", opt.points, "Log-spaced frequencies of the density sweep (--csv, --json, --plot)")
      ->capture_default_str()
      ->check(CLI::Range(2, 100000));
  sub->add_option("--band", opt.band, "Band the noise is integrated over, LO..HI")->capture_default_str();
  sub->add_option("--level", opt.level,
                  "A signal level at the generator to give the signal-to-noise ratio at (-10dBu, 100mVrms, 94dBSPL "
                  "for a capsule)");
  sub->add_flag("--json", opt.json, "Machine-readable output");
  sub->add_flag("--csv", opt.csv, "The density sweep as CSV: total and each part, V/√Hz");
  sub->add_option("--plot", opt.plot, "Write the noise density and its largest parts against frequency as SVG")
      ->type_name("FILE.svg");
  sub->footer(
      "Examples:\n"
      "  pinchoff noise presets/phantom-mic-follower.toml\n"
      "      self-noise in dB(A) SPL, EIN, and which part dominates at 100 Hz, 1 kHz and 10 kHz\n"
      "  pinchoff noise presets/clean-preamp-18v.toml --set signal.impedance=150 --level -10dBu\n"
      "      EIN with a 150 Ω source, the noise figure, and the signal-to-noise ratio at -10 dBu\n"
      "      from the generator\n"
      "  pinchoff noise presets/bass-booster-9v.toml --band 20..15k --plot hiss.svg\n"
      "  pinchoff noise presets/clean-preamp-18v.toml --csv > density.csv\n"
      "Counted: every resistor's thermal noise (the load's is the next equipment's), each JFET's\n"
      "channel noise, its flicker noise ([jfet] flicker_coefficient, flicker_exponent) and the shot\n"
      "noise of its gate current and [jfet] gate_leakage. Band figures are referred to the input by\n"
      "the gain at 1 kHz; A-weighting is IEC 61672-1's, ITU-R 468 the filter of BS.468-4 read as rms.");
  return sub;
}

// Everything from the stage (rep.st) and its level on.
void analyse_noise_report(noise_report& rep, const model::noise_settings& s, std::ostream& err) {
  rep.net = model::build_network(rep.st);
  rep.op = model::solve_operating_point(rep.net);
  rep.warnings = rest_point_warnings(rep.st, rep.net, rep.op, "noise", err);
  rep.r = model::analyse_noise(rep.net, rep.op, s);
  // The swing alone: the report rates the signal-to-noise ratio at the clean drive, and names no clip order.
  rep.head = model::analyse_headroom(rep.net, rep.op, model::headroom_detail::swing_only);
  if (rep.st.has_capsule()) {
    // The top of a microphone's dynamic range, as sweep and compare rate it (1 kHz).
    model::compare_settings c;
    c.mode = model::compare_mode::at_drive;
    c.automatic_oversample = true;
    // Only the 1 % figure: the 0.5 % one find_max_spl adds is not shown here.
    rep.max_spl = model::find_drive_for_thd(rep.st, c, 1.0);
    rep.max_spl_db = model::capsule_level_db_spl(rep.st.capsule, rep.max_spl->drive_vpk);
  }
}

model::noise_settings noise_settings_of(const noise_options& opt) {
  model::noise_settings s;
  s.from_hz = parse_analysis_frequency_hz(opt.from, "--from");
  s.to_hz = parse_analysis_frequency_hz(opt.to, "--to");
  if (!(s.to_hz > s.from_hz)) throw input_error("--to must be above --from");
  s.points = opt.points;
  const base::value_range band = base::parse_range(opt.band, base::unit::hertz, "--band");
  s.band_lo_hz = band.lo;
  s.band_hi_hz = band.hi;
  return s;
}

void run(const noise_options& opt, std::ostream& out, std::ostream& err, base::output_set& outputs) {
  if (opt.json && opt.csv) throw input_error("--json and --csv: choose one");
  const model::noise_settings s = noise_settings_of(opt);
  noise_report rep;
  rep.st = load_stage(opt.input);
  if (!opt.level.empty()) {
    rep.level_vpk = option_level_vpk(opt.level, "--level", &rep.st);
    if (!(rep.level_vpk > 0.0)) throw input_error("--level: give a level above 0 V, got " + opt.level);
    rep.level_text = opt.level;
  }
  analyse_noise_report(rep, s, err);
  if (!opt.plot.empty()) write_plot(rep, opt.plot, outputs);
  if (opt.json) return print_json(rep, out);
  if (opt.csv) return write_csv(rep, out);
  print_text(rep, out);
  if (!opt.plot.empty()) out << "\n  plot written to " << opt.plot << '\n';
}

}  // namespace

nlohmann::json noise_json(const model::stage& st, std::ostream& err) {
  noise_report rep;
  rep.st = st;
  analyse_noise_report(rep, noise_settings_of(noise_options{}), err);
  return noise_report_json(rep);
}

void register_noise(CLI::App& app, std::vector<command>& commands, const data_files& data) {
  auto opt = std::make_shared<noise_options>();
  CLI::App* sub = setup(app, *opt, data);
  commands.push_back({sub, [opt](std::ostream& out, std::ostream& err, base::output_set& o) { run(*opt, out, err, o); },
                      {{"band", "--band"}, {"frequencies", "--from/--to"}, {"points", "--points"}},
                      [opt] {
                        command_files f;
                        add_stage_inputs(f, opt->input.path, opt->input.devices);
                        if (!opt->plot.empty()) f.outputs.push_back({"--plot", opt->plot});
                        return f;
                      }});
}

}  // namespace pinchoff::cli
