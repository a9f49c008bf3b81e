// pinchoff spread: how a design spreads over a batch of real parts.
#include <algorithm>
#include <cmath>
#include <filesystem>
#include <map>
#include <memory>
#include <optional>
#include <span>
#include <sstream>

#include <CLI/CLI.hpp>
#include <nlohmann/json.hpp>

#include "cli/app.hpp"
#include "cli/common.hpp"
#include "cli/option_text.hpp"
#include "cli/plot.hpp"
#include "cli/text_table.hpp"
#include "base/error.hpp"
#include "base/units.hpp"
#include "model/analysis/noise.hpp"
#include "model/analysis/spread.hpp"
#include "model/circuit/network.hpp"
#include "model/analysis/sweep.hpp"

namespace pinchoff::cli {
namespace {

using base::format_number;
using base::format_si;
using align = text_table::align;

struct spread_options {
  stage_input input;
  spread_input batch;
  std::vector<std::string> conditions;
  std::string drive, freq{"1k"};
  bool noise{false};
  bool json{false}, csv{false};
  std::string plot;
};

// The quantities --noise measures (model::spread_quantities), and the band they are taken
// over: noise's default, 20 Hz to 20 kHz.
constexpr const char* noise_quantities[] = {"noise", "noise_a", "ein", "ein_a"};
bool is_noise_quantity(std::string_view q) {
  return std::find(std::begin(noise_quantities), std::end(noise_quantities), q) != std::end(noise_quantities);
}

std::string value_text(const model::quantity_def& q, double v) {
  if (std::string_view(q.unit) == "dB") return format_number(v, 3) + " dB";
  if (std::string_view(q.unit) == "%") return format_number(v, 3) + " %";
  if (std::string_view(q.unit) == "dBu") return format_number(v, 4) + " dBu";
  return format_si(v, q.unit, 4);
}

// The definition behind a run's quantity name ("vd", "stage2.vd").
const model::quantity_def& def_of(const std::string& name) {
  const model::named_quantity n = model::split_quantity_name(name);
  if (n.def == nullptr) throw internal_error("unknown quantity " + name);
  return *n.def;
}

// The drawn parts of a run: one JFET, or every stage's of a chain, and the supply.
std::string part_text(const model::stage& st, const model::spread_run& r, const model::spread_settings& ss) {
  // A measured part is named; its IDSS is the model's (at VDS = 0).
  auto named = [&](int bag_index) {
    return bag_index >= 0 ? "part " + ss.parts[static_cast<std::size_t>(bag_index)].name + ": " : std::string();
  };
  if (!st.is_chain())
    return named(r.draw.bag_index) + "IDSS " + format_si(r.draw.idss_a, "A") + ", VP " + format_si(r.draw.vp_v, "V") +
           ", supply " + format_si(r.draw.supply_v, "V");
  std::string text = "stage1 " + named(r.draw.bag_index) + "IDSS " + format_si(r.draw.idss_a, "A") + ", VP " +
                     format_si(r.draw.vp_v, "V");
  for (std::size_t k = 0; k < r.draw.later.size(); ++k)
    text += "; stage" + std::to_string(k + 2) + " " + named(r.draw.later[k].bag_index) + "IDSS " +
            format_si(r.draw.later[k].idss_a, "A") + ", VP " + format_si(r.draw.later[k].vp_v, "V");
  return text + "; supply " + format_si(r.draw.supply_v, "V");
}

// The histogram files: BASE-NAME.EXT for each quantity ("stage2.vd" gives BASE-stage2-vd.EXT).
std::filesystem::path histogram_path(const std::string& base, std::string name) {
  std::replace(name.begin(), name.end(), '.', '-');
  const std::filesystem::path p(base);
  return p.parent_path() / (p.stem().string() + "-" + name + p.extension().string());
}

// The required quantities (as resolve_requirements names them), else every stage's vd and
// id; with --noise, the A-weighted noise and EIN as well.
std::vector<std::string> histogram_names(const model::stage& st, const std::vector<model::requirement>& reqs, bool noise) {
  std::vector<std::string> names;
  for (const auto& r : reqs) names.push_back(r.quantity);
  if (names.empty())
    for (const char* q : {"vd", "id"})
      for (int k = 0; k < st.stage_count(); ++k) names.push_back(model::stage_key(st, k, q));
  if (noise)
    for (const char* q : {"noise_a", "ein_a"})
      if (std::find(names.begin(), names.end(), q) == names.end()) names.push_back(q);
  return names;
}

void write_histograms(const model::spread_result& res, const std::vector<std::string>& names,
                      const std::vector<model::requirement>& reqs, const std::string& base, const std::string& title,
                      std::ostream& out, base::output_set& outputs) {
  const std::filesystem::path p(base);
  for (const std::string& name : names) {
    const model::quantity_def& q = def_of(name);
    std::vector<double> v;
    for (const auto& r : res.runs)
      if (auto it = r.values.find(name); it != r.values.end() && std::isfinite(it->second)) v.push_back(it->second);
    if (v.empty()) continue;
    double lo = *std::min_element(v.begin(), v.end()), hi = *std::max_element(v.begin(), v.end());
    // The --require limits of this quantity: the bins widen to take a limit within a span
    // of the batch's own, so the batch shows against it; a farther one is marked at the edge.
    std::vector<std::pair<double, std::string>> limits;
    auto value_text = [&q](double x) {
      return std::string_view(q.unit).empty() ? format_number(x, 3) : format_si(x, q.unit);
    };
    for (const model::requirement& r : reqs)
      if (r.quantity == name) {
        if (std::isfinite(r.lo)) limits.push_back({r.lo, "min " + value_text(r.lo)});
        if (std::isfinite(r.hi)) limits.push_back({r.hi, "max " + value_text(r.hi)});
      }
    const double span = std::max(hi - lo, 1e-12 * std::max(std::fabs(lo), std::fabs(hi)));
    for (const auto& [x, label] : limits)
      if (x >= lo - span && x <= hi + span) lo = std::min(lo, x), hi = std::max(hi, x);
    constexpr int bins = 20;
    const double w = hi > lo ? (hi - lo) / bins : 1.0;
    bar_chart c;
    c.title = title + ": " + name + " over " + std::to_string(v.size()) + " parts";
    c.x_title = std::string(name) + " (" + q.unit + "), bin centres";
    c.y_title = "parts";
    c.groups = {"parts"};
    c.values.assign(1, std::vector<double>(bins, 0.0));
    c.floor = 0.0;
    for (int b = 0; b < bins; ++b) {
      const double centre = lo + (b + 0.5) * w;
      // Enough digits that neighbouring bins read apart (-114.3, -114.1, ... for an EIN).
      const bool small = std::string_view(q.unit) == "A" || is_noise_quantity(q.name);
      const double top = std::max(std::fabs(lo), std::fabs(hi));
      const int digits = std::clamp(static_cast<int>(std::ceil(std::log10(top / w))) + 1, 3, 6);
      c.categories.push_back(small && std::string_view(q.unit) != "dBu" ? format_si(centre, "", digits)
                                                                      : format_number(centre, digits));
    }
    // Labels longer than a bin is wide (about 6 characters) are kept on every other bin only.
    if (std::any_of(c.categories.begin(), c.categories.end(), [](const std::string& l) { return l.size() > 6; }))
      for (std::size_t b = 1; b < c.categories.size(); b += 2) c.categories[b].clear();
    for (double x : v) c.values[0][static_cast<std::size_t>(std::min(bins - 1, static_cast<int>((x - lo) / w)))] += 1.0;
    for (const auto& [x, label] : limits) {
      const double at = (x - lo) / w;
      c.markers.push_back({at, "required " + label + (at < 0 ? " (off to the left)" : at > bins ? " (off to the right)" : "")});
    }
    const std::filesystem::path file = histogram_path(base, name);
    add_svg_output(outputs, file, render_svg(c));
    out << "  histogram of " << name << " written to " << file.string() << '\n';
  }
}


// What run computed, for the formatters.
struct spread_report {
  model::stage st;
  model::spread_settings settings;
  std::vector<model::requirement> reqs;
  model::spread_result res;
};

// A quantity's column or key: "vd_v", in a chain "stage2.vd_v".
std::string json_key_of(const std::string& name) {
  const model::named_quantity n = model::split_quantity_name(name);
  return (n.stage >= 0 ? "stage" + std::to_string(n.stage + 1) + "." : std::string()) + n.def->json_key;
}

// A CSV field: quoted (quotes doubled) when it holds a comma, a quote or a line break.
std::string csv_field(const std::string& text) {
  if (text.find_first_of(",\"\r\n") == std::string::npos) return text;
  std::string q = "\"";
  for (char c : text) q += c == '"' ? std::string("\"\"") : std::string(1, c);
  return q + "\"";
}

void write_csv(const spread_report& rep, std::ostream& out) {
  const model::spread_result& res = rep.res;
  const std::vector<std::string> names = model::spread_quantity_names(rep.st);
  // With --parts every stage's part is named, before its IDSS and VP.
  const bool named = !rep.settings.parts.empty();
  auto part_name = [&](int bag_index) {
    return bag_index >= 0 ? csv_field(rep.settings.parts[static_cast<std::size_t>(bag_index)].name) : std::string();
  };
  if (rep.st.is_chain()) {
    out << "run";
    for (int k = 0; k < rep.st.stage_count(); ++k)
      out << (named ? "," + model::stage_key(rep.st, k, "part") : std::string()) << ','
          << model::stage_key(rep.st, k, "idss_a") << ',' << model::stage_key(rep.st, k, "vp_v");
    out << ",supply_v,solved";
  } else {
    out << (named ? "run,part,idss_a,vp_v,supply_v,solved" : "run,idss_a,vp_v,supply_v,solved");
  }
  for (const std::string& name : names)
    if (res.stats.count(name)) out << ',' << json_key_of(name);
  out << ",meets\n";
  out.precision(10);
  for (const auto& r : res.runs) {
    out << r.index;
    if (named) out << ',' << part_name(r.draw.bag_index);
    out << ',' << r.draw.idss_a << ',' << r.draw.vp_v;
    for (const auto& p : r.draw.later) {
      if (named) out << ',' << part_name(p.bag_index);
      out << ',' << p.idss_a << ',' << p.vp_v;
    }
    out << ',' << r.draw.supply_v << ',' << (r.solved ? 1 : 0);
    for (const std::string& name : names)
      if (res.stats.count(name)) {
        out << ',';
        if (auto it = r.values.find(name); it != r.values.end()) out << it->second;
      }
    out << ',' << (r.meets ? 1 : 0) << '\n';
  }
}

// The runs at either extreme of each required quantity (else of vd).
struct extreme {
  std::string quantity, side;
  const model::spread_run* run;
};

std::vector<extreme> extremes(const spread_report& rep) {
  std::vector<std::string> worst_of;
  for (const auto& r : rep.reqs) worst_of.push_back(r.quantity);
  if (worst_of.empty())
    for (int k = 0; k < rep.st.stage_count(); ++k) worst_of.push_back(model::stage_key(rep.st, k, "vd"));
  std::vector<extreme> worsts;
  for (const std::string& name : worst_of) {
    const model::spread_run *lo = nullptr, *hi = nullptr;
    for (const auto& r : rep.res.runs) {
      auto it = r.values.find(name);
      if (it == r.values.end()) continue;
      if (!lo || it->second < lo->values.at(name)) lo = &r;
      if (!hi || it->second > hi->values.at(name)) hi = &r;
    }
    if (lo) worsts.push_back({name, "lowest", lo});
    if (hi) worsts.push_back({name, "highest", hi});
  }
  return worsts;
}

void print_json(const spread_report& rep, std::ostream& out) {
  const model::spread_result& res = rep.res;
  nlohmann::json j;
  j["runs"] = rep.settings.runs;
  j["yield"] = res.yield;
  j["unsolved"] = res.unsolved;
  j["seed"] = rep.settings.seed;
  // A single stage: every quantity in `percentiles`. A chain: the chain's (gain, swing,
  // thd) there, and each stage's own in `stages[k].percentiles`.
  auto stats_json = [](const model::quantity_stats& s) {
    return nlohmann::json{{"p5", s.p5}, {"p50", s.p50}, {"p95", s.p95}, {"min", s.min}, {"max", s.max}};
  };
  nlohmann::json pc;
  nlohmann::json stages = nlohmann::json::array();
  for (int k = 0; rep.st.is_chain() && k < rep.st.stage_count(); ++k)
    stages.push_back({{"stage", k + 1}, {"name", rep.st.part(k).label}, {"percentiles", nlohmann::json::object()}});
  for (const auto& [name, s] : res.stats) {
    const model::named_quantity n = model::split_quantity_name(name);
    if (n.stage >= 0) stages[static_cast<std::size_t>(n.stage)]["percentiles"][n.def->json_key] = stats_json(s);
    else pc[n.def->json_key] = stats_json(s);
  }
  j["percentiles"] = pc;
  if (rep.st.is_chain()) j["stages"] = stages;
  nlohmann::json rq = nlohmann::json::array();
  for (const auto& r : rep.reqs)
    rq.push_back({{"quantity", r.quantity}, {"lo", number_or_null(r.lo)}, {"hi", number_or_null(r.hi)}});
  j["requirements"] = rq;
  nlohmann::json ws = nlohmann::json::array();
  for (const auto& w : extremes(rep)) {
    nlohmann::json e = {{"quantity", w.quantity}, {"side", w.side}, {"run", w.run->index}};
    if (rep.st.is_chain()) {
      // Every stage's part, in stage order.
      nlohmann::json parts = nlohmann::json::array({{{"idss_a", w.run->draw.idss_a}, {"vp_v", w.run->draw.vp_v}}});
      for (const auto& p : w.run->draw.later) parts.push_back({{"idss_a", p.idss_a}, {"vp_v", p.vp_v}});
      e["parts"] = parts;
    } else {
      e["idss_a"] = w.run->draw.idss_a;
      e["vp_v"] = w.run->draw.vp_v;
    }
    // With --parts: the measured part (the first stage's in a chain).
    if (w.run->draw.bag_index >= 0) e["part"] = rep.settings.parts[static_cast<std::size_t>(w.run->draw.bag_index)].name;
    e["supply_v"] = w.run->draw.supply_v;
    e["value"] = w.run->values.at(w.quantity);
    ws.push_back(e);
  }
  j["worst"] = ws;
  out << json_text(j) << '\n';
}

void print_text(const spread_report& rep, const std::string& plots, std::ostream& out) {
  const model::spread_result& res = rep.res;
  out << rep.st.name << "\n  " << describe_spread(rep.settings, rep.st) << "\n\n";
  text_table t({align::left, align::right, align::right, align::right, align::right, align::right});
  t.add({"", "p5", "median", "p95", "min", "max"});
  for (const std::string& name : model::spread_quantity_names(rep.st)) {
    if (def_of(name).name == std::string_view("vgs")) continue;  // the table leaves vgs to the JSON and CSV
    auto it = res.stats.find(name);
    if (it == res.stats.end()) continue;
    const auto& q = def_of(name);
    const auto& s = it->second;
    t.add({name, value_text(q, s.p5), value_text(q, s.p50), value_text(q, s.p95), value_text(q, s.min), value_text(q, s.max)});
  }
  t.write(out);
  std::string cond = rep.st.is_chain() ? "every stage biased in saturation" : "biased in saturation";
  for (const auto& r : rep.reqs) {
    const auto& q = def_of(r.quantity);
    cond += ", " + r.quantity + " " + (std::isfinite(r.lo) ? value_text(q, r.lo) : std::string("")) + ".." +
            (std::isfinite(r.hi) ? value_text(q, r.hi) : std::string(""));
  }
  out << "\n  yield " << format_number(100.0 * res.yield, 3) << " % (" << cond << ")\n";
  if (res.unsolved) out << "  " << res.unsolved << " runs had no operating point\n";
  out << "\nExtremes\n";
  text_table w({align::left, align::left, align::right, align::left});
  for (const auto& x : extremes(rep))
    w.add({x.side + " " + x.quantity, "run " + std::to_string(x.run->index),
           value_text(def_of(x.quantity), x.run->values.at(x.quantity)), part_text(rep.st, *x.run, rep.settings)});
  w.write(out);
  if (!plots.empty()) out << '\n' << plots;
}

CLI::App* setup(CLI::App& app, spread_options& opt, const data_files& data) {
  CLI::App* sub = app.add_subcommand("spread", "Monte Carlo over a batch of parts: bias, gain and headroom spread, yield");
  add_stage_input(*sub, opt.input, data);
  add_spread_options(*sub, opt.batch);
  sub->add_option("--require", opt.conditions,
                  "A condition a good build meets, QUANTITY=LO..HI (repeatable): id, vd, vs, vds, vgs, gain (dB), swing (V peak), "
                  "thd (%, with --drive), noise, noise_a (V rms), ein, ein_a (dBu; with --noise); in a chain a stage's own names its stage, stage2.vd=3.5..5.5")
      ->type_name("Q=LO..HI");
  sub->add_option("--drive", opt.drive, "Also simulate each part at this drive and report its THD (slower)")->type_name("LEVEL");
  sub->add_option("--freq", opt.freq, "Test-tone frequency for --drive")->capture_default_str();
  sub->add_flag("--noise", opt.noise,
                "Also report each part's noise over 20 Hz to 20 kHz: at the load unweighted (noise) and A-weighted "
                "(noise_a), and the EIN (ein, ein_a, dBu), as `noise` computes them");
  sub->add_flag("--json", opt.json, "Machine-readable summary");
  sub->add_flag("--csv", opt.csv, "Every run as CSV");
  sub->add_option("--plot", opt.plot,
                  "Histograms as SVG: FILE.svg becomes FILE-vd.svg, FILE-id.svg, ... (the required quantities, else vd and id)")
      ->type_name("FILE.svg");
  sub->footer(
      "Examples:\n"
      "  pinchoff spread presets/bass-booster-9v.toml --idss 2m..8m --vp -0.8..-3 --require vd=3.5..6\n"
      "      how many parts of a wide batch bias acceptably, and which ones do not\n"
      "  pinchoff spread presets/bass-booster-9v.toml --supply 7..9.6 --tolerance 5% --runs 5000\n"
      "      the same part as the battery drains, with 5 % resistors\n"
      "  pinchoff spread presets/clean-preamp-18v.toml --idss 4m..12m --vp -1.5..-4 --plot batch.svg\n"
      "  pinchoff spread presets/bass-booster-9v.toml --class general-purpose --drive 300mVpk --require thd=..5\n"
      "      how the distortion at a hard pluck spreads over a batch (thd in %)\n"
      "  pinchoff spread presets/bass-booster-9v.toml --parts parts.csv --require vd=3.5..6   (the bag on the bench)\n"
      "  pinchoff spread presets/phantom-mic-follower.toml --class low-cutoff --noise --require ein_a=..-120\n"
      "      how the hiss spreads over a batch, and how many parts keep the A-weighted EIN below -120 dBu\n"
      "IDSS and |VP| are drawn with the given correlation (real batches: parts with a high IDSS\n"
      "also pinch off at a larger voltage). The yield counts runs biased in saturation that meet\n"
      "every --require. The same seed gives the same runs on any number of threads.");
  return sub;
}

void run(const spread_options& opt, std::ostream& out, std::ostream& err, base::output_set& outputs) {
  if (opt.json && opt.csv) throw input_error("--json and --csv: choose one");
  spread_report rep;
  for (const std::string& r : opt.conditions) rep.reqs.push_back(parse_requirement(r));
  rep.st = load_stage(opt.input);
  rep.reqs = model::resolve_requirements(rep.st, rep.reqs);
  rep.settings = spread_settings_from(opt.batch, rep.st, opt.input);
  const model::spread_settings& settings = rep.settings;
  auto varies = [](const std::optional<base::value_range>& r) { return r && r->lo != r->hi; };
  if (!varies(settings.idss_a) && !varies(settings.vp_v) && !varies(settings.supply_v) && settings.resistor_tolerance == 0.0 &&
      settings.parts.size() < 2)
    err << "pinchoff spread: note: nothing varies from run to run (one IDSS, one VP, exact resistors, "
           "one supply voltage); give --idss and --vp ranges or a --class, --tolerance or --supply\n";
  model::run_extra thd_extra, noise_extra;
  if (!opt.drive.empty()) {
    model::sweep_settings sw;
    sw.drives_vpk = {option_level_vpk(opt.drive, "--drive", &rep.st)};
    sw.frequency_hz = option_frequency_hz(opt.freq, "--freq");
    sw.threads = 1;
    sw.automatic_oversample = true;  // as sweep without --oversample: enough for the frequency
    const model::sweep_plan plan = model::plan_sweep(sw);
    // Each run holds one record at a time: as many runs at once as fit the sweeps' memory.
    rep.settings.threads = model::concurrent_points(rep.settings.threads, plan.samples_per_record());
    thd_extra = [plan](const model::stage& drawn, std::map<std::string, double>& values) {
      values["thd"] = model::run_sweep(drawn, plan).points[0].thd_percent;
    };
  }
  if (opt.noise) {
    // As `bias` takes it: 20 Hz to 20 kHz, 50 points a decade, without the density sweep
    // `noise` prints.
    const model::noise_settings ns{.points = 2, .band_points_per_decade = 50};
    noise_extra = [ns](const model::stage& drawn, std::map<std::string, double>& values) {
      const model::network net = model::build_network(drawn);
      const model::noise_result r = model::analyse_noise(net, model::solve_operating_point(net), ns);
      values["noise"] = r.output_v();
      values["noise_a"] = r.output_a_v();
      values["ein"] = model::dbu_of_rms(r.input_v());
      values["ein_a"] = model::dbu_of_rms(r.input_a_v());
    };
  }
  for (const auto& r : rep.reqs) {
    if (r.quantity == "thd" && !thd_extra) throw input_error("--require thd=... needs --drive (the level to measure THD at)");
    if (is_noise_quantity(r.quantity) && !noise_extra)
      throw input_error("--require " + r.quantity + "=... needs --noise (each part's noise is computed only when asked)");
  }
  model::run_extra extra;
  if (thd_extra || noise_extra)
    extra = [thd_extra, noise_extra](const model::stage& drawn, std::map<std::string, double>& values) {
      if (thd_extra) thd_extra(drawn, values);
      if (noise_extra) noise_extra(drawn, values);
    };
  rep.res = model::run_spread(rep.st, settings, rep.reqs, extra);

  std::ostringstream plots;
  if (!opt.plot.empty()) write_histograms(rep.res, histogram_names(rep.st, rep.reqs, opt.noise), rep.reqs, opt.plot, rep.st.name, plots, outputs);
  if (opt.csv) return write_csv(rep, out);
  if (opt.json) return print_json(rep, out);
  print_text(rep, plots.str(), out);
}

}  // namespace

void register_spread(CLI::App& app, std::vector<command>& commands, const data_files& data) {
  auto opt = std::make_shared<spread_options>();
  CLI::App* sub = setup(app, *opt, data);
  // The THD of --drive is a one-level sweep: its settings' fields map to spread's options.
  command c{sub, [opt](std::ostream& out, std::ostream& err, base::output_set& o) { run(*opt, out, err, o); },
            {{"drives_vpk", "--drive"}, {"frequency_hz", "--freq"}, {"requirements", "--require"}},
            [opt] {
              command_files f;
              add_stage_inputs(f, opt->input.path, opt->input.devices);
              if (!opt->batch.parts.empty()) f.inputs.push_back({"--parts", opt->batch.parts});
              if (opt->plot.empty()) return f;
              // The histograms' names depend on the stages the file holds.
              std::vector<model::requirement> reqs;
              for (const std::string& r : opt->conditions) reqs.push_back(parse_requirement(r));
              const model::stage st = load_stage(opt->input);
              for (const std::string& name : histogram_names(st, model::resolve_requirements(st, reqs), opt->noise))
                f.outputs.push_back({"--plot", histogram_path(opt->plot, name)});
              return f;
            }};
  map_spread_fields(c.options_of_fields);
  commands.push_back(std::move(c));
}

}  // namespace pinchoff::cli
