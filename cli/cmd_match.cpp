// pinchoff match: matched pairs (or larger sets) from a bag of measured parts.
#include <cmath>
#include <memory>

#include <CLI/CLI.hpp>
#include <nlohmann/json.hpp>

#include "cli/app.hpp"
#include "cli/common.hpp"
#include "cli/option_text.hpp"
#include "cli/text_table.hpp"
#include "base/csv.hpp"
#include "base/error.hpp"
#include "base/units.hpp"
#include "model/device/fit.hpp"
#include "model/device/match.hpp"

namespace pinchoff::cli {
namespace {

using base::format_number;
using base::format_si;
using align = text_table::align;

struct match_options {
  std::string path;
  int sets{2};
  std::string by{"idss,vp"};
  std::string tolerance;
  bool json{false};
};

struct match_report {
  std::string source;
  std::vector<model::part_figures> parts;
  std::vector<model::unfit_part> unfit;  ///< a bag's parts that could not be fitted, left out
  model::match_settings settings;
  model::match_result result;
};

std::vector<std::string> names_of(const std::vector<int>& idx, const std::vector<model::part_figures>& parts) {
  std::vector<std::string> names;
  for (const int k : idx) names.push_back(parts[static_cast<std::size_t>(k)].name);
  return names;
}

std::string joined(const std::vector<std::string>& names) {
  std::string s;
  for (const std::string& n : names) s += (s.empty() ? "" : ", ") + n;
  return s;
}

void print_json(const match_report& r, std::ostream& out) {
  const bool by_vgs = r.settings.basis == model::match_basis::vgs_at_current;
  nlohmann::json sets = nlohmann::json::array();
  for (const model::matched_set& m : r.result.sets) {
    nlohmann::json j{{"parts", names_of(m.parts, r.parts)},
                     {"idss_spread_a", m.idss_spread_a},
                     {"vp_spread_v", m.vp_spread_v},
                     {"score", m.score}};
    if (by_vgs) j["vgs_spread_v"] = m.vgs_spread_v;
    sets.push_back(j);
  }
  nlohmann::json j{{"set_size", r.settings.set_size},
                   {"by", by_vgs ? "vgs" : "idss,vp"},
                   {"sets", sets},
                   {"left_over", names_of(r.result.left_over, r.parts)}};
  nlohmann::json unfit = nlohmann::json::array();
  for (const model::unfit_part& u : r.unfit)
    unfit.push_back({{"part", u.name}, {"first_line", u.first_line}, {"last_line", u.last_line}, {"reason", u.reason}});
  j["unfit"] = unfit;
  if (by_vgs) j["current_a"] = r.settings.current_a;
  out << json_text(j) << '\n';
}

std::string basis_text(const model::match_settings& s) {
  if (s.basis == model::match_basis::vgs_at_current)
    return "closest in VGS at " + format_si(s.current_a, "A") +
           (s.vgs_tolerance_v ? ", within " + format_si(*s.vgs_tolerance_v, "V") : std::string(", score in mV"));
  std::string t = "closest in IDSS and VP together";
  if (s.idss_tolerance_ratio || s.vp_tolerance_v) {
    t += ", within";
    if (s.idss_tolerance_ratio) t += " " + format_number(100.0 * std::expm1(*s.idss_tolerance_ratio), 3) + " % of IDSS";
    if (s.idss_tolerance_ratio && s.vp_tolerance_v) t += " and";
    if (s.vp_tolerance_v) t += " " + format_si(*s.vp_tolerance_v, "V") + " of VP";
  } else {
    t += " (score 1 = 1 % of IDSS or 10 mV of VP)";
  }
  return t;
}

void print_text(const match_report& r, std::ostream& out) {
  const bool by_vgs = r.settings.basis == model::match_basis::vgs_at_current;
  out << "match of " << r.source << ": " << r.parts.size() << " parts into sets of " << r.settings.set_size << ", "
      << basis_text(r.settings) << "\n\n";
  if (r.result.sets.empty()) {
    out << "  no set" << (r.settings.idss_tolerance_ratio || r.settings.vp_tolerance_v || r.settings.vgs_tolerance_v
                              ? " within the tolerance"
                              : " (fewer parts than a set)")
        << "\n";
  } else {
    std::vector<align> cols{align::right, align::left, align::right, align::right, align::right};
    if (by_vgs) cols.push_back(align::right);
    text_table tb(cols);
    std::vector<std::string> head{"set", "parts", "IDSS spread", "VP spread", "score"};
    if (by_vgs) head.insert(head.begin() + 2, "VGS spread");
    tb.add(head);
    int k = 0;
    for (const model::matched_set& m : r.result.sets) {
      double imin = 1e300;
      for (const int p : m.parts) imin = std::min(imin, r.parts[static_cast<std::size_t>(p)].idss_a);
      std::vector<std::string> row{std::to_string(++k), joined(names_of(m.parts, r.parts)),
                                   format_si(m.idss_spread_a, "A", 2) + " (" + format_number(100.0 * m.idss_spread_a / imin, 2) + " %)",
                                   format_si(m.vp_spread_v, "V", 2), format_number(m.score, 3)};
      if (by_vgs) row.insert(row.begin() + 2, format_si(m.vgs_spread_v, "V", 2));
      tb.add(row);
    }
    tb.write(out);
  }
  out << "\nleft over: " << (r.result.left_over.empty() ? std::string("none") : joined(names_of(r.result.left_over, r.parts)));
  if (by_vgs) {
    std::vector<std::string> cannot;
    for (std::size_t k = 0; k < r.parts.size(); ++k)
      if (std::isnan(r.result.vgs_v[k])) cannot.push_back(r.parts[k].name);
    if (!cannot.empty())
      out << "\n  (" << joined(cannot) << ": IDSS below " << format_si(r.settings.current_a, "A") << ", cannot carry it)";
  }
  for (const model::unfit_part& u : r.unfit)
    out << "\nleft out: " << model::part_label(u.name, u.first_line, u.last_line) << ": " << u.reason;
  out << '\n';
}

CLI::App* setup(CLI::App& app, match_options& opt) {
  CLI::App* sub = app.add_subcommand("match", "Group measured parts into matched pairs or larger sets, best first");
  sub->add_option("PARTS", opt.path,
                  "CSV of parts: the parts table `fit --csv` writes (part, idss_a, vp_v, ...), or bench readings with a "
                  "part column, fitted here")
      ->required();
  sub->add_option("--sets", opt.sets, "Parts in a set: 2 for pairs, up to 16")->capture_default_str();
  sub->add_option("--by", opt.by, "What makes parts alike: idss,vp (both together), or vgs@CURRENT (VGS at that drain current)")
      ->capture_default_str();
  sub->add_option("--tolerance", opt.tolerance,
                  "The most a set may spread (wider sets are not formed): 2%,20mV with --by idss,vp; 5mV with --by vgs@I");
  sub->add_flag("--json", opt.json, "Machine-readable output");
  sub->footer(
      "Examples:\n"
      "  pinchoff fit bag.csv --csv > parts.csv\n"
      "  pinchoff match parts.csv                         (pairs, closest in IDSS and VP)\n"
      "  pinchoff match parts.csv --sets 4 --tolerance 3%,30mV\n"
      "  pinchoff match bag.csv --by vgs@1m --tolerance 5mV   (pairs for a pair run at 1 mA)\n"
      "The tightest set is taken first, then the tightest of the parts left, and so on; the\n"
      "parts that make no set within the tolerance are listed as left over.");
  return sub;
}

void run(const match_options& opt, std::ostream& out, std::ostream& err) {
  match_report r;
  const base::csv_table t = base::read_csv_file(opt.path, model::bench_readings_file_kind, model::bench_layout());
  r.source = t.source;
  r.parts = model::read_parts(t, &r.unfit);  // the fit's table loop, shared with `fit` (model::fit_bag)
  for (const model::unfit_part& u : r.unfit)
    err << "pinchoff match: warning: " << t.source << ": " << model::part_label(u.name, u.first_line, u.last_line)
        << " left out: " << u.reason << '\n';
  const match_by by = parse_match_by(opt.by);
  r.settings.set_size = opt.sets;
  r.settings.basis = by.basis;
  if (by.basis == model::match_basis::vgs_at_current) r.settings.current_a = by.current_a;
  if (!opt.tolerance.empty()) parse_match_tolerance(opt.tolerance, by.basis, r.settings);
  r.result = model::match_parts(r.parts, r.settings);
  if (opt.json) return print_json(r, out);
  print_text(r, out);
}

}  // namespace

void register_match(CLI::App& app, std::vector<command>& commands, const data_files&) {
  auto opt = std::make_shared<match_options>();
  CLI::App* sub = setup(app, *opt);
  commands.push_back({sub, [opt](std::ostream& out, std::ostream& err, base::output_set&) { run(*opt, out, err); },
                      {{"set_size", "--sets"}, {"current", "--by"}, {"tolerance", "--tolerance"}}});
}

}  // namespace pinchoff::cli
