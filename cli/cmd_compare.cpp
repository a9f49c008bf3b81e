// pinchoff compare: candidate designs side by side, at one output level or one drive.
#include <cctype>
#include <cmath>
#include <cstdio>
#include <filesystem>
#include <memory>
#include <optional>
#include <span>
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
#include "base/units.hpp"
#include "model/analysis/compare.hpp"

namespace pinchoff::cli {
namespace {

using base::format_number;
using base::format_si;
using align = text_table::align;

struct compare_options {
  std::vector<std::string> paths;
  std::vector<std::string> overrides;
  std::string freq{"1k"};
  std::string at_output, at_drive;
  int harmonics{model::default_harmonics};
  int oversample{8};
  bool oversample_given{false};
  bool json{false}, csv{false};
  std::string plot;
  int threads{0};
  std::filesystem::path devices;  ///< the program's class file
};

struct design_input {
  std::string path;
  std::vector<std::string> own;  // overrides for this design alone ("N:KEY=VALUE")
  model::stage st;
};

// "--set KEY=VALUE" applies to every design, "--set N:KEY=VALUE" to design N (from 1) only,
// after the common ones.
std::vector<design_input> load_designs(const compare_options& o) {
  if (o.paths.size() < 2)
    throw input_error("compare needs at least two designs (give two or more stage files; the same file twice with "
                      "--set 2:KEY=VALUE compares a variant)");
  std::vector<std::string> common;
  std::vector<std::vector<std::string>> own(o.paths.size());
  for (const std::string& s : o.overrides) {
    design_set ds = parse_design_set(s, o.paths.size());
    if (ds.design == 0) common.push_back(std::move(ds.set));
    else own[ds.design - 1].push_back(std::move(ds.set));
  }
  std::vector<design_input> d;
  for (std::size_t i = 0; i < o.paths.size(); ++i) {
    std::vector<std::string> all = common;
    all.insert(all.end(), own[i].begin(), own[i].end());
    d.push_back({o.paths[i], own[i], load_stage(o.paths[i], all, o.devices)});
  }
  return d;
}

std::string fixed(double v, int decimals) {
  if (!std::isfinite(v)) return "-";
  char t[48];
  std::snprintf(t, sizeof t, "%.*f", decimals, std::fabs(v) < 0.5 * std::pow(10.0, -decimals) ? 0.0 : v);
  return t;
}
std::string dbu(double vpk) { return fixed(base::dbu_from_vpk(vpk), 2) + " dBu"; }
// A level below the engine's numerical floor is a mark (cli/common.hpp).
std::string dbc(double v) {
  if (!std::isfinite(v)) return "-";
  return below_numerical_floor(v) ? std::string(floor_mark) + " dBc" : fixed(v, 2) + " dBc";
}
std::string ratio_db(double r) {
  if (std::isnan(r)) return "-";
  if (std::isinf(r)) return "even only";
  if (r <= 0) return "odd only";
  return fixed(10.0 * std::log10(r), 1) + " dB";
}

std::string label_of(const design_input& d) {
  std::string l = d.path;
  for (const std::string& s : d.own) l += "  --set " + s;
  return l;
}

// A capsule design's maximum sound pressure level at a THD, or why there is none.
std::optional<double> max_spl(const model::stage& st, const model::drive_search& d) {
  if (!st.has_capsule() || !d.found) return std::nullopt;
  return model::capsule_level_db_spl(st.capsule, d.drive_vpk);
}
std::string spl_text(const model::stage& st, const std::optional<model::drive_search>& d) {
  if (!d) return "";
  const std::optional<double> l = max_spl(st, *d);
  return l ? fixed(*l, 1) + " dB SPL" : std::string("not reached");
}

std::string mode_text(const model::compare_result& r) {
  if (r.drive_db_spl)
    return "every design driven at " + fixed(*r.drive_db_spl, 1) + " dB SPL at its capsule (each capsule's own voltage)";
  if (r.mode == model::compare_mode::at_output)
    return "each design driven to give " + dbu(r.level_vpk) + " (" + format_si(r.level_vpk, "Vpk", 4) + ") at the load";
  return "every design driven at " + format_si(r.level_vpk, "Vpk", 4) + " (" + dbu(r.level_vpk) + ") from the generator";
}

void print_text(const std::vector<design_input>& in, const model::compare_result& r, bool automatic_oversample,
                std::ostream& out) {
  out << "Comparison at " << format_si(r.frequency_hz, "Hz", 5);
  if (std::fabs(r.frequency_hz - r.requested_hz) > 1e-9 * r.requested_hz)
    out << " (asked " << format_si(r.requested_hz, "Hz", 4) << ", snapped to whole cycles)";
  out << ", " << mode_text(r) << "\n  " << r.oversample << "x oversampling"
      << (automatic_oversample && r.oversample < 8 ? " (enough at this frequency; --oversample sets it)" : "")
      << ", THD over H2..H" << r.thd_harmonics << "\n\n";
  text_table legend({align::left, align::left, align::left});
  for (std::size_t i = 0; i < in.size(); ++i) legend.add({std::to_string(i + 1), label_of(in[i]), in[i].st.name});
  legend.write(out);
  out << '\n';

  std::vector<align> al{align::left};
  al.insert(al.end(), r.designs.size(), align::right);
  text_table t(al);
  auto row = [&](const std::string& name, auto cell) {
    std::vector<std::string> cells{name};
    for (const model::design_figures& d : r.designs) cells.push_back(cell(d));
    t.add(cells);
  };
  using df = model::design_figures;
  std::vector<std::string> head{""};
  for (std::size_t i = 0; i < r.designs.size(); ++i) head.push_back(std::to_string(i + 1));
  t.add(head);
  // A chain's operating point is each of its stages', in signal order.
  bool chains = false;
  for (const df& d : r.designs) chains = chains || !d.stages_at.empty();
  auto each = [](const df& d, auto value) {
    if (d.stages_at.empty()) return value(d.at);
    std::string t;
    for (const model::terminal_point& a : d.stages_at) t += (t.empty() ? "" : " / ") + value(a);
    return t;
  };
  row(chains ? "VD (each stage)" : "VD", [&](const df& d) { return each(d, [](const model::terminal_point& a) { return format_si(a.vd_v, "V", 4); }); });
  row(chains ? "ID (each stage)" : "ID", [&](const df& d) { return each(d, [](const model::terminal_point& a) { return format_si(a.id_a, "A", 4); }); });
  row("gain, mid-band", [](const df& d) { return fixed(d.gain_midband_db, 2) + " dB"; });
  row("output polarity", [](const df& d) { return d.gain_midband < 0 ? std::string("inverted") : std::string("kept"); });
  row("clean swing", [](const df& d) { return format_si(d.clean_swing_vpk, "Vpk"); });
  row("", [](const df& d) { return dbu(d.clean_swing_vpk); });
  row("drive", [](const df& d) { return format_si(d.point.drive_vpk, "Vpk", 4); });
  row("", [](const df& d) { return dbu(d.point.drive_vpk); });
  bool capsules = false;
  for (const design_input& d : in) capsules = capsules || d.st.has_capsule();
  std::size_t col = 0;  // the design a cell is for, counted by the row below
  if (capsules) {
    col = 0;
    row("", [&](const df& d) {
      const model::stage& st = in[col++].st;
      return st.has_capsule() ? fixed(model::capsule_level_db_spl(st.capsule, d.point.drive_vpk), 1) + " dB SPL" : std::string();
    });
  }
  row("output", [](const df& d) { return format_si(d.point.output_vpk, "Vpk", 4); });
  row("", [](const df& d) { return dbu(d.point.output_vpk); });
  row("within clean swing", [](const df& d) { return d.beyond_clean_swing ? std::string("NO") : std::string("yes"); });
  row("gain at this level", [](const df& d) { return fixed(d.point.gain_db, 2) + " dB"; });
  row("THD", [](const df& d) { return format_number(d.point.thd_percent, 3) + " %"; });
  for (int h = 2; h <= r.harmonics; ++h)
    row("H" + std::to_string(h), [h](const df& d) { return dbc(d.point.harmonics_dbc[static_cast<std::size_t>(h - 2)]); });
  row("even/odd", [](const df& d) { return ratio_db(d.point.even_odd_ratio); });
  row("1 % THD at output", [](const df& d) {
    return d.thd_1_percent.found ? format_si(d.thd_1_percent.point.output_vpk, "Vpk") : std::string("not reached");
  });
  row("", [](const df& d) { return d.thd_1_percent.found ? dbu(d.thd_1_percent.point.output_vpk) : std::string(); });
  row("  at drive", [](const df& d) { return d.thd_1_percent.found ? dbu(d.thd_1_percent.drive_vpk) : std::string(); });
  if (capsules) {
    col = 0;
    row("max SPL, 0.5 % THD", [&](const df& d) { return spl_text(in[col++].st, d.thd_half_percent); });
    col = 0;
    row("max SPL, 1 % THD", [&](const df& d) {
      const model::stage& st = in[col++].st;
      return st.has_capsule() ? spl_text(st, d.thd_1_percent) : std::string();
    });
  }
  t.write(out);

  out << (chains ? "\n  clean swing: largest symmetric output at the load before the first JFET to clip leaves\n"
                  "  its clean region (mid-band, quasi-static, as in `bias`); VD, ID: each stage's, in signal\n"
                  "  order; drive: generator sine peak, open circuit; output: the\n"
                : "\n  clean swing: largest symmetric output before the JFET leaves its clean region (mid-band,\n"
                  "  quasi-static, as in `bias`); drive: generator sine peak, open circuit; output: the\n")
      << "  fundamental at the load; even/odd: even- over odd-harmonic power (positive: even-dominated);\n"
         "  output polarity: inverted where the output is upside down against the input (common\n"
         "  source; `render --invert` restores it for listening);\n"
         "  1 % THD: output where THD first reaches 1 % as the drive rises, at this frequency;\n"
         "  within clean swing: NO where this output is beyond the clean swing, so the figures are\n"
         "  those of a stage already out of its clean region.\n";
  if (capsules)
    out << "  max SPL: the sound pressure at the capsule (dB SPL, 0 dB = 20 µPa) at which THD first reaches\n"
           "  0.5 % or 1 % as the level rises, at this frequency; the capsule's own distortion is not modelled.\n";
  for (std::size_t i = 0; i < r.designs.size(); ++i) {
    if (!r.designs[i].thd_1_percent.found)
      out << "  design " << i + 1 << ", 1 % THD: " << r.designs[i].thd_1_percent.reason << '\n';
    if (r.designs[i].thd_half_percent && !r.designs[i].thd_half_percent->found)
      out << "  design " << i + 1 << ", 0.5 % THD: " << r.designs[i].thd_half_percent->reason << '\n';
  }
}

void print_json(const std::vector<design_input>& in, const model::compare_result& r, std::ostream& out) {
  nlohmann::json j;
  j["frequency_hz"] = r.frequency_hz;
  j["requested_frequency_hz"] = r.requested_hz;
  j["oversampling"] = r.oversample;
  j["mode"] = r.mode == model::compare_mode::at_output ? "at_output" : "at_drive";
  j["level_vpk"] = r.level_vpk;
  j["level_dbu"] = base::dbu_from_vpk(r.level_vpk);
  j["thd_harmonics"] = r.thd_harmonics;
  j["harmonics"] = r.harmonics;
  j["numerical_floor_dbc"] = model::numerical_floor_dbc;  // levels below it are null, flagged *_below_floor
  j["drive_db_spl"] = r.drive_db_spl ? nlohmann::json(*r.drive_db_spl) : nlohmann::json(nullptr);
  nlohmann::json ds = nlohmann::json::array();
  for (std::size_t i = 0; i < r.designs.size(); ++i) {
    const model::design_figures& d = r.designs[i];
    nlohmann::json hs = nlohmann::json::array();
    const std::span<const double> shown(d.point.harmonics_dbc.data(), static_cast<std::size_t>(r.harmonics - 1));
    for (double h : shown) hs.push_back(dbc_or_null(h));
    const model::drive_search& t1 = d.thd_1_percent;
    ds.push_back({{"path", in[i].path},
                  {"overrides", in[i].own},
                  {"name", in[i].st.name},
                  {"operating_point", operating_point_json(d.at)},
                  {"gain_midband_db", d.gain_midband_db},
                  {"gain_midband_v_per_v", d.gain_midband},
                  {"inverting", d.gain_midband < 0},
                  {"clean_swing_vpk", d.clean_swing_vpk},
                  {"clean_drive_vpk", d.clean_drive_vpk},
                  {"beyond_clean_swing", d.beyond_clean_swing},
                  {"drive_vpk", d.point.drive_vpk},
                  {"drive_dbu", base::dbu_from_vpk(d.point.drive_vpk)},
                  {"output_vpk", d.point.output_vpk},
                  {"output_dbu", base::dbu_from_vpk(d.point.output_vpk)},
                  {"gain_db", d.point.gain_db},
                  {"thd_percent", d.point.thd_percent},
                  {"thd_db", d.point.thd_db},
                  {"harmonics_dbc", hs},
                  {"harmonics_below_floor", below_floor_json(shown)},
                  {"even_odd_ratio", number_or_null(d.point.even_odd_ratio)},
                  {"alias_dbc", dbc_or_null(d.point.alias_dbc)},
                  {"alias_below_floor", below_numerical_floor(d.point.alias_dbc)},
                  {"drive_evaluations", d.drive_evaluations},
                  {"thd_1_percent",
                   {{"found", t1.found},
                    {"drive_vpk", t1.found ? nlohmann::json(t1.drive_vpk) : nlohmann::json(nullptr)},
                    {"output_vpk", t1.found ? nlohmann::json(t1.point.output_vpk) : nlohmann::json(nullptr)},
                    {"output_dbu", t1.found ? nlohmann::json(base::dbu_from_vpk(t1.point.output_vpk)) : nlohmann::json(nullptr)},
                    {"reason", t1.reason}}}});
    if (in[i].st.has_capsule() && d.thd_half_percent) {
      // Null where THD does not reach the figure within the drive limit.
      const std::optional<double> half = max_spl(in[i].st, *d.thd_half_percent), one = max_spl(in[i].st, t1);
      ds.back()["drive_db_spl"] = model::capsule_level_db_spl(in[i].st.capsule, d.point.drive_vpk);
      ds.back()["max_spl_half_percent_db"] = half ? nlohmann::json(*half) : nlohmann::json(nullptr);
      ds.back()["max_spl_1_percent_db"] = one ? nlohmann::json(*one) : nlohmann::json(nullptr);
    }
    if (!d.stages_at.empty()) {
      // A chain: each stage's operating point, as bias gives them, instead of one.
      nlohmann::json sts = nlohmann::json::array();
      for (std::size_t k = 0; k < d.stages_at.size(); ++k)
        sts.push_back({{"name", d.stage_labels[k]}, {"operating_point", operating_point_json(d.stages_at[k])}});
      ds.back().erase("operating_point");
      ds.back()["stages"] = sts;
    }
  }
  j["designs"] = ds;
  j["warnings"] = r.warnings;
  out << json_text(j) << '\n';
}

void write_csv(const std::vector<design_input>& in, const model::compare_result& r, std::ostream& out) {
  auto quoted = [](const std::string& s) {
    std::string q = "\"";
    for (char c : s) q += c == '"' ? std::string("\"\"") : std::string(1, c);
    return q + "\"";
  };
  out << "design,path,name,vd_v,id_a,gain_midband_db,clean_swing_vpk,drive_vpk,output_vpk,gain_db,thd_percent";
  for (int h = 2; h <= r.harmonics; ++h) out << ",h" << h << "_dbc";
  out << ",even_odd_ratio,thd_1_percent_output_vpk,thd_1_percent_drive_vpk";
  bool capsules = false;
  for (const design_input& d : in) capsules = capsules || d.st.has_capsule();
  if (capsules) out << ",max_spl_half_percent_db,max_spl_1_percent_db";
  out << '\n';
  out.precision(10);
  for (std::size_t i = 0; i < r.designs.size(); ++i) {
    const model::design_figures& d = r.designs[i];
    // A chain has no one VD and ID: those cells stay empty (its stages' are in --json).
    out << i + 1 << ',' << quoted(label_of(in[i])) << ',' << quoted(in[i].st.name) << ',';
    if (d.stages_at.empty()) out << d.at.vd_v << ',' << d.at.id_a;
    else out << ',';
    out << ','
        << d.gain_midband_db << ',' << d.clean_swing_vpk << ',' << d.point.drive_vpk << ',' << d.point.output_vpk << ','
        << d.point.gain_db << ',' << d.point.thd_percent;
    for (int h = 2; h <= r.harmonics; ++h) {
      const double v = d.point.harmonics_dbc[static_cast<std::size_t>(h - 2)];
      out << ',';
      if (std::isfinite(v) && !below_numerical_floor(v)) out << v;  // empty: no figure, or below the floor
    }
    out << ',';
    if (std::isfinite(d.point.even_odd_ratio)) out << d.point.even_odd_ratio;
    out << ',';
    if (d.thd_1_percent.found) out << d.thd_1_percent.point.output_vpk;
    out << ',';
    if (d.thd_1_percent.found) out << d.thd_1_percent.drive_vpk;
    if (capsules) {
      out << ',';
      if (d.thd_half_percent)
        if (const std::optional<double> l = max_spl(in[i].st, *d.thd_half_percent)) out << *l;
      out << ',';
      if (const std::optional<double> l = max_spl(in[i].st, d.thd_1_percent)) out << *l;
    }
    out << '\n';
  }
}

void write_plot(const std::vector<design_input>& in, const model::compare_result& r, const std::string& path,
                base::output_set& outputs) {
  bar_chart b;
  b.title = "Harmonic profile at " + format_si(r.frequency_hz, "Hz") + ", " +
            (r.mode == model::compare_mode::at_output ? dbu(r.level_vpk) + " at the load"
             : r.drive_db_spl                         ? fixed(*r.drive_db_spl, 1) + " dB SPL at the capsule"
                                                      : format_si(r.level_vpk, "Vpk") + " drive");
  b.x_title = "harmonic";
  b.y_title = "level re fundamental (dBc)";
  b.mark_below = model::numerical_floor_dbc;  // a mark, not a bar, below the numerical floor
  b.mark_label = floor_mark;
  for (int h = 2; h <= r.harmonics; ++h) b.categories.push_back("H" + std::to_string(h));
  for (std::size_t i = 0; i < r.designs.size(); ++i) {
    const std::string stem = std::filesystem::path(in[i].path).stem().string();
    std::string g = std::to_string(i + 1) + ": " + stem;
    for (const std::string& s : in[i].own) g += ", " + s;
    b.groups.push_back(g);
    std::vector<double> v;
    for (int h = 2; h <= r.harmonics; ++h) v.push_back(r.designs[i].point.harmonics_dbc[static_cast<std::size_t>(h - 2)]);
    b.values.push_back(v);
  }
  add_svg_output(outputs, path, render_svg(b));
}

CLI::App* setup(CLI::App& app, compare_options& opt) {
  CLI::App* sub = app.add_subcommand("compare", "Candidate designs side by side: bias, gain, headroom and harmonic profile");
  sub->add_option("FILES", opt.paths, "Two or more stage files (TOML), one column each")->required();
  sub->add_option("--set", opt.overrides,
                  "Override a value in every design, KEY=VALUE, or in design N only, N:KEY=VALUE (repeatable)")
      ->type_name("[N:]KEY=VALUE")
      ->expected(1)
      ->allow_extra_args(false)
      ->multi_option_policy(CLI::MultiOptionPolicy::TakeAll);
  sub->add_option("--freq", opt.freq, "Test-tone frequency (snapped so the record holds whole cycles)")->capture_default_str();
  sub->add_option("--at-output", opt.at_output,
                  "Drive each design so its fundamental at the load is this level (the default, at -10dBu)")
      ->type_name("LEVEL");
  sub->add_option("--at-drive", opt.at_drive,
                  "Drive every design with this generator level instead; with capsule sources a sound pressure "
                  "level such as 94dBSPL (each capsule's own voltage)")
      ->type_name("LEVEL");
  sub->add_option("--harmonics", opt.harmonics, "Highest harmonic shown (H2..HN); THD counts at least H2..H10")
      ->capture_default_str();
  sub->add_option("--oversample", opt.oversample,
                 "Simulation rate as a multiple of 48 kHz, 1 to 64 (default: chosen by the test frequency as in sweep)")
      ->each([&opt](const std::string&) { opt.oversample_given = true; });
  sub->add_flag("--json", opt.json, "Machine-readable output");
  sub->add_flag("--csv", opt.csv, "One row per design as CSV");
  sub->add_option("--plot", opt.plot, "Write the harmonic profiles as grouped bars (SVG)")->type_name("FILE.svg");
  sub->add_option("--threads", opt.threads, "Threads, 0 (one per core) to 256; results do not depend on it")->capture_default_str();
  sub->footer(
      "Examples:\n"
      "  pinchoff compare presets/bass-booster-9v.toml presets/clean-preamp-18v.toml presets/phantom-mic-follower.toml\n"
      "      the three at -10 dBu out, 1 kHz: which one colours the tone, and how\n"
      "  pinchoff compare presets/bass-booster-9v.toml presets/clean-preamp-18v.toml --at-drive 100mVpk\n"
      "      the same input level into both: the louder stage also distorts more\n"
      "  pinchoff compare presets/bass-booster-9v.toml presets/bass-booster-9v.toml --set 2:source.bypass_cap=0\n"
      "      a variant of one design: the bypass capacitor removed (less gain, less H2)\n"
      "  pinchoff compare presets/clean-preamp-18v.toml presets/clean-preamp-18v.toml --set 2:supply.volts=12 \\\n"
      "      --at-output 0dBu --freq 100 --plot profile.svg\n"
      "  pinchoff compare presets/phantom-mic-follower.toml presets/phantom-mic-follower.toml \\\n"
      "      --set 2:source.resistor=4.7k --at-drive 120dBSPL\n"
      "      two microphone converters at one sound pressure; capsule designs also get their\n"
      "      maximum SPL at 0.5 % and 1 % THD\n"
      "Why equal output by default: at one drive a stage with more gain swings further and so\n"
      "distorts more; comparing at the same level at the load (--at-output, -10 dBu unless told:\n"
      "245 mV rms, near a line input's nominal level and inside the clean range of most JFET\n"
      "stages) shows the character of each circuit rather than its gain. Per design, the drive is\n"
      "found to within 0.001 dB of the target; a design that cannot reach it below 20 V peak drive\n"
      "and 50 % THD is an error that says why. --at-drive compares at one input level instead.\n"
      "Each figure is the periodic steady state at the test frequency, as `sweep` computes it.");
  return sub;
}

void run(const compare_options& opt, std::ostream& out, std::ostream& err, base::output_set& outputs) {
  if (opt.json && opt.csv) throw input_error("--json and --csv: choose one");
  if (!opt.at_output.empty() && !opt.at_drive.empty()) throw input_error("--at-output and --at-drive: choose one");
  model::compare_settings s;
  s.frequency_hz = option_frequency_hz(opt.freq, "--freq");
  if (!opt.at_drive.empty()) {
    s.mode = model::compare_mode::at_drive;
    // A sound pressure level becomes each design's own capsule voltage in the model.
    try {
      s.drive_db_spl = base::parse_spl_db(opt.at_drive);
    } catch (const input_error& e) {
      throw input_error(std::string("--at-drive: ") + e.what());
    }
    if (!s.drive_db_spl) s.level_vpk = option_level_vpk(opt.at_drive, "--at-drive");
  } else {
    s.mode = model::compare_mode::at_output;
    s.level_vpk = option_level_vpk(opt.at_output.empty() ? "-10dBu" : opt.at_output, "--at-output");
  }
  s.harmonics = opt.harmonics;
  s.oversample = opt.oversample;
  s.automatic_oversample = !opt.oversample_given;
  s.threads = opt.threads;
  const model::compare_plan plan = model::plan_compare(s);  // the settings' errors before any file is read
  const std::vector<design_input> in = load_designs(opt);
  std::vector<model::stage> stages;
  std::vector<std::string> rest;  // the rest points' cautions, design by design
  for (std::size_t i = 0; i < in.size(); ++i) {
    stages.push_back(in[i].st);
    const std::vector<std::string> w =
        rest_point_warnings(in[i].st, "compare", err, "design " + std::to_string(i + 1) + " (" + label_of(in[i]) + ")");
    rest.insert(rest.end(), w.begin(), w.end());
  }
  model::compare_result r = model::compare_designs(stages, plan);

  std::string unreached;
  for (std::size_t i = 0; i < r.designs.size(); ++i)
    if (!r.designs[i].reached)
      unreached += "\n  design " + std::to_string(i + 1) + " (" + label_of(in[i]) + "): " + r.designs[i].unreached_reason;
  if (!unreached.empty())
    throw input_error("cannot compare at " + dbu(s.level_vpk) + " at the load:" + unreached +
                      "\n  compare at a lower --at-output, or at one input level with --at-drive");
  for (const std::string& w : r.warnings) err << "pinchoff compare: warning: " << w << '\n';
  r.warnings.insert(r.warnings.begin(), rest.begin(), rest.end());

  if (!opt.plot.empty()) write_plot(in, r, opt.plot, outputs);
  if (opt.json) return print_json(in, r, out);
  if (opt.csv) return write_csv(in, r, out);
  print_text(in, r, s.automatic_oversample, out);
  if (!opt.plot.empty()) out << "\n  plot written to " << opt.plot << '\n';
}

}  // namespace

void register_compare(CLI::App& app, std::vector<command>& commands, const data_files& data) {
  auto opt = std::make_shared<compare_options>();
  opt->devices = data.devices;
  CLI::App* sub = setup(app, *opt);
  commands.push_back({sub, [opt](std::ostream& out, std::ostream& err, base::output_set& o) { run(*opt, out, err, o); },
                      {{"drive_level_vpk", "--at-drive"},
                       {"output_level_vpk", "--at-output"},
                       {"harmonics", "--harmonics"},
                       {"oversampling", "--oversample"},
                       {"threads", "--threads"},
                       {"frequency_hz", "--freq"}},
                      [opt] {
                        command_files f;
                        for (const std::string& p : opt->paths) add_stage_inputs(f, p, opt->devices, "a design file");
                        if (!opt->plot.empty()) f.outputs.push_back({"--plot", opt->plot});
                        return f;
                      }});
}

}  // namespace pinchoff::cli
