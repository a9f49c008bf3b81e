// pinchoff fit: IDSS, VP (and lambda) of one part from bench readings in CSV.
#include <cmath>
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
};

void print_json(const model::fit_result& f, std::ostream& out) {
  nlohmann::json j;
  j["idss_a"] = f.idss_a;
  j["vp_v"] = f.vp_v;
  j["lambda_per_v"] = f.lambda_per_v;
  j["lambda_fitted"] = f.lambda_fitted;
  j["polarity"] = f.p_channel ? "p" : "n";
  j["std_errors"] = {{"idss_a", number_or_null(f.idss_se_a)},
                     {"vp_v", number_or_null(f.vp_se_v)},
                     {"lambda_per_v", number_or_null(f.lambda_se_per_v)}};
  j["rms_residual_percent"] = 100.0 * f.rms_residual_ratio;
  nlohmann::json rows = nlohmann::json::array();
  for (const auto& r : f.rows)
    rows.push_back({{"line", r.reading.line},
                    {"vgs_v", r.vgs_v},
                    {"id_a", r.reading.id_a},
                    {"id_model_a", r.id_model_a},
                    {"residual_percent", 100.0 * r.residual_ratio},
                    {"flagged", r.flagged}});
  j["rows"] = rows;
  out << json_text(j) << '\n';
}

void print_text(const base::csv_table& t, const model::bench_table& bt, const model::fit_result& f, std::ostream& out) {
  out << "fit of " << t.source << " (" << t.rows.size() << " readings, "
      << (bt.kind == model::reading_kind::gate_sweep ? "gate sweep" : "self-bias jig") << ", " << (f.p_channel ? "p" : "n")
      << "-channel)\n\n";
  text_table p({align::left, align::right, align::left});
  const bool exact = std::isnan(f.idss_se_a);
  p.add({"IDSS", format_si(f.idss_a, "A", 4), exact ? "exact through two readings" : "± " + format_si(f.idss_se_a, "A", 2)});
  p.add({"VP", format_si(f.vp_v, "V", 4), exact ? "(a third reading gives error estimates)" : "± " + format_si(f.vp_se_v, "V", 2)});
  if (f.lambda_fitted)
    p.add({"lambda", format_number(f.lambda_per_v, 3) + " /V", "± " + format_number(f.lambda_se_per_v, 2) + " /V"});
  else
    p.add({"lambda", "not fitted", "(give vds_v varied by more than 1 V)"});
  p.add({"rms misfit", format_number(100.0 * f.rms_residual_ratio, 2) + " %", ""});
  p.write(out);
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

CLI::App* setup(CLI::App& app, fit_options& opt) {
  CLI::App* sub = app.add_subcommand("fit", "Fit IDSS, VP and lambda of a part to bench readings (CSV)");
  sub->add_option("FILE", opt.path, "CSV with a header: vgs_v,id_a (gate sweep) or rs_ohm,id_a (self-bias jig), optionally vds_v")
      ->required();
  sub->add_flag("--json", opt.json, "Machine-readable output");
  sub->footer(
      "Examples:\n"
      "  pinchoff fit part7.csv\n"
      "A gate sweep (a bench supply sets VGS, a meter reads ID, drain at a few volts):\n"
      "  vgs_v,id_a\n  0,5.1m\n  -0.5,2.9m\n  -1.0,1.25m\n"
      "A self-bias jig (gate grounded, a known source resistor, read ID or VS/RS):\n"
      "  rs_ohm,id_a\n  100,3.6m\n  1k,1.02m\n  10k,0.16m\n"
      "Cells take the same values as stage files (2.5m, 1k). Give vds_v per row to fit lambda\n"
      "as well (needs VDS varied by more than 1 V). Keep the part in saturation (VDS above\n"
      "VGS - VP). The result ends with a [jfet] block to paste into a stage file.");
  return sub;
}

void run(const fit_options& opt, std::ostream& out) {
  const base::csv_table t = base::read_csv_file(opt.path, model::bench_readings_file_kind);
  const model::bench_table bt = model::readings_from_table(t);
  model::fit_result f;
  try {
    f = model::fit_square_law(bt.kind, bt.readings);
  } catch (const input_error& e) {
    throw input_error(t.source + ": " + e.what());
  }
  if (opt.json) return print_json(f, out);
  print_text(t, bt, f, out);
}

}  // namespace

void register_fit(CLI::App& app, std::vector<command>& commands, const data_files&) {
  auto opt = std::make_shared<fit_options>();
  CLI::App* sub = setup(app, *opt);
  commands.push_back({sub, [opt](std::ostream& out, std::ostream&, base::output_set&) { run(*opt, out); }});
}

}  // namespace pinchoff::cli
