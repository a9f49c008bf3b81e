// pinchoff tune: the resistor value that puts the operating point on a target.
#include <algorithm>
#include <cmath>
#include <memory>
#include <string>
#include <vector>

#include <CLI/CLI.hpp>
#include <nlohmann/json.hpp>

#include "cli/app.hpp"
#include "cli/common.hpp"
#include "cli/option_text.hpp"
#include "cli/text_table.hpp"
#include "base/eseries.hpp"
#include "base/units.hpp"
#include "model/analysis/distortion_headroom.hpp"
#include "model/analysis/spread.hpp"
#include "model/analysis/tune.hpp"

namespace pinchoff::cli {
namespace {

using base::format_si;
using align = text_table::align;

struct tune_options {
  stage_input input;
  std::vector<std::string> target_texts;  ///< paired in order with `adjusts`
  std::vector<std::string> adjusts;       ///< empty: source.resistor for the one target
  std::string series{"E24"};
  bool json{false};
  bool over_spread{false};
  bool thd_levels{false};
  spread_input batch;
};

// --thd-levels: each row's output at 1 %, 3 % and 10 % THD from the engine (the exact value
// first, then the candidates in order), as bias --thd-levels gives them.
using row_levels = std::vector<model::distortion_headroom>;

row_levels levels_of_rows(const model::stage& st, const model::tune_result& r) {
  row_levels out;
  auto one = [&](const model::tune_point& p) {
    model::stage s = st;
    *model::resistor_field(s, r.adjust) = p.value_ohm;
    out.push_back(model::find_distortion_headroom(s, p.headroom));
  };
  one(r.exact);
  for (const model::tune_candidate& c : r.candidates) one(c.point);
  return out;
}

// Several targets: each pair's table (its resistor's rows, the others at their exact values)
// and each standard-value combination around the joint solution, with all its values in place.
struct joint_levels {
  std::vector<row_levels> tables;  ///< one per pair
  row_levels candidates;           ///< one per joint candidate
};

joint_levels levels_of_joint(const std::vector<model::stage>& tables_stages, const std::vector<model::tune_result>& results,
                             const model::stage& st, const std::vector<model::tune_pair>& pairs,
                             const std::vector<model::joint_candidate>& cands) {
  joint_levels out;
  for (std::size_t k = 0; k < results.size(); ++k) out.tables.push_back(levels_of_rows(tables_stages[k], results[k]));
  for (const model::joint_candidate& c : cands) {
    model::stage s = st;
    for (std::size_t m = 0; m + 1 < pairs.size(); ++m) *model::resistor_field(s, pairs[m].adjust) = c.ohm[m];
    const model::tune_point p = model::evaluate_with(s, pairs.back().adjust, c.ohm.back());
    *model::resistor_field(s, pairs.back().adjust) = c.ohm.back();
    out.candidates.push_back(model::find_distortion_headroom(s, p.headroom));
  }
  return out;
}

std::string level_cell(const model::distortion_headroom& d, std::size_t k) {
  const model::thd_crossing& c = d.levels[k];
  if (c.found) return format_si(c.output_vpk, "V");
  return d.lowest_drive_thd_percent >= c.thd_percent ? "passed" : "not reached";
}

nlohmann::json levels_json(const model::distortion_headroom& d) {
  nlohmann::json a = nlohmann::json::array();
  for (const model::thd_crossing& c : d.levels)
    a.push_back({{"thd_percent", c.thd_percent},
                 {"found", c.found},
                 {"output_vpk", c.found ? nlohmann::json(c.output_vpk) : nlohmann::json(nullptr)},
                 {"drive_vpk", c.found ? nlohmann::json(c.drive_vpk) : nlohmann::json(nullptr)},
                 {"passed_at_lowest_drive", !c.found && d.lowest_drive_thd_percent >= c.thd_percent}});
  return a;
}

nlohmann::json point_json(const model::tune_point& p) {
  nlohmann::json op = operating_point_json(p.at);
  return op;
}

void print_table(const model::tune_result& r, std::ostream& out, const row_levels& levels = {}) {
  std::vector<align> cols{align::left, align::right, align::right, align::right, align::right, align::right, align::right,
                          align::right, align::left};
  std::vector<std::string> head{"", r.adjust, "VD", "VS", "VDS", "ID", "gain", "swing", "region"};
  if (!levels.empty()) {
    cols.insert(cols.end(), 3, align::right);
    head.insert(head.end(), {"1 % THD", "3 % THD", "10 % THD"});
  }
  text_table t(cols);
  t.add(head);
  std::size_t at = 0;
  auto row = [&](const std::string& label, const model::tune_point& p) {
    std::vector<std::string> cells{label, format_si(p.value_ohm, "Ω", label == "exact" ? 4 : 3), format_si(p.at.vd_v, "V", 4),
                                   format_si(p.at.vs_v, "V", 4), format_si(p.at.vds_v, "V", 4), format_si(p.at.id_a, "A", 4),
                                   base::format_number(p.gain_db, 4) + " dB", format_si(p.headroom.symmetric_output_vpk, "V"),
                                   model::region_name(p.at.region)};
    if (at < levels.size())
      for (std::size_t k = 0; k < 3; ++k) cells.push_back(level_cell(levels[at], k));
    ++at;
    t.add(cells);
  };
  row("exact", r.exact);
  for (const model::tune_candidate& c : r.candidates) {
    const char* side = c.point.value_ohm < r.exact_ohm ? "below" : (c.point.value_ohm > r.exact_ohm ? "above" : "match");
    row(c.series + " " + side, c.point);
  }
  t.write(out);
}

void print_text(const model::stage& st, const model::tune_target& target, const model::tune_result& r, std::ostream& out,
                const row_levels& levels = {}) {
  out << st.name << "\n  target " << model::target_text(target) << ", adjusting " << r.adjust << "\n\n";
  print_table(r, out, levels);
  out << "\n  gain: mid-band, generator to load; swing: largest clean symmetric output swing (peak) at the load, mid-band\n";
  if (!levels.empty())
    out << "  1 % / 3 % / 10 % THD: the output (peak, at the load) where a 1 kHz sine reaches that THD in the engine,\n"
           "  as sweep finds it; the swing is the hard limit, and THD rises well before it\n";
}

nlohmann::json result_json(const model::tune_target& target, const model::tune_result& r, const row_levels& levels = {}) {
  nlohmann::json j;
  j["adjust"] = r.adjust;
  j["exact_ohm"] = r.exact_ohm;
  j["target"] = model::target_text(target);
  j["exact"] = {{"value_ohm", r.exact_ohm},
                {"operating_point", point_json(r.exact)},
                {"gain_db", r.exact.gain_db},
                {"symmetric_output_vpk", r.exact.headroom.symmetric_output_vpk}};
  if (!levels.empty()) j["exact"]["thd_levels"] = levels_json(levels[0]);
  nlohmann::json cands = nlohmann::json::array();
  for (std::size_t k = 0; k < r.candidates.size(); ++k) {
    const model::tune_candidate& c = r.candidates[k];
    cands.push_back({{"series", c.series},
                     {"value_ohm", c.point.value_ohm},
                     {"operating_point", point_json(c.point)},
                     {"gain_db", c.point.gain_db},
                     {"symmetric_output_vpk", c.point.headroom.symmetric_output_vpk}});
    if (k + 1 < levels.size()) cands.back()["thd_levels"] = levels_json(levels[k + 1]);
  }
  j["candidates"] = cands;
  return j;
}

void print_json(const model::tune_target& target, const model::tune_result& r, std::ostream& out, const row_levels& levels = {}) {
  out << json_text(result_json(target, r, levels)) << '\n';
}

// --over-spread: the trimmer that brings a batch to the target.
void print_trim_table(const model::trim_result& t, base::eseries series, std::ostream& out) {
  text_table tt({align::left, align::right});
  tt.add({"needed, smallest", format_si(t.r_min, "Ω", 4)});
  tt.add({"needed, 5 % of parts below", format_si(t.r_p5, "Ω", 4)});
  tt.add({"needed, 95 % of parts below", format_si(t.r_p95, "Ω", 4)});
  tt.add({"needed, largest", format_si(t.r_max, "Ω", 4)});
  tt.write(out);
  out << "\n  fit " << format_si(t.fixed_ohm, "Ω") << " (" << base::series_name(series) << ") in series with a "
      << format_si(t.trimmer_ohm, "Ω") << " trimmer: covers " << format_si(t.fixed_ohm, "Ω") << " to "
      << format_si(t.fixed_ohm + t.trimmer_ohm, "Ω") << ", " << base::format_number(100.0 * t.coverage, 3)
      << " % of the parts\n";
}

void print_trim_text(const model::stage& st, const model::tune_target& target, const model::spread_settings& ss,
                     const model::trim_result& t, base::eseries series, std::ostream& out) {
  out << st.name << "\n  target " << model::target_text(target) << ", adjusting " << t.adjust << " over a batch\n  "
      << describe_spread(ss, st) << "\n\n";
  print_trim_table(t, series, out);
  if (t.reachable < ss.runs) out << "  " << (ss.runs - t.reachable) << " of " << ss.runs << " parts cannot reach the target with any value\n";
}

nlohmann::json trim_json(const model::tune_target& target, const model::trim_result& t) {
  nlohmann::json j;
  j["adjust"] = t.adjust;
  j["target"] = model::target_text(target);
  j["reachable"] = t.reachable;
  j["range_ohm"] = {{"min", t.r_min}, {"p5", t.r_p5}, {"p95", t.r_p95}, {"max", t.r_max}};
  j["fixed_ohm"] = t.fixed_ohm;
  j["trimmer_ohm"] = t.trimmer_ohm;
  j["coverage"] = t.coverage;
  return j;
}

void print_trim_json(const model::tune_target& target, const model::spread_settings& ss, const model::trim_result& t,
                     std::ostream& out) {
  nlohmann::json j = trim_json(target, t);
  j["runs"] = ss.runs;
  out << json_text(j) << '\n';
}

// Several pairs over one batch: a trimmer per pair, every part's values solved together.
void print_trim_set_text(const model::stage& st, const std::vector<model::tune_pair>& pairs, const model::spread_settings& ss,
                         const model::trim_set& set, base::eseries series, std::ostream& out) {
  out << st.name << "\n  " << pairs.size() << " trimmers over a batch, each part's resistors solved together\n  "
      << describe_spread(ss, st) << "\n";
  for (std::size_t k = 0; k < pairs.size(); ++k) {
    out << "\n  target " << model::target_text(pairs[k].target) << ", adjusting " << set.trims[k].adjust << "\n\n";
    print_trim_table(set.trims[k], series, out);
  }
  out << "\n  every trimmer covers its part's value in " << base::format_number(100.0 * set.coverage_all, 3)
      << " % of the parts; the joint solves took at most " << set.most_rounds
      << (set.most_rounds == 1 ? " round" : " rounds") << " (each target within 1 ppm + 1 µV or 1 nA)\n";
  if (set.settled < ss.runs)
    out << "  " << (ss.runs - set.settled) << " of " << ss.runs << " parts cannot reach every target together"
        << (set.unsettled > 0 ? " (" + std::to_string(set.unsettled) + " did not settle in " +
                                    std::to_string(model::joint_max_rounds) + " rounds)"
                              : std::string())
        << '\n';
}

void print_trim_set_json(const std::vector<model::tune_pair>& pairs, const model::spread_settings& ss,
                         const model::trim_set& set, std::ostream& out) {
  nlohmann::json j;
  j["runs"] = ss.runs;
  j["reachable"] = set.settled;
  j["unsettled"] = set.unsettled;
  j["most_rounds"] = set.most_rounds;
  j["coverage_all"] = set.coverage_all;
  nlohmann::json ts = nlohmann::json::array();
  for (std::size_t k = 0; k < pairs.size(); ++k) ts.push_back(trim_json(pairs[k].target, set.trims[k]));
  j["trimmers"] = ts;
  out << json_text(j) << '\n';
}

CLI::App* setup(CLI::App& app, tune_options& opt, const data_files& data) {
  CLI::App* sub = app.add_subcommand("tune", "Find the resistor value that puts the bias on a target");
  add_stage_input(*sub, opt.input, data);
  sub->add_option("--target", opt.target_texts,
                  "What to hit: vd=VOLTS, id=AMPS, vds=VOLTS, vs=VOLTS, gain=DB (mid-band, generator to load), or center "
                  "(largest symmetric clean swing); "
                  "in a chain, of the adjusted stage or of the one named: stage2.vd=4.5. Repeatable, each with its "
                  "--adjust in the same order: the resistors are solved together")
      ->required()
      ->type_name("TARGET");
  std::string keys;
  for (const std::string& k : model::adjustable_resistor_keys(model::stage{})) keys += (keys.empty() ? "" : ", ") + k;
  sub->add_option("--adjust", opt.adjusts,
                  "The resistor to solve for (default source.resistor; drain.resistor for a gain alone): " + keys +
                      "; in a chain stageN. before a stage's own (stage2.drain.resistor), and stageN.rail.resistance. "
                      "Repeatable, one for each --target, or a list: --adjust drain.resistor,source.resistor")
      ->type_name("KEY");
  sub->add_option("--series", opt.series, "Standard values to offer: E12, E24 or E96")->capture_default_str();
  sub->add_flag("--json", opt.json, "Machine-readable output");
  sub->add_flag("--thd-levels", opt.thd_levels,
                "Also each row's output at 1 %, 3 % and 10 % THD (1 kHz) from the engine, beside the clean swing "
                "(with several targets, every table's rows and every standard-value combination; not with --over-spread; "
                "a sweep of 33 drives a row, about 0.1 s each on one stage)");
  sub->add_flag("--over-spread", opt.over_spread,
                "Size a fixed resistor plus trimmer that brings every part of a batch to the target (with the batch options)");
  add_spread_options(*sub, opt.batch);
  sub->footer(
      "Examples:\n"
      "  pinchoff tune presets/bass-booster-9v.toml --target vd=4.5\n"
      "      the source resistor that puts the drain at 4.5 V, and the nearest E24 values\n"
      "  pinchoff tune presets/clean-preamp-18v.toml --target center --adjust drain.resistor\n"
      "      the drain resistor that gives the largest symmetric clean swing\n"
      "  pinchoff tune presets/bass-booster-9v.toml --target id=1m --series E12\n"      "  pinchoff tune presets/clean-preamp-18v.toml --target gain=20dB --adjust source.unbypassed\n"
      "  pinchoff tune presets/clean-preamp-18v.toml --target gain=20dB --target vd=9 \\\n"
      "      --adjust drain.resistor,source.resistor\n"
      "      the drain and source resistors that give 20 dB with the drain at 9 V, and the\n"
      "      standard-value pairs around them\n"
      "  pinchoff tune presets/bass-booster-9v.toml --target vd=4.5 --over-spread --idss 2m..8m --vp -0.8..-3\n"
      "  pinchoff tune presets/bass-booster-9v.toml --target vd=4.5 --over-spread --parts parts.csv\n"
      "      the source resistance each part of a batch needs, and a fixed resistor plus trimmer\n"
      "      (standard values 100 Ω to 1 MΩ in 1-2-5 steps) that covers them\n"
      "  pinchoff tune presets/two-stage-boost-9v.toml --target stage2.vd=4.5 --adjust stage2.source.resistor\n"
      "      in a chain: the second stage's source resistor for its drain at 4.5 V\n"
      "  pinchoff tune presets/two-stage-boost-9v.toml --over-spread --class general-purpose \\\n"
      "      --adjust stage1.source.resistor --target stage1.vd=4.5 --adjust stage2.source.resistor --target stage2.vd=4.5\n"
      "      a trimmer per stage over a batch, both solved together for every part\n"
      "Values are searched from 1 Ω to 100 MΩ; a target no value reaches is reported with the\n"
      "range that can be reached. Voltages are to ground, in real signs (negative for a\n"
      "p-channel stage on a negative supply).");
  return sub;
}

// The --adjust/--target pairs, in the order given; a chain's stage key without its stage
// belongs to the target's stage.
std::vector<model::tune_pair> pairs_of(const tune_options& opt, const model::stage& st) {
  // --adjust drain.resistor,source.resistor is two --adjust; one gain target alone adjusts
  // the drain resistor unless told otherwise.
  std::vector<std::string> adjusts;
  for (const std::string& a : opt.adjusts)
    for (std::size_t from = 0;;) {
      const std::size_t comma = a.find(',', from);
      adjusts.push_back(a.substr(from, comma == std::string::npos ? std::string::npos : comma - from));
      if (comma == std::string::npos) break;
      from = comma + 1;
    }
  if (adjusts.empty())
    adjusts.push_back(opt.target_texts.size() == 1 && parse_target(opt.target_texts[0]).kind == model::target_kind::gain
                          ? "drain.resistor"
                          : "source.resistor");
  if (adjusts.size() != opt.target_texts.size())
    throw input_error("--adjust and --target come in pairs: " + std::to_string(opt.target_texts.size()) + " --target but " +
                      std::to_string(adjusts.size()) + " --adjust (give one --adjust for each --target, in the same order)");
  std::vector<model::tune_pair> pairs;
  for (std::size_t i = 0; i < adjusts.size(); ++i) {
    model::tune_pair p{adjusts[i], parse_target(opt.target_texts[i])};
    if (st.is_chain() && p.adjust.rfind("stage", 0) != 0 && p.adjust != "supply.resistance" && p.adjust != "output.load") {
      if (p.target.stage < 0)
        throw input_error("--adjust " + p.adjust + ": the file is a chain of " + std::to_string(st.stage_count()) +
                          " stages: name the stage, as --adjust stage1." + p.adjust + " (or the target's, --target stage1." +
                          opt.target_texts[i] + ")");
      p.adjust = model::stage_key(st, p.target.stage, p.adjust);
    }
    pairs.push_back(std::move(p));
  }
  return pairs;
}

// The standard-value combinations around the joint solution, closest to the targets first.
void print_joint_candidates(const std::vector<model::tune_pair>& pairs, const std::vector<model::joint_candidate>& cands,
                            base::eseries series, std::ostream& out, const row_levels& levels = {}) {
  std::vector<align> cols{align::left};
  std::vector<std::string> head{""};
  for (const model::tune_pair& p : pairs) {
    cols.push_back(align::right);
    head.push_back(p.adjust);
  }
  for (const model::tune_pair& p : pairs) {
    cols.push_back(align::right);
    head.push_back(p.target.kind == model::target_kind::gain ? "gain" : model::target_text(p.target).substr(0, model::target_text(p.target).find(' ')));
  }
  const bool gain_shown = std::any_of(pairs.begin(), pairs.end(), [](const model::tune_pair& p) { return p.target.kind == model::target_kind::gain; });
  if (!gain_shown) {
    cols.push_back(align::right);
    head.push_back("gain");
  }
  if (!levels.empty()) {
    cols.insert(cols.end(), 3, align::right);
    head.insert(head.end(), {"1 % THD", "3 % THD", "10 % THD"});
  }
  text_table t(cols);
  t.add(head);
  int k = 0;
  for (const model::joint_candidate& c : cands) {
    std::vector<std::string> row{std::string(base::series_name(series)) + " " + std::to_string(++k)};
    for (double v : c.ohm) row.push_back(format_si(v, "Ω"));
    for (std::size_t i = 0; i < pairs.size(); ++i)
      row.push_back(pairs[i].target.kind == model::target_kind::gain
                        ? base::format_number(c.achieved[i], 4) + " dB"
                        : format_si(c.achieved[i], pairs[i].target.kind == model::target_kind::id ? "A" : "V", 4));
    if (!gain_shown) row.push_back(base::format_number(c.gain_db, 4) + " dB");
    if (static_cast<std::size_t>(k - 1) < levels.size())
      for (std::size_t n = 0; n < 3; ++n) row.push_back(level_cell(levels[static_cast<std::size_t>(k - 1)], n));
    t.add(row);
  }
  out << "\n  standard values around the joint solution, closest to the targets first\n\n";
  t.write(out);
}

// Several pairs: each resistor's table at the values solved together (the others held at theirs).
void print_pairs_text(const model::stage& st, const std::vector<model::tune_pair>& pairs, const model::joint_solution& sol,
                      const std::vector<model::tune_result>& results, const std::vector<model::joint_candidate>& cands,
                      base::eseries series, std::ostream& out, const joint_levels& levels = {}) {
  out << st.name << "\n  " << pairs.size() << " resistors solved together, in " << sol.rounds
      << (sol.all_at_once ? (sol.rounds == 1 ? " step, all at once" : " steps, all at once")
                          : (sol.rounds == 1 ? " round" : " rounds"))
      << " (each target within 1 ppm + 1 µV or 1 nA; a gain within 1e-5 dB)\n";
  for (std::size_t k = 0; k < pairs.size(); ++k) {
    out << "\n  target " << model::target_text(pairs[k].target) << ", adjusting " << results[k].adjust << "\n\n";
    print_table(results[k], out, k < levels.tables.size() ? levels.tables[k] : row_levels{});
  }
  print_joint_candidates(pairs, cands, series, out, levels.candidates);
  out << "\n  each table above holds the other resistors at their exact values\n"
         "  gain: mid-band, generator to load; swing: largest clean symmetric output swing (peak) at the load, mid-band\n";
  if (!levels.candidates.empty())
    out << "  1 % / 3 % / 10 % THD: the output (peak, at the load) where a 1 kHz sine reaches that THD in the engine,\n"
           "  as sweep finds it; the swing is the hard limit, and THD rises well before it\n";
}

void print_pairs_json(const std::vector<model::tune_pair>& pairs, const model::joint_solution& sol,
                      const std::vector<model::tune_result>& results, const std::vector<model::joint_candidate>& cands,
                      base::eseries series, std::ostream& out, const joint_levels& levels = {}) {
  nlohmann::json j;
  j["rounds"] = sol.rounds;
  j["all_at_once"] = sol.all_at_once;
  nlohmann::json adjust = nlohmann::json::array(), targets = nlohmann::json::array();
  for (const model::tune_pair& p : pairs) {
    adjust.push_back(p.adjust);
    targets.push_back(model::target_text(p.target));
  }
  j["adjust"] = adjust;
  j["target"] = targets;
  j["exact_ohm"] = sol.ohm;
  nlohmann::json ps = nlohmann::json::array();
  for (std::size_t k = 0; k < pairs.size(); ++k)
    ps.push_back(result_json(pairs[k].target, results[k], k < levels.tables.size() ? levels.tables[k] : row_levels{}));
  j["pairs"] = ps;
  nlohmann::json cs = nlohmann::json::array();
  for (std::size_t k = 0; k < cands.size(); ++k) {
    const model::joint_candidate& c = cands[k];
    nlohmann::json ops = nlohmann::json::array();
    for (const model::terminal_point& at : c.at) ops.push_back(operating_point_json(at));
    cs.push_back({{"series", base::series_name(series)},
                  {"values_ohm", c.ohm},
                  {"achieved", c.achieved},
                  {"gain_db", c.gain_db},
                  {"operating_points", ops}});
    if (k < levels.candidates.size()) cs.back()["thd_levels"] = levels_json(levels.candidates[k]);
  }
  j["candidates"] = cs;
  out << json_text(j) << '\n';
}

void run(const tune_options& opt, std::ostream& out) {
  for (const std::string& t : opt.target_texts) (void)parse_target(t);
  const base::eseries series = base::parse_series(opt.series);
  const model::stage st = load_stage(opt.input);
  const std::vector<model::tune_pair> pairs = pairs_of(opt, st);
  // Over a batch the report is a trimmer's range over every part, not rows of values: levels
  // for it would be a sweep for each part (thousands of drawn parts, 0.1 to 2 s each).
  if (opt.thd_levels && opt.over_spread)
    throw input_error("--thd-levels goes with the rows of values tune prints; --over-spread sizes a trimmer over a batch, "
                      "whose parts would each take a sweep of their own: tune one part's stage with --thd-levels, or "
                      "read a part at its trimmed value with bias --thd-levels --set");
  if (opt.over_spread) {
    const model::spread_settings ss = spread_settings_from(opt.batch, st, opt.input);
    if (pairs.size() == 1) {
      const model::trim_result t = model::size_trimmer(st, pairs[0].adjust, pairs[0].target, ss, series);
      if (opt.json) return print_trim_json(pairs[0].target, ss, t, out);
      return print_trim_text(st, pairs[0].target, ss, t, series, out);
    }
    const model::trim_set set = model::size_trimmers(st, pairs, ss, series);
    if (opt.json) return print_trim_set_json(pairs, ss, set, out);
    return print_trim_set_text(st, pairs, ss, set, series, out);
  }
  if (pairs.size() == 1) {
    const model::tune_result r = model::tune_resistor(st, pairs[0].adjust, pairs[0].target, series);
    const row_levels levels = opt.thd_levels ? levels_of_rows(st, r) : row_levels{};
    if (opt.json) return print_json(pairs[0].target, r, out, levels);
    return print_text(st, pairs[0].target, r, out, levels);
  }
  const model::joint_solution sol = model::solve_resistors(st, pairs);
  if (!sol.settled)
    throw input_error("the resistors did not settle on their targets together in " + std::to_string(sol.rounds) +
                      " rounds: the targets pull against each other; try them one at a time to see which");
  // Each pair's table: its resistor solved with the others held at their joint values (the
  // joint solution is a fixed point, so the exact value is the same), with its series values.
  std::vector<model::tune_result> results;
  std::vector<model::stage> tables_stages;
  for (std::size_t k = 0; k < pairs.size(); ++k) {
    model::stage others = st;
    for (std::size_t m = 0; m < pairs.size(); ++m)
      if (m != k) *model::resistor_field(others, pairs[m].adjust) = sol.ohm[m];
    results.push_back(model::tune_resistor(others, pairs[k].adjust, pairs[k].target, series));
    tables_stages.push_back(std::move(others));
  }
  const std::vector<model::joint_candidate> cands = model::joint_candidates(st, pairs, sol, series);
  const joint_levels levels = opt.thd_levels ? levels_of_joint(tables_stages, results, st, pairs, cands) : joint_levels{};
  if (opt.json) return print_pairs_json(pairs, sol, results, cands, series, out, levels);
  print_pairs_text(st, pairs, sol, results, cands, series, out, levels);
}

}  // namespace

void register_tune(CLI::App& app, std::vector<command>& commands, const data_files& data) {
  auto opt = std::make_shared<tune_options>();
  CLI::App* sub = setup(app, *opt, data);
  command c{sub, [opt](std::ostream& out, std::ostream&, base::output_set&) { run(*opt, out); },
            {{"adjust_key", "--adjust"}, {"target", "--target"}}};
  map_spread_fields(c.options_of_fields);
  commands.push_back(std::move(c));
}

}  // namespace pinchoff::cli
