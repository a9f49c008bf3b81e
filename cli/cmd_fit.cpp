// pinchoff fit: IDSS, VP (and lambda) of one part from bench readings in CSV.
#include <algorithm>
#include <cmath>
#include <cstdio>
#include <memory>

#include <CLI/CLI.hpp>
#include <nlohmann/json.hpp>

#include "cli/app.hpp"
#include "cli/common.hpp"
#include "cli/text_table.hpp"
#include "base/csv.hpp"
#include "base/error.hpp"
#include "base/units.hpp"
#include "model/device/fit.hpp"

namespace pinchoff::cli {
namespace {

using base::format_number;
using base::format_si;
using align = text_table::align;

struct fit_options {
  std::string path;
  bool json{false};
  bool csv{false};
};

/// One fitted part of the file, with what the report needs of its readings.
using fitted_part = model::fitted_readings;

// The parts left out, for --json: each named, with its lines and the reason.
nlohmann::json unfit_json(const std::vector<model::unfit_part>& unfit) {
  nlohmann::json list = nlohmann::json::array();
  for (const model::unfit_part& u : unfit)
    list.push_back({{"part", u.name}, {"first_line", u.first_line}, {"last_line", u.last_line}, {"reason", u.reason}});
  return list;
}

nlohmann::json rows_json(const model::fit_result& f) {
  nlohmann::json rows = nlohmann::json::array();
  for (const auto& r : f.rows)
    rows.push_back({{"line", r.reading.line},
                    {"vgs_v", r.vgs_v},
                    {"id_a", r.reading.id_a},
                    {"id_model_a", r.id_model_a},
                    {"residual_percent", 100.0 * r.residual_ratio},
                    {"flagged", r.flagged}});
  return rows;
}

nlohmann::json std_errors_json(const model::fit_result& f) {
  return {{"idss_a", number_or_null(f.idss_at_vds_se_a)},
          {"vp_v", number_or_null(f.vp_se_v)},
          {"lambda_per_v", number_or_null(f.lambda_se_per_v)}};
}

// IDSS is reported at the VDS the readings were taken at (idss_vds_v; 0 when they do not
// give it), which is what `[jfet] idss` with `idss_vds` means in a stage file.
void print_json(const std::vector<fitted_part>& parts, const std::vector<model::unfit_part>& unfit, std::ostream& out) {
  nlohmann::json j;
  if (parts.size() == 1 && unfit.empty()) {
    const model::fit_result& f = parts.front().fit;
    if (!parts.front().readings.name.empty()) j["part"] = parts.front().readings.name;
    j["idss_a"] = f.idss_at_vds_a;
    j["idss_vds_v"] = f.idss_vds_v;
    j["vp_v"] = f.vp_v;
    j["lambda_per_v"] = f.lambda_per_v;
    j["lambda_fitted"] = f.lambda_fitted;
    j["polarity"] = f.p_channel ? "p" : "n";
    j["std_errors"] = std_errors_json(f);
    j["rms_residual_percent"] = 100.0 * f.rms_residual_ratio;
    j["rows"] = rows_json(f);
    out << json_text(j) << '\n';
    return;
  }
  nlohmann::json list = nlohmann::json::array();
  for (const fitted_part& p : parts) {
    const model::fit_result& f = p.fit;
    list.push_back({{"part", p.readings.name},
                    {"idss_a", f.idss_at_vds_a},
                    {"idss_vds_v", f.idss_vds_v},
                    {"vp_v", f.vp_v},
                    {"lambda_per_v", f.lambda_per_v},
                    {"lambda_fitted", f.lambda_fitted},
                    {"polarity", f.p_channel ? "p" : "n"},
                    {"std_errors", std_errors_json(f)},
                    {"rms_residual_percent", 100.0 * f.rms_residual_ratio},
                    {"rows", rows_json(f)}});
  }
  j["parts"] = list;
  j["unfit"] = unfit_json(unfit);
  out << json_text(j) << '\n';
}

std::string flagged_lines(const model::fit_result& f) {
  std::string s;
  for (const auto& r : f.rows)
    if (r.flagged) s += (s.empty() ? "" : " ") + std::to_string(r.reading.line);
  return s;
}

// A number for the parts table: full precision, read back by the same CSV reader; an
// unknown error is an empty cell.
std::string csv_number(double v) {
  if (std::isnan(v)) return "";
  char buf[40];
  std::snprintf(buf, sizeof buf, "%.9g", v);
  return buf;
}

std::string csv_name(const std::string& name) {
  if (name.find_first_of(",\"\n\r") == std::string::npos) return name;
  std::string q = "\"";
  for (char c : name) q += c == '"' ? std::string("\"\"") : std::string(1, c);
  return q + "\"";
}

/// The parts table: one row a part, read back by `match` and `spread --parts`.
void write_csv(const std::vector<fitted_part>& parts, std::ostream& out) {
  out << "part,idss_a,vp_v,lambda_per_v,idss_vds_v,idss_se_a,vp_se_v,lambda_se_per_v,readings,rms_misfit_percent,flagged_lines\n";
  int unnamed = 0;
  for (const fitted_part& p : parts) {
    const model::fit_result& f = p.fit;
    const std::string name = p.readings.name.empty() ? "part" + std::to_string(++unnamed) : p.readings.name;
    // Bench signs: a p-channel part's current is negative.
    out << csv_name(name) << ',' << csv_number(f.p_channel ? -f.idss_at_vds_a : f.idss_at_vds_a) << ','
        << csv_number(f.vp_v) << ',' << csv_number(f.lambda_per_v) << ',' << csv_number(f.idss_vds_v) << ','
        << csv_number(f.idss_at_vds_se_a) << ',' << csv_number(f.vp_se_v) << ','
        << csv_number(f.lambda_fitted ? f.lambda_se_per_v : std::nan("")) << ',' << f.rows.size() << ','
        << csv_number(100.0 * f.rms_residual_ratio) << ',' << flagged_lines(f) << '\n';
  }
}

std::string kind_name(const model::bench_table& bt) {
  if (bt.source_voltage) return "self-bias jig, source voltage read";
  return bt.kind == model::reading_kind::gate_sweep ? "gate sweep" : "self-bias jig";
}

std::string idss_vds_text(const model::fit_result& f) {
  return f.idss_vds_v > 0.0 ? "at VDS " + format_si(f.idss_vds_v, "V", 3) : "at VDS 0 (no vds_v given)";
}

void print_one(const base::csv_table& t, const fitted_part& p, std::ostream& out) {
  const model::fit_result& f = p.fit;
  out << "fit of " << t.source << (p.readings.name.empty() ? "" : ", part '" + p.readings.name + "'") << " ("
      << f.rows.size() << " readings, " << kind_name(p.readings.table) << ", " << (f.p_channel ? "p" : "n") << "-channel)\n\n";
  text_table tb({align::left, align::right, align::left});
  const bool exact = std::isnan(f.idss_se_a);
  tb.add({"IDSS", format_si(f.idss_at_vds_a, "A", 4),
          (exact ? std::string("exact through two readings") : "± " + format_si(f.idss_at_vds_se_a, "A", 2)) + ", " +
              idss_vds_text(f)});
  tb.add({"VP", format_si(f.vp_v, "V", 4), exact ? "(a third reading gives error estimates)" : "± " + format_si(f.vp_se_v, "V", 2)});
  if (f.lambda_fitted)
    tb.add({"lambda", format_number(f.lambda_per_v, 3) + " /V", "± " + format_number(f.lambda_se_per_v, 2) + " /V"});
  else
    tb.add({"lambda", "not fitted", "(give vds_v varied by more than 1 V)"});
  tb.add({"rms misfit", format_number(100.0 * f.rms_residual_ratio, 2) + " %", ""});
  tb.write(out);
  out << '\n';
  text_table rows({align::right, align::right, align::right, align::right, align::right, align::left});
  rows.add({"line", "VGS", "ID read", "ID model", "misfit", ""});
  for (const auto& r : f.rows)
    rows.add({std::to_string(r.reading.line), format_si(r.vgs_v, "V", 4), format_si(r.reading.id_a, "A", 4),
              format_si(r.id_model_a, "A", 4), format_number(100.0 * r.residual_ratio, 2) + " %",
              r.flagged ? "<- does not fit the others" : ""});
  rows.write(out);
  out << "\nPaste into a stage file:\n\n" << model::jfet_block(f);
}

// Many parts: one line each, with its misfit and the rows that do not fit.
void print_parts(const base::csv_table& t, const std::vector<fitted_part>& parts, const std::vector<model::unfit_part>& unfit,
                 std::ostream& out) {
  out << "fit of " << t.source << " (" << parts.size() << " parts, " << t.rows.size() << " readings, "
      << kind_name(parts.front().readings.table) << ")\n\n";
  text_table tb({align::left, align::right, align::right, align::right, align::right, align::right, align::right,
                 align::right, align::left});
  tb.add({"part", "lines", "IDSS", "±", "at VDS", "VP", "±", "misfit", "rows that do not fit"});
  for (const fitted_part& p : parts) {
    const model::fit_result& f = p.fit;
    const bool exact = std::isnan(f.idss_se_a);
    const std::string flags = flagged_lines(f);
    tb.add({p.readings.name, std::to_string(p.readings.first_line) + "-" + std::to_string(p.readings.last_line),
            format_si(f.idss_at_vds_a, "A", 4), exact ? "exact" : format_si(f.idss_at_vds_se_a, "A", 2),
            f.idss_vds_v > 0.0 ? format_si(f.idss_vds_v, "V", 3) : "0", format_si(f.vp_v, "V", 4),
            exact ? "exact" : format_si(f.vp_se_v, "V", 2), format_number(100.0 * f.rms_residual_ratio, 2) + " %",
            flags.empty() ? "" : "lines " + flags});
  }
  tb.write(out);
  const bool any_lambda = std::any_of(parts.begin(), parts.end(), [](const fitted_part& p) { return p.fit.lambda_fitted; });
  if (any_lambda) {
    out << "\nlambda:";
    for (const fitted_part& p : parts)
      out << ' ' << p.readings.name << ' '
          << (p.fit.lambda_fitted ? format_number(p.fit.lambda_per_v, 3) + " /V" : std::string("(not fitted)")) << ';';
    out << '\n';
  }
  for (const model::unfit_part& u : unfit)
    out << "\nleft out: " << model::part_label(u.name, u.first_line, u.last_line) << ": " << u.reason;
  if (!unfit.empty()) out << '\n';
  out << "\nThe parts table for `pinchoff match` and `spread --parts`: the same command with --csv.\n";
}

CLI::App* setup(CLI::App& app, fit_options& opt) {
  CLI::App* sub = app.add_subcommand("fit", "Fit IDSS, VP and lambda of a part, or of every part of a bag, to bench readings (CSV)");
  sub->add_option("FILE", opt.path,
                  "CSV with a header: vgs_v,id_a (gate sweep), rs_ohm,id_a or rs_ohm,vs_v (self-bias jig), optionally "
                  "vds_v, and part (the part each row is of)")
      ->required();
  auto* json = sub->add_flag("--json", opt.json, "Machine-readable output");
  sub->add_flag("--csv", opt.csv, "The parts table as CSV: one row a part, for `match` and `spread --parts`")->excludes(json);
  sub->footer(
      "Examples:\n"
      "  pinchoff fit part7.csv\n"
      "  pinchoff fit bag.csv --csv > parts.csv      (every part of a bag, then `pinchoff match parts.csv`)\n"
      "A gate sweep (a bench supply sets VGS, a meter reads ID, drain at a few volts):\n"
      "  vgs_v,id_a\n  0,5.1m\n  -0.5,2.9m\n  -1.0,1.25m\n"
      "A self-bias jig (gate grounded, a known source resistor, read ID, or VS as vs_v):\n"
      "  rs_ohm,id_a\n  100,3.6m\n  1k,1.02m\n  10k,0.16m\n"
      "A bag of parts in one file, one part's rows after another:\n"
      "  part,rs_ohm,vs_v,vds_v\n  A1,100,0.36,8.6\n  A1,1k,1.02,7.9\n  A1,10k,1.6,7.4\n  A2,100,0.41,8.5\n  ...\n"
      "Cells take the same values as stage files (2.5m, 1k), with the column's unit if you like\n"
      "(2.5mA, 3.965 mA). Give vds_v per row to fit lambda as well (needs VDS varied by more\n"
      "than 1 V); IDSS is then given at the readings' mean VDS. Keep the part in saturation (VDS\n"
      "above VGS - VP). One part's result ends with a [jfet] block to paste into a stage file.");
  return sub;
}

void run(const fit_options& opt, std::ostream& out, std::ostream& err) {
  const base::csv_table t = base::read_csv_file(opt.path, model::bench_readings_file_kind, model::bench_layout());
  const model::bag_fit bag = model::fit_bag(t);  // a part that cannot be fitted is left out, and said so
  for (const model::unfit_part& u : bag.unfit)
    err << "pinchoff fit: warning: " << t.source << ": " << model::part_label(u.name, u.first_line, u.last_line)
        << " left out: " << u.reason << '\n';
  if (opt.json) return print_json(bag.parts, bag.unfit, out);
  if (opt.csv) return write_csv(bag.parts, out);
  if (bag.parts.size() == 1 && bag.unfit.empty()) return print_one(t, bag.parts.front(), out);
  print_parts(t, bag.parts, bag.unfit, out);
}

}  // namespace

void register_fit(CLI::App& app, std::vector<command>& commands, const data_files&) {
  auto opt = std::make_shared<fit_options>();
  CLI::App* sub = setup(app, *opt);
  commands.push_back({sub, [opt](std::ostream& out, std::ostream& err, base::output_set&) { run(*opt, out, err); }});
}

}  // namespace pinchoff::cli
