// pinchoff response: small-signal frequency response from the generator to the load.
#include <cmath>
#include <complex>
#include <filesystem>
#include <memory>
#include <numbers>
#include <span>
#include <string>
#include <vector>

#include <CLI/CLI.hpp>
#include <nlohmann/json.hpp>

#include "cli/app.hpp"
#include "cli/common.hpp"
#include "cli/plot.hpp"
#include "cli/report_json.hpp"
#include "cli/text_table.hpp"
#include "base/error.hpp"
#include "base/units.hpp"
#include "model/circuit/network.hpp"
#include "model/analysis/response.hpp"

namespace pinchoff::cli {
namespace {

using base::format_number;
using base::format_si;
using align = text_table::align;

struct response_options {
  stage_input input;
  std::string from{"10"}, to{"100k"};
  int points{200};
  bool json{false}, csv{false};
  std::string plot;
};

double mag_db(std::complex<double> g) { return base::db_from_ratio(std::abs(g)); }

// Phase in degrees, unwrapped along the sweep so it does not jump by 360.
std::vector<double> unwrapped_phase_deg(const std::vector<model::response_point>& pts) {
  std::vector<double> out;
  double prev = 0.0;
  for (std::size_t k = 0; k < pts.size(); ++k) {
    double p = std::arg(pts[k].gain) * 180.0 / std::numbers::pi;
    if (k > 0) {
      while (p - prev > 180.0) p -= 360.0;
      while (p - prev < -180.0) p += 360.0;
    }
    out.push_back(p);
    prev = p;
  }
  return out;
}

// Standard 1-2-5 frequencies inside the range, for the readable table.
std::vector<double> table_frequencies(double lo, double hi) {
  std::vector<double> f;
  for (double decade = std::pow(10.0, std::floor(std::log10(lo))); decade <= hi; decade *= 10.0)
    for (double m : {1.0, 2.0, 5.0})
      if (m * decade >= lo * (1 - 1e-9) && m * decade <= hi * (1 + 1e-9)) f.push_back(m * decade);
  return f;
}

// What run computed, for the formatters.
struct response_report {
  model::stage st;
  model::network net;
  model::operating_point op;
  double lo_hz{}, hi_hz{};
  model::response_result r;
  std::vector<double> phase_deg;  // unwrapped, one per point
  double midband_db{};
  std::vector<std::string> warnings;
  std::vector<model::response_point> table;  // at the 1-2-5 frequencies of the range, for the text
  std::string junction_note;  // no high corner because no junction capacitance is given; else empty
};

// The stages whose [jfet] gives neither cgs nor cgd: without them nothing in the model rolls
// the treble off, so a response with no high corner is flat to the top by omission, not by design.
std::string junction_capacitance_note(const model::stage& st, const model::response_result& r) {
  for (const auto& c : r.corners)
    if (!c.is_low) return "";
  std::vector<std::string> missing;
  for (int k = 0; k < st.stage_count(); ++k) {
    const model::stage_parts& p = st.part(k);
    if (p.jfet.cgs_f == 0.0 && p.jfet.cgd_f == 0.0)
      missing.push_back(st.is_chain() ? (p.label.empty() ? "stage " + std::to_string(k + 1) : p.label) : "the JFET");
  }
  if (missing.empty()) return "";
  std::string who;
  for (std::size_t i = 0; i < missing.size(); ++i) who += (i ? ", " : "") + missing[i];
  return "no high corner: the junction capacitances (cgs, cgd in [jfet]) are not given for " + who +
         ", so the response is flat to the top; give them (a datasheet's Ciss and Crss) for the treble roll-off";
}

void write_plot(const response_report& rep, const std::string& path, base::output_set& outputs) {
  const model::response_result& r = rep.r;
  line_plot p;
  p.title = rep.st.name + ": frequency response";
  p.x = {"frequency (Hz)", axis_scale::log10, rep.lo_hz, rep.hi_hz, true};
  series mag{"gain", {}, {}, false}, ph{"phase", {}, {}, false};
  for (std::size_t k = 0; k < r.points.size(); ++k) {
    mag.x.push_back(r.points[k].frequency_hz);
    mag.y.push_back(mag_db(r.points[k].gain));
    ph.x.push_back(r.points[k].frequency_hz);
    ph.y.push_back(rep.phase_deg[k]);
  }
  p.top = {axis{"gain (dB)", axis_scale::linear, {}, {}, false}, {mag}};
  p.bottom = panel{axis{"phase (degrees)", axis_scale::linear, {}, {}, false}, {ph}};
  for (const auto& c : r.corners)
    if (c.frequency_hz >= rep.lo_hz && c.frequency_hz <= rep.hi_hz)
      p.markers.push_back({c.frequency_hz, "-3 dB " + format_si(c.frequency_hz, "Hz")});
  if (r.resonance && r.resonance->frequency_hz >= rep.lo_hz && r.resonance->frequency_hz <= rep.hi_hz)
    p.markers.push_back({r.resonance->frequency_hz, "resonance " + format_si(r.resonance->frequency_hz, "Hz")});
  add_svg_output(outputs, path, render_svg(p));
}

nlohmann::json response_report_json(const response_report& rep) {
  const model::response_result& r = rep.r;
  nlohmann::json j;
  j["midband_gain_db"] = rep.midband_db;
  j["warnings"] = rep.warnings;
  j["midband_gain_v_per_v"] = r.midband_gain;
  nlohmann::json corners = nlohmann::json::array(), kinds = nlohmann::json::array();
  for (const auto& c : r.corners) {
    corners.push_back(c.frequency_hz);
    kinds.push_back(c.is_low ? "low" : "high");
  }
  j["corners_hz"] = corners;
  j["corner_kinds"] = kinds;
  j["notes"] = rep.junction_note.empty() ? nlohmann::json::array() : nlohmann::json::array({rep.junction_note});
  if (const auto& res = r.resonance) {
    nlohmann::json o{{"frequency_hz", res->frequency_hz}, {"peak_db", res->peak_db}};
    o["below_3db_hz"] = res->below_hz ? nlohmann::json(*res->below_hz) : nlohmann::json(nullptr);
    o["above_3db_hz"] = res->above_hz ? nlohmann::json(*res->above_hz) : nlohmann::json(nullptr);
    j["resonance"] = o;
  } else if (rep.st.has_pickup()) {
    j["resonance"] = nullptr;
  }
  nlohmann::json pts = nlohmann::json::array();
  for (std::size_t k = 0; k < r.points.size(); ++k)
    pts.push_back({{"frequency_hz", r.points[k].frequency_hz},
                   {"magnitude_db", mag_db(r.points[k].gain)},
                   {"phase_deg", rep.phase_deg[k]},
                   {"zin_ohm", std::abs(r.points[k].zin_ohm)},
                   {"zin_phase_deg", std::arg(r.points[k].zin_ohm) * 180.0 / std::numbers::pi}});
  j["points"] = pts;
  return j;
}

void print_json(const response_report& rep, std::ostream& out) { out << json_text(response_report_json(rep)) << '\n'; }

void write_csv(const response_report& rep, std::ostream& out) {
  const model::response_result& r = rep.r;
  out << "frequency_hz,magnitude_db,phase_deg,zin_ohm,zin_phase_deg\n";
  out.precision(10);
  for (std::size_t k = 0; k < r.points.size(); ++k)
    out << r.points[k].frequency_hz << ',' << mag_db(r.points[k].gain) << ',' << rep.phase_deg[k] << ','
        << std::abs(r.points[k].zin_ohm) << ',' << std::arg(r.points[k].zin_ohm) * 180.0 / std::numbers::pi << '\n';
}

void print_text(const response_report& rep, std::ostream& out) {
  const model::response_result& r = rep.r;
  out << rep.st.name << "\n  small-signal response, generator to load\n\n";
  out << "  mid-band gain " << format_number(r.midband_gain, 4) << " V/V (" << format_number(rep.midband_db, 3) << " dB)\n";
  if (rep.st.has_pickup()) {
    // A pickup: its resonance and the points 3 dB below its peak, rather than one upper corner.
    out << "  mid-band: the pass band below the pickup's resonance (the coil's resistance alone)\n";
    if (const auto& res = r.resonance) {
      out << "  resonance " << format_si(res->frequency_hz, "Hz", 4) << ", peak " << format_number(res->peak_db, 3)
          << " dB above mid-band\n";
      out << "  -3 dB from the peak: "
          << (res->below_hz ? format_si(*res->below_hz, "Hz", 4) + " to " : std::string("(no lower point: the peak is under 3 dB) up to "))
          << format_si(*res->above_hz, "Hz", 4) << '\n';
    } else {
      out << "  no resonance peak: the load and the cable damp it flat\n";
    }
  }
  if (r.corners.empty()) out << "  no -3 dB corner between 1 mHz and 1 GHz\n";
  for (const auto& c : r.corners)
    out << "  " << (c.is_low ? "low " : "high") << " -3 dB corner " << format_si(c.frequency_hz, "Hz", 4)
        << (rep.st.has_pickup() ? " (re mid-band)" : "") << '\n';
  if (!rep.junction_note.empty()) out << "  " << rep.junction_note << '\n';
  out << '\n';
  text_table t({align::right, align::right, align::right, align::right, align::right});
  t.add({"frequency", "gain", "re mid-band", "phase", "input impedance"});
  const std::vector<double> row_phase = unwrapped_phase_deg(rep.table);
  for (std::size_t k = 0; k < rep.table.size(); ++k) {
    const model::response_point& p = rep.table[k];
    t.add({format_si(p.frequency_hz, "Hz"), format_number(mag_db(p.gain), 3) + " dB",
           format_number(mag_db(p.gain) - rep.midband_db, 2) + " dB", format_number(row_phase[k], 3) + "°",
           format_si(std::abs(p.zin_ohm), "Ω")});
  }
  t.write(out);
}

CLI::App* setup(CLI::App& app, response_options& opt, const data_files& data) {
  CLI::App* sub = app.add_subcommand("response", "Small-signal frequency response, -3 dB corners and input impedance");
  add_stage_input(*sub, opt.input, data);
  sub->add_option("--from", opt.from, "Lowest frequency")->capture_default_str();
  sub->add_option("--to", opt.to, "Highest frequency")->capture_default_str();
  sub->add_option("--points", opt.points, "Log-spaced frequencies for --csv, --json and --plot")
      ->capture_default_str()
      ->check(CLI::Range(2, 100000));
  sub->add_flag("--json", opt.json, "Machine-readable output");
  sub->add_flag("--csv", opt.csv, "Every point as CSV");
  sub->add_option("--plot", opt.plot, "Write magnitude and phase against frequency as SVG")->type_name("FILE.svg");
  sub->footer(
      "Examples:\n"
      "  pinchoff response presets/bass-booster-9v.toml\n"
      "      mid-band gain, -3 dB corners, and gain and phase at 1-2-5 frequencies\n"
      "  pinchoff response presets/phantom-mic-follower.toml --from 1 --to 1M --plot mic.svg\n"
      "  pinchoff response presets/clean-preamp-18v.toml --set source.bypass_cap=4.7u --csv > r.csv\n"
      "Every capacitor is included: coupling and bypass capacitors set the low corners, the\n"
      "junction capacitances cgs and cgd (with the Miller effect) the high corner.");
  return sub;
}

// Everything from the stage (rep.st) and the range (rep.lo_hz, rep.hi_hz) on.
void analyse_response_report(response_report& rep, int points, std::ostream& err) {
  rep.net = model::build_network(rep.st);
  rep.op = model::solve_operating_point(rep.net);
  rep.warnings = rest_point_warnings(rep.st, rep.net, rep.op, "response", err);
  rep.r = model::analyse_response(rep.net, rep.op, rep.lo_hz, rep.hi_hz, points);
  rep.phase_deg = unwrapped_phase_deg(rep.r.points);
  rep.midband_db = base::db_from_ratio(std::fabs(rep.r.midband_gain));
  rep.junction_note = junction_capacitance_note(rep.st, rep.r);
}

void run(const response_options& opt, std::ostream& out, std::ostream& err, base::output_set& outputs) {
  if (opt.json && opt.csv) throw input_error("--json and --csv: choose one");
  response_report rep;
  rep.lo_hz = parse_analysis_frequency_hz(opt.from, "--from");
  rep.hi_hz = parse_analysis_frequency_hz(opt.to, "--to");
  if (!(rep.hi_hz > rep.lo_hz)) throw input_error("--to must be above --from");
  rep.st = load_stage(opt.input);
  analyse_response_report(rep, opt.points, err);

  if (!opt.plot.empty()) write_plot(rep, opt.plot, outputs);
  if (opt.json) return print_json(rep, out);
  if (opt.csv) return write_csv(rep, out);
  for (double f : table_frequencies(rep.lo_hz, rep.hi_hz)) rep.table.push_back(model::response_at(rep.net, rep.op, f));
  print_text(rep, out);
  if (!opt.plot.empty()) out << "\n  plot written to " << opt.plot << '\n';
}

}  // namespace

nlohmann::json response_json(const model::stage& st, std::ostream& err) {
  const response_options defaults;
  response_report rep;
  rep.lo_hz = parse_analysis_frequency_hz(defaults.from, "--from");
  rep.hi_hz = parse_analysis_frequency_hz(defaults.to, "--to");
  rep.st = st;
  analyse_response_report(rep, defaults.points, err);
  return response_report_json(rep);
}

void register_response(CLI::App& app, std::vector<command>& commands, const data_files& data) {
  auto opt = std::make_shared<response_options>();
  CLI::App* sub = setup(app, *opt, data);
  commands.push_back({sub, [opt](std::ostream& out, std::ostream& err, base::output_set& o) { run(*opt, out, err, o); }, {},
                      [opt] {
                        command_files f;
                        add_stage_inputs(f, opt->input.path, opt->input.devices);
                        if (!opt->plot.empty()) f.outputs.push_back({"--plot", opt->plot});
                        return f;
                      }});
}

}  // namespace pinchoff::cli
