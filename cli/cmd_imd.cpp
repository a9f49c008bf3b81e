// pinchoff imd: two-tone intermodulation (SMPTE/DIN and twin-tone difference frequency).
#include <cmath>
#include <memory>
#include <string>
#include <vector>

#include <CLI/CLI.hpp>
#include <nlohmann/json.hpp>

#include "cli/app.hpp"
#include "cli/common.hpp"
#include "cli/text_table.hpp"
#include "base/error.hpp"
#include "base/units.hpp"
#include "model/analysis/imd.hpp"

namespace pinchoff::cli {
namespace {

using base::format_number;
using base::format_si;
using align = text_table::align;

struct imd_options {
  stage_input input;
  std::string method{"smpte"};
  std::string level{"300mVpk"};
  int oversample{8};
  std::string rate{"48k"};
  bool json{false};
};

std::string pct_db(double ratio) {
  return format_number(100.0 * ratio, 3) + " % (" + format_number(base::db_from_ratio(ratio), 3) + " dB)";
}
std::string rel_db(double v, double ref) { return format_number(base::db_from_ratio(v / ref), 3) + " dB"; }


struct imd_report {
  model::stage st;
  model::imd_settings settings;
  model::imd_result r;
  std::vector<std::string> warnings;  // the rest point's cautions
};

void print_json(const imd_report& rep, const std::string& method, std::ostream& out) {
  const model::imd_result& r = rep.r;
  nlohmann::json j;
  j["method"] = method;
  j["f1_hz"] = r.f1_hz;
  j["f2_hz"] = r.f2_hz;
  j["level_vpk"] = rep.settings.level_vpk;
  j["tone1_drive_vpk"] = r.a1_vpk;
  j["tone2_drive_vpk"] = r.a2_vpk;
  j["oversampling"] = rep.settings.oversample;
  j["warnings"] = rep.warnings;
  nlohmann::json products = nlohmann::json::array();
  if (rep.settings.method == model::imd_method::twin_tone) {
    const auto& d = r.difference;
    j["tone1_output_vpk"] = d.u1_vpk;
    j["tone2_output_vpk"] = d.u2_vpk;
    j["d2_percent"] = 100.0 * d.d2_ratio;
    j["d3_percent"] = 100.0 * d.d3_ratio;
    j["d2_db"] = base::db_from_ratio(d.d2_ratio);
    j["d3_db"] = base::db_from_ratio(d.d3_ratio);
    products.push_back({{"name", "f2-f1"}, {"frequency_hz", d.f2_hz - d.f1_hz}, {"level_vpk", d.difference_vpk}});
    products.push_back({{"name", "2f1-f2"}, {"frequency_hz", 2 * d.f1_hz - d.f2_hz}, {"level_vpk", d.lower3_vpk}});
    products.push_back({{"name", "2f2-f1"}, {"frequency_hz", 2 * d.f2_hz - d.f1_hz}, {"level_vpk", d.upper3_vpk}});
  } else {
    const auto& m = r.smpte;
    j["tone1_output_vpk"] = m.u1_vpk;
    j["tone2_output_vpk"] = m.u2_vpk;
    j["imd_percent"] = 100.0 * m.imd_ratio;
    j["imd_db"] = base::db_from_ratio(m.imd_ratio);
    for (const auto& o : m.orders)
      products.push_back({{"order", o.order},
                          {"lower_hz", o.lower_hz},
                          {"upper_hz", o.upper_hz},
                          {"lower_dbc", base::db_from_ratio(o.lower_vpk / m.u2_vpk)},
                          {"upper_dbc", base::db_from_ratio(o.upper_vpk / m.u2_vpk)},
                          {"d_percent", 100.0 * o.d_ratio}});
  }
  j["products"] = products;
  j["steady_state_converged"] = r.converged;
  out << json_text(j) << '\n';
}

void print_text(const imd_report& rep, std::ostream& out) {
  const model::imd_result& r = rep.r;
  const model::imd_settings& s = rep.settings;
  const bool twin = s.method == model::imd_method::twin_tone;
  out << rep.st.name << "\n  "
      << (twin ? "twin-tone difference-frequency distortion (IEC 60268-3)"
               : (s.method == model::imd_method::din ? "DIN 45403 intermodulation" : "SMPTE RP120 intermodulation"))
      << ", " << s.oversample << "x oversampling\n";
  out << "  tones " << format_si(r.f1_hz, "Hz", 4) << " at " << format_si(r.a1_vpk, "Vpk") << " and "
      << format_si(r.f2_hz, "Hz", 4) << " at " << format_si(r.a2_vpk, "Vpk") << " at the generator (composite "
      << format_si(s.level_vpk, "Vpk") << ")\n\n";
  if (twin) {
    const auto& d = r.difference;
    text_table t({align::left, align::right, align::right, align::right});
    t.add({"", "frequency", "at the load", "re 2 U(f2)"});
    t.add({"f1", format_si(d.f1_hz, "Hz", 4), format_si(d.u1_vpk, "Vpk"), ""});
    t.add({"f2", format_si(d.f2_hz, "Hz", 4), format_si(d.u2_vpk, "Vpk"), ""});
    t.add({"f2 - f1", format_si(d.f2_hz - d.f1_hz, "Hz", 4), format_si(d.difference_vpk, "Vpk"),
           rel_db(d.difference_vpk, 2 * d.u2_vpk)});
    t.add({"2f1 - f2", format_si(2 * d.f1_hz - d.f2_hz, "Hz", 4), format_si(d.lower3_vpk, "Vpk"),
           rel_db(d.lower3_vpk, 2 * d.u2_vpk)});
    t.add({"2f2 - f1", format_si(2 * d.f2_hz - d.f1_hz, "Hz", 4), format_si(d.upper3_vpk, "Vpk"),
           rel_db(d.upper3_vpk, 2 * d.u2_vpk)});
    t.write(out);
    out << "\n  d2 (second order)  " << pct_db(d.d2_ratio) << "\n  d3 (third order)   " << pct_db(d.d3_ratio) << '\n';
    return;
  }
  const auto& m = r.smpte;
  text_table t({align::left, align::right, align::right, align::right, align::right, align::right});
  t.add({"sidebands", "lower", "", "upper", "", "d_n"});
  for (const auto& o : m.orders)
    t.add({"f2 ± " + std::to_string(o.order) + " f1", format_si(o.lower_hz, "Hz", 4), rel_db(o.lower_vpk, m.u2_vpk),
           format_si(o.upper_hz, "Hz", 4), rel_db(o.upper_vpk, m.u2_vpk), pct_db(o.d_ratio)});
  t.write(out);
  out << "\n  high tone at the load " << format_si(m.u2_vpk, "Vpk") << ", low tone " << format_si(m.u1_vpk, "Vpk")
      << "\n  IMD = sqrt(sum d_n^2) = " << pct_db(m.imd_ratio) << '\n';
}

CLI::App* setup(CLI::App& app, imd_options& opt, const data_files& data) {
  CLI::App* sub = app.add_subcommand("imd", "Two-tone intermodulation: SMPTE/DIN sidebands or twin-tone difference products");
  add_stage_input(*sub, opt.input, data);
  sub->add_option("--method", opt.method,
                  "smpte (60 Hz + 7 kHz, 4:1; SMPTE RP120), din (250 Hz + 8 kHz, 4:1; DIN 45403) or twin-tone "
                  "(19 + 20 kHz, equal; IEC 60268-3)")
      ->capture_default_str()
      ->check(CLI::IsMember({"smpte", "din", "twin-tone"}));
  sub->add_option("--level", opt.level, "Peak of the two tones together at the generator")->capture_default_str();
  sub->add_option("--oversample", opt.oversample, "Simulation rate as a multiple of --rate")->capture_default_str();
  sub->add_option("--rate", opt.rate, "The audio rate the oversampling multiplies")->capture_default_str();
  sub->add_flag("--json", opt.json, "Machine-readable output");
  sub->footer(
      "Examples:\n"
      "  pinchoff imd presets/bass-booster-9v.toml\n"
      "      SMPTE intermodulation at 300 mV peak: how a low note modulates the highs\n"
      "  pinchoff imd presets/clean-preamp-18v.toml --method twin-tone --level 1Vpk\n"
      "  pinchoff imd presets/phantom-mic-follower.toml --method din --level -10dBu --json\n"
      "The level is the peak of the composite drive (the two peaks added): SMPTE and DIN split it\n"
      "4:1 between the low and the high tone, twin-tone 1:1. Tones are snapped so the record\n"
      "holds whole cycles of both (SMPTE's 7 kHz becomes 7.02 kHz). Products are read exactly\n"
      "from the periodic steady state of the nonlinear simulation.");
  return sub;
}

void run(const imd_options& opt, std::ostream& out, std::ostream& err) {
  imd_report rep;
  model::imd_settings& s = rep.settings;
  s.method = opt.method == "din"         ? model::imd_method::din
             : opt.method == "twin-tone" ? model::imd_method::twin_tone
                                         : model::imd_method::smpte;
  // A sound pressure level needs the capsule's sensitivity: the stage is read first then.
  const bool spl = is_spl_level(opt.level);
  if (spl) rep.st = load_stage(opt.input);
  s.level_vpk = option_level_vpk(opt.level, "--level", spl ? &rep.st : nullptr);
  s.oversample = opt.oversample;
  s.base_rate_hz = option_frequency_hz(opt.rate, "--rate");
  if (!spl) rep.st = load_stage(opt.input);
  rep.warnings = rest_point_warnings(rep.st, "imd", err);
  rep.r = model::run_imd(rep.st, s);
  if (rep.r.newton.failed > 0)
    err << "pinchoff imd: warning: " << rep.r.newton.failed
        << " samples did not converge even sub-stepped: treat the result with caution\n";
  if (!rep.r.converged)
    err << "pinchoff imd: warning: the steady state was not reached (state still changes "
        << format_si(rep.r.state_change_v, "V") << " a record)\n";
  if (opt.json) return print_json(rep, opt.method, out);
  print_text(rep, out);
}

}  // namespace

void register_imd(CLI::App& app, std::vector<command>& commands, const data_files& data) {
  auto opt = std::make_shared<imd_options>();
  CLI::App* sub = setup(app, *opt, data);
  commands.push_back({sub, [opt](std::ostream& out, std::ostream& err, base::output_set&) { run(*opt, out, err); },
                      {{"level_vpk", "--level"}, {"oversampling", "--oversample"}, {"base_rate_hz", "--rate"}}});
}

}  // namespace pinchoff::cli
