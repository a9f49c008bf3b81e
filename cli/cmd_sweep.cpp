// pinchoff sweep: harmonic profile against drive, from the nonlinear engine.
#include <algorithm>
#include <cmath>
#include <filesystem>
#include <memory>
#include <span>
#include <optional>
#include <sstream>
#include <string>
#include <tuple>

#include <CLI/CLI.hpp>
#include <nlohmann/json.hpp>

#include "cli/app.hpp"
#include "cli/common.hpp"
#include "cli/plot.hpp"
#include "cli/report_json.hpp"
#include "cli/text_table.hpp"
#include "base/error.hpp"
#include "base/units.hpp"
#include "model/analysis/compare.hpp"
#include "model/analysis/sweep.hpp"

namespace pinchoff::cli {
namespace {

using base::format_number;
using base::format_si;
using align = text_table::align;

struct sweep_options {
  stage_input input;
  std::string freq{"1k"};
  std::string drive;
  std::string from, to;
  int steps{25};
  int oversample{8};
  bool oversample_given{false};
  int harmonics{model::default_harmonics};
  std::string bandwidth{"20k"};
  std::string rate{"48k"};
  bool json{false}, csv{false}, verbose{false};
  std::string plot;
  std::string waveform, transfer;
  int threads{0};
};

// `source`: the stage, when a level is written as a sound pressure (a capsule's).
std::vector<double> drive_levels(const sweep_options& o, const model::stage* source) {
  std::vector<double> d;
  if (!o.drive.empty()) {
    if (!o.from.empty() || !o.to.empty()) throw input_error("--drive and --from/--to: choose one");
    std::stringstream ss(o.drive);
    std::string item;
    while (std::getline(ss, item, ',')) d.push_back(option_level_vpk(item, "--drive", source));
    return d;  // the model checks that there are levels and that each is above 0 V
  }
  const double lo = option_level_vpk(o.from.empty() ? "-40dBu" : o.from, "--from", source);
  const double hi = option_level_vpk(o.to.empty() ? "+20dBu" : o.to, "--to", source);
  if (!(lo > 0) || !(hi > lo)) throw input_error("--from must be above 0 V and below --to");
  if (o.steps < 2 || o.steps > 1000) throw input_error("--steps must be between 2 and 1000");
  for (int k = 0; k < o.steps; ++k) d.push_back(lo * std::pow(hi / lo, double(k) / (o.steps - 1)));
  return d;
}

// Levels are computed from volts; a level within 1e-9 dB of zero is zero.
std::string dbu(double vpk) {
  const double l = base::dbu_from_vpk(vpk);
  return format_number(std::fabs(l) < 1e-9 ? 0.0 : l, 3) + " dBu";
}
// A level below the engine's numerical floor is a mark (cli/common.hpp).
std::string dbc(double v) {
  if (!std::isfinite(v)) return "-";
  return below_numerical_floor(v) ? floor_mark : format_number(v, 3);
}
// A DC shift below 1 nV is solver noise on an AC-coupled output.
std::string shift(double v) { return format_si(std::fabs(v) < 1e-9 ? 0.0 : v, "V"); }
std::string ratio_db(double r) {
  if (std::isnan(r)) return "-";
  if (std::isinf(r)) return "even only";
  if (r <= 0) return "odd only";
  return format_number(10.0 * std::log10(r), 3) + " dB";
}


// What run computed, for the formatters.
struct sweep_report {
  model::stage st;
  model::sweep_settings settings;
  model::sweep_result r;
  std::vector<std::string> problems;  // the rest point's cautions, then the solver's
  std::optional<model::max_spl_figures> max_spl;  // a capsule source
};

// A capsule's level at a drive, in dB SPL.
std::string spl(const model::stage& st, double drive_vpk) {
  return format_number(model::capsule_level_db_spl(st.capsule, drive_vpk), 4) + " dB SPL";
}

void write_plot(const sweep_report& rep, const std::string& path, base::output_set& outputs) {
  const model::sweep_result& r = rep.r;
  line_plot pl;
  pl.title = rep.st.name + ": harmonics against drive at " + format_si(r.frequency_hz, "Hz");
  pl.x = {"drive at the generator (dBu)", axis_scale::linear, {}, {}, false};
  std::vector<series> lines;
  series thd{"THD", {}, {}, true};
  for (const auto& p : r.points) {
    thd.x.push_back(base::dbu_from_vpk(p.drive_vpk));
    thd.y.push_back(p.thd_db);
  }
  lines.push_back(thd);
  for (int h = 2; h <= std::min(5, rep.settings.harmonics); ++h) {
    series hs{"H" + std::to_string(h), {}, {}, false};
    for (const auto& p : r.points) {
      hs.x.push_back(base::dbu_from_vpk(p.drive_vpk));
      hs.y.push_back(p.harmonics_dbc[static_cast<std::size_t>(h - 2)]);
    }
    lines.push_back(hs);
  }
  // Below -140 dB lies nothing a build note needs, and below -180 only the simulation's
  // numerical floor: the axis stops at -140.
  double lowest = 0.0;
  for (const auto& l : lines)
    for (double y : l.y)
      if (std::isfinite(y)) lowest = std::min(lowest, y);
  axis yaxis{"level re fundamental (dB)", axis_scale::linear, {}, {}, false};
  if (lowest < -140.0) {
    yaxis.min = -140.0;
    yaxis.max = 0.0;
  }
  pl.top = {yaxis, lines};
  // A chain: THD at each stage's output in a second panel, so the profile can be followed
  // through the chain.
  if (!r.stages.empty()) {
    std::vector<series> per;
    for (std::size_t k = 0; k < r.stages.size(); ++k) {
      series st{r.stages[k].label, {}, {}, true};
      for (const auto& p : r.points) {
        st.x.push_back(base::dbu_from_vpk(p.drive_vpk));
        st.y.push_back(p.stages[k].thd_db);
      }
      per.push_back(st);
    }
    axis sy{"THD at each stage's output (dB)", axis_scale::linear, {}, {}, false};
    double low = 0.0;
    for (const auto& l : per)
      for (double y : l.y)
        if (std::isfinite(y)) low = std::min(low, y);
    if (low < -140.0) {
      sy.min = -140.0;
      sy.max = 0.0;
    }
    pl.bottom = panel{sy, per};
  }
  for (const auto& c : r.crossings)
    if (c.found) pl.markers.push_back({base::dbu_from_vpk(c.drive_vpk), format_number(c.thd_percent, 2) + " % THD"});
  add_svg_output(outputs, path, render_svg(pl));
}

// The points a picture shows: every point of a sweep of up to six drives, else six spread
// evenly over the drives in rising order, the lowest and the highest among them.
constexpr std::size_t pictured_points = 6;
constexpr std::size_t picture_points = 900;  // samples a period drawn: smooth at 860 px
std::vector<int> pictured(const std::vector<double>& drives) {
  std::vector<int> order(drives.size());
  for (std::size_t i = 0; i < order.size(); ++i) order[i] = static_cast<int>(i);
  std::stable_sort(order.begin(), order.end(), [&](int a, int b) {
    return drives[static_cast<std::size_t>(a)] < drives[static_cast<std::size_t>(b)];
  });
  if (order.size() <= pictured_points) return order;
  std::vector<int> out;
  const double step = static_cast<double>(order.size() - 1) / static_cast<double>(pictured_points - 1);
  for (std::size_t k = 0; k < pictured_points; ++k)
    out.push_back(order[static_cast<std::size_t>(std::lround(step * static_cast<double>(k)))]);
  return out;
}

std::string drive_legend(double vpk) { return dbu(vpk) + " (" + format_si(vpk, "Vpk") + ")"; }

// One curve per pictured drive over one steady-state period, the output scaled to its own
// peak; `x_of` gives a point's abscissa from the folded period (the phase, or the
// generator's voltage over its peak), and the curve closes where it began.
template <class X>
void add_period_curves(const sweep_report& rep, line_plot& pl, X x_of) {
  const model::sweep_result& r = rep.r;
  for (int i : pictured(rep.settings.drives_vpk)) {
    const model::sweep_point& p = r.points[static_cast<std::size_t>(i)];
    const model::period_trace t = model::fold_period(p, r, picture_points);
    double peak = 0.0;
    for (double v : t.output_v) peak = std::max(peak, std::fabs(v));
    series s{drive_legend(p.drive_vpk), {}, {}, false};
    for (std::size_t k = 0; k < t.phase.size(); ++k) {
      s.x.push_back(x_of(t, k, p));
      s.y.push_back(peak > 0 ? t.output_v[k] / peak : 0.0);
    }
    if (!s.x.empty()) {
      s.x.push_back(x_of(t, t.phase.size(), p));
      s.y.push_back(s.y.front());
    }
    pl.top.lines.push_back(std::move(s));
  }
}

// The output over one period at each pictured drive, each scaled to its own peak, so the
// shapes (the bend, the flat tops, a lean to one side) compare at any level.
void write_waveform_plot(const sweep_report& rep, const std::string& path, base::output_set& outputs) {
  line_plot pl;
  pl.title = rep.st.name + ": one period of the output at " + format_si(rep.r.frequency_hz, "Hz");
  pl.x = {"phase of the generator's sine (degrees)", axis_scale::linear, 0.0, 360.0, false};
  pl.top.y = {"output at the load, change from rest / its peak", axis_scale::linear, -1.05, 1.05, false};
  // The closing point is 360 degrees.
  add_period_curves(rep, pl, [](const model::period_trace& t, std::size_t k, const model::sweep_point&) {
    return k < t.phase.size() ? 360.0 * t.phase[k] : 360.0;
  });
  add_svg_output(outputs, path, render_svg(pl));
}

// The output against the generator's instantaneous voltage over one period at each
// pictured drive, each scaled to its own peak (drives tens of dB apart share one frame): a
// straight line is a clean stage (falling: it inverts), the bend and the flat tops show
// where it clips, and a loop (the way down apart from the way up) shows the coupling
// capacitors charging within the period.
void write_transfer_plot(const sweep_report& rep, const std::string& path, base::output_set& outputs) {
  line_plot pl;
  pl.title = rep.st.name + ": transfer curve over one period at " + format_si(rep.r.frequency_hz, "Hz");
  pl.x = {"generator voltage / its peak", axis_scale::linear, -1.05, 1.05, false};
  pl.top.y = {"output at the load, change from rest / its peak", axis_scale::linear, -1.05, 1.05, false};
  // The closing point is the first one again.
  add_period_curves(rep, pl, [](const model::period_trace& t, std::size_t k, const model::sweep_point& p) {
    return t.generator_v[k < t.phase.size() ? k : 0] / p.drive_vpk;
  });
  add_svg_output(outputs, path, render_svg(pl));
}

nlohmann::json sweep_report_json(const sweep_report& rep) {
  const model::sweep_result& r = rep.r;
  nlohmann::json j;
  j["frequency_hz"] = r.frequency_hz;
  j["requested_frequency_hz"] = r.requested_hz;
  j["oversampling"] = r.oversample;
  j["sample_rate_hz"] = r.sample_rate_hz;
  j["record_samples"] = r.samples_per_record;
  j["record_cycles"] = r.cycles;
  j["numerical_floor_dbc"] = model::numerical_floor_dbc;  // levels below it are null, flagged *_below_floor
  nlohmann::json pts = nlohmann::json::array();
  for (const auto& p : r.points) {
    nlohmann::json hs = nlohmann::json::array();
    for (double h : p.harmonics_dbc) hs.push_back(dbc_or_null(h));
    pts.push_back({{"drive_vpk", p.drive_vpk},
                   {"drive_dbu", base::dbu_from_vpk(p.drive_vpk)},
                   {"output_vpk", p.output_vpk},
                   {"output_dbu", base::dbu_from_vpk(p.output_vpk)},
                   {"gain_db", p.gain_db},
                   {"thd_percent", p.thd_percent},
                   {"thd_db", p.thd_db},
                   {"harmonics_dbc", hs},
                   {"harmonics_below_floor", below_floor_json(p.harmonics_dbc)},
                   {"alias_dbc", dbc_or_null(p.alias_dbc)},
                   {"alias_below_floor", below_numerical_floor(p.alias_dbc)},
                   {"even_odd_ratio", number_or_null(p.even_odd_ratio)},
                   {"dc_shift_v", p.dc_shift_v},
                   {"tap_shift_v", number_or_null(p.tap_shift_v)},
                   {"bias_shift_v", p.bias_shift_v},
                   {"steady_state_converged", p.converged},
                   {"state_change_v", p.state_change_v},
                   {"newton_mean_iterations", p.newton.mean_evaluations()},
                   {"newton_max_iterations", p.newton.max_evaluations},
                   {"newton_failed_samples", p.newton.failed},
                   {"periods_simulated", p.periods_simulated}});
    if (!p.stages.empty()) {
      nlohmann::json sts = nlohmann::json::array();
      for (std::size_t k = 0; k < p.stages.size(); ++k) {
        const model::stage_point& sp = p.stages[k];
        nlohmann::json shs = nlohmann::json::array();
        for (double h : sp.harmonics_dbc) shs.push_back(dbc_or_null(h));
        sts.push_back({{"name", r.stages[k].label},
                       {"output_vpk", sp.output_vpk},
                       {"output_dbu", base::dbu_from_vpk(sp.output_vpk)},
                       {"thd_percent", sp.thd_percent},
                       {"thd_db", sp.thd_db},
                       {"harmonics_dbc", shs},
                       {"harmonics_below_floor", below_floor_json(sp.harmonics_dbc)},
                       {"bias_shift_v", sp.bias_shift_v},
                       {"tap_shift_v", number_or_null(sp.tap_shift_v)},
                       {"clean", sp.clean},
                       {"limit", sp.clean ? nlohmann::json(nullptr) : nlohmann::json(model::swing_limit_text(sp.limit))}});
      }
      pts.back()["stages"] = sts;
      pts.back()["bias_shift_v"] = nullptr;  // a chain: each stage's, above
    }
  }
  j["points"] = pts;
  if (!r.stages.empty()) {
    nlohmann::json sts = nlohmann::json::array();
    for (const auto& st : r.stages)
      sts.push_back({{"name", st.label},
                     {"leaves_clean_at_drive_vpk", st.leaves_clean ? nlohmann::json(st.leaves_clean_drive_vpk) : nlohmann::json(nullptr)},
                     {"last_clean_drive_vpk", st.leaves_clean && st.last_clean_drive_vpk > 0 ? nlohmann::json(st.last_clean_drive_vpk) : nlohmann::json(nullptr)},
                     {"first_unclean_drive_vpk", st.leaves_clean ? nlohmann::json(st.first_unclean_drive_vpk) : nlohmann::json(nullptr)},
                     {"limit", st.leaves_clean ? nlohmann::json(model::swing_limit_text(st.limit)) : nlohmann::json(nullptr)}});
    j["stages"] = sts;
  }
  nlohmann::json cs = nlohmann::json::array();
  for (const auto& c : r.crossings)
    cs.push_back({{"thd_percent", c.thd_percent},
                  {"drive_vpk", c.found ? nlohmann::json(c.drive_vpk) : nlohmann::json(nullptr)},
                  {"output_vpk", c.found ? nlohmann::json(c.output_vpk) : nlohmann::json(nullptr)}});
  j["thd_crossings"] = cs;
  if (rep.max_spl) {
    const model::max_spl_figures& m = *rep.max_spl;
    for (std::size_t i = 0; i < r.points.size(); ++i)
      j["points"][i]["drive_db_spl"] = model::capsule_level_db_spl(rep.st.capsule, r.points[i].drive_vpk);
    auto one = [](const model::drive_search& d, double db) {
      return nlohmann::json{{"found", d.found},
                            {"db_spl", d.found ? nlohmann::json(db) : nlohmann::json(nullptr)},
                            {"drive_vpk", d.found ? nlohmann::json(d.drive_vpk) : nlohmann::json(nullptr)},
                            {"output_vpk", d.found ? nlohmann::json(d.point.output_vpk) : nlohmann::json(nullptr)},
                            {"reason", d.reason}};
    };
    j["max_spl_half_percent"] = one(m.half_percent, m.half_percent_db_spl);
    j["max_spl_1_percent"] = one(m.one_percent, m.one_percent_db_spl);
  }
  j["warnings"] = rep.problems;
  return j;
}

void print_json(const sweep_report& rep, std::ostream& out) { out << json_text(sweep_report_json(rep)) << '\n'; }

void write_csv(const sweep_report& rep, std::ostream& out) {
  out << "drive_vpk,output_vpk,gain_db,thd_percent,alias_dbc,even_odd_ratio,dc_shift_v";
  for (int h = 2; h <= rep.settings.harmonics; ++h) out << ",h" << h << "_dbc";
  // A chain: each stage's output level, THD and whether it stayed clean, stage1_... on.
  for (std::size_t k = 1; k <= rep.r.stages.size(); ++k)
    out << ",stage" << k << "_output_vpk,stage" << k << "_thd_percent,stage" << k << "_clean";
  out << ",tap_shift_v\n";
  out.precision(10);
  for (const auto& p : rep.r.points) {
    // Empty: above the bandwidth, or below the numerical floor (no figure either way).
    out << p.drive_vpk << ',' << p.output_vpk << ',' << p.gain_db << ',' << p.thd_percent << ',';
    if (!below_numerical_floor(p.alias_dbc)) out << p.alias_dbc;
    out << ',' << p.even_odd_ratio << ',' << p.dc_shift_v;
    for (double h : p.harmonics_dbc) {
      out << ',';
      if (std::isfinite(h) && !below_numerical_floor(h)) out << h;
    }
    for (const auto& sp : p.stages) out << ',' << sp.output_vpk << ',' << sp.thd_percent << ',' << (sp.clean ? 1 : 0);
    out << ',';
    if (std::isfinite(p.tap_shift_v)) out << p.tap_shift_v;
    out << '\n';
  }
}

// A chain: each stage's output over the drives, then where each stage leaves its clean region.
void print_stages(const sweep_report& rep, std::ostream& out) {
  const model::sweep_result& r = rep.r;
  const std::size_t ns = r.stages.size();
  out << "\n  at each stage's output (* : the stage left its clean region during the period)\n";
  text_table t(std::vector<text_table::align>(1 + 3 * ns, align::right));
  std::vector<std::string> names{""}, head{"drive"};
  for (const auto& st : r.stages) {
    names.insert(names.end(), {st.label, "", ""});
    head.insert(head.end(), {"level", "THD", "VGS shift"});
  }
  t.add(names);
  t.add(head);
  for (const auto& p : r.points) {
    std::vector<std::string> row{dbu(p.drive_vpk)};
    for (const auto& sp : p.stages) {
      row.push_back(dbu(sp.output_vpk));
      row.push_back(format_number(sp.thd_percent, 3) + " %" + (sp.clean ? "  " : " *"));
      row.push_back(shift(sp.bias_shift_v));
    }
    t.add(row);
  }
  t.write(out);
  const int shown = std::min(5, rep.settings.harmonics);
  if (shown >= 2) {
    out << "\n  H2..H" << shown << " at each stage's output (dBc)\n";
    text_table h(std::vector<text_table::align>(1 + static_cast<std::size_t>(shown - 1) * ns, align::right));
    std::vector<std::string> hn{""}, hh{"drive"};
    for (const auto& st : r.stages)
      for (int k = 2; k <= shown; ++k) {
        hn.push_back(k == 2 ? st.label : "");
        hh.push_back("H" + std::to_string(k));
      }
    h.add(hn);
    h.add(hh);
    for (const auto& p : r.points) {
      std::vector<std::string> row{dbu(p.drive_vpk)};
      for (const auto& sp : p.stages)
        for (int k = 2; k <= shown; ++k) row.push_back(dbc(sp.harmonics_dbc[static_cast<std::size_t>(k - 2)]));
      h.add(row);
    }
    h.write(out);
  }
  out << '\n';
  double lowest = r.points.front().drive_vpk;
  for (const auto& p : r.points) lowest = std::min(lowest, p.drive_vpk);
  for (const auto& st : r.stages) {
    out << "  " << st.label << ": ";
    if (st.leaves_clean && st.first_unclean_drive_vpk == lowest)
      out << "out of its clean region already at the lowest drive, " << format_si(lowest, "Vpk") << " (" << dbu(lowest)
          << "), " << model::swing_limit_text(st.limit) << '\n';
    else if (st.leaves_clean)
      out << "leaves its clean region at about " << format_si(st.leaves_clean_drive_vpk, "Vpk") << " ("
          << dbu(st.leaves_clean_drive_vpk) << ", between the drives " << format_si(st.last_clean_drive_vpk, "Vpk")
          << " and " << format_si(st.first_unclean_drive_vpk, "Vpk") << "), " << model::swing_limit_text(st.limit)
          << '\n';
    else
      out << "clean at every drive of this sweep\n";
  }
  out << '\n';
}

void print_text(const sweep_report& rep, bool verbose, std::ostream& out) {
  const model::sweep_result& r = rep.r;
  const int harmonics = rep.settings.harmonics;
  out << rep.st.name << "\n  sine at " << format_si(r.frequency_hz, "Hz", 5);
  if (std::fabs(r.frequency_hz - r.requested_hz) > 1e-9 * r.requested_hz)
    out << " (asked " << format_si(r.requested_hz, "Hz", 4) << "; snapped so " << r.cycles << " whole cycles fill the record)";
  out << ", " << r.oversample << "x oversampling (" << format_si(r.sample_rate_hz, "Hz")
      << (rep.settings.automatic_oversample && r.oversample < 8 ? ", enough at this frequency" : "") << "), H2..H" << harmonics
      << " up to " << format_si(rep.settings.bandwidth_hz, "Hz") << "\n\n";
  // A chain's VGS shift is each stage's, in the stage table below.
  const bool chain = !r.stages.empty();
  text_table t(std::vector<text_table::align>((chain ? 10 : 11) + (rep.st.has_capsule() ? 1 : 0), align::right));
  // The mean shift at the output tap (the last stage's, which feeds the load): an AC-coupled
  // load's mean cannot move, the drain's or the source's does.
  const bool follower = rep.st.last().topo == model::topology::source_follower;
  const std::string tap_head = follower ? "source shift" : "drain shift";
  std::vector<std::string> main_head{"drive", "", "output", "", "gain", "THD", "", "even/odd", "alias", tap_head, "VGS shift"};
  if (chain) main_head.pop_back();
  const bool capsule = rep.st.has_capsule();
  if (capsule) main_head.insert(main_head.begin(), "pressure");
  t.add(main_head);
  for (const auto& p : r.points) {
    std::vector<std::string> row{dbu(p.drive_vpk), format_si(p.drive_vpk, "Vpk"), dbu(p.output_vpk), format_si(p.output_vpk, "Vpk"),
                                 format_number(p.gain_db, 3) + " dB", format_number(p.thd_percent, 3) + " %",
                                 format_number(p.thd_db, 3) + " dB", ratio_db(p.even_odd_ratio),
                                 dbc(p.alias_dbc) + " dBc",
                                 shift(p.tap_shift_v)};
    if (!chain) row.push_back(shift(p.bias_shift_v));
    if (capsule) row.insert(row.begin(), spl(rep.st, p.drive_vpk));
    t.add(row);
  }
  t.write(out);
  out << (chain ? "\n  harmonics at the load (dBc)\n" : "\n  harmonics (dBc)\n");
  std::vector<text_table::align> al(static_cast<std::size_t>(harmonics), align::right);
  text_table ht(al);
  std::vector<std::string> head{"drive"};
  for (int h = 2; h <= harmonics; ++h) head.push_back("H" + std::to_string(h));
  ht.add(head);
  for (const auto& p : r.points) {
    std::vector<std::string> row{dbu(p.drive_vpk)};
    for (double h : p.harmonics_dbc) row.push_back(dbc(h));
    ht.add(row);
  }
  ht.write(out);
  out << '\n';
  for (const auto& c : r.crossings) {
    out << "  THD " << format_number(c.thd_percent, 2) << " %: ";
    if (c.found && rep.st.has_capsule()) out << spl(rep.st, c.drive_vpk) << ", ";
    if (c.found)
      out << "drive " << format_si(c.drive_vpk, "Vpk") << " (" << dbu(c.drive_vpk) << "), output "
          << format_si(c.output_vpk, "Vpk") << " (" << dbu(c.output_vpk) << ")\n";
    else if (const auto lowest = std::min_element(r.points.begin(), r.points.end(),
                                                  [](const auto& a, const auto& b) { return a.drive_vpk < b.drive_vpk; });
             lowest != r.points.end() && lowest->thd_percent >= c.thd_percent)
      out << "already passed at the lowest drive (" << format_number(lowest->thd_percent, 3) << " % at "
          << dbu(lowest->drive_vpk) << "): start the sweep lower to find it\n";
    else
      out << "not reached in this sweep\n";
  }
  if (rep.max_spl) {
    // Searched on its own, not limited to this sweep's levels.
    const model::max_spl_figures& m = *rep.max_spl;
    for (const auto& [name, d, db] : {std::tuple{"0.5 %", &m.half_percent, m.half_percent_db_spl},
                                      std::tuple{"1 %", &m.one_percent, m.one_percent_db_spl}}) {
      out << "  max SPL at " << name << " THD: ";
      if (d->found)
        out << format_number(db, 4) << " dB SPL (capsule " << format_si(d->drive_vpk, "Vpk") << ", output "
            << format_si(d->point.output_vpk, "Vpk") << ", " << dbu(d->point.output_vpk) << ")\n";
      else
        out << "not found: " << d->reason << '\n';
    }
    out << "  (searched at this frequency over any level, THD over H2..H" << std::max(10, rep.settings.harmonics)
        << "; the capsule's own distortion is not modelled)\n";
  }
  if (!r.stages.empty()) print_stages(rep, out);
  out << "  even/odd: even-harmonic over odd-harmonic power (positive dB: even-dominated, "
         "the square-law signature)\n"
         "  " << tap_head << ": mean " << (follower ? "source" : "drain") << " voltage" << (chain ? " of the last stage" : "")
      << " moved from rest by the drive (an AC-coupled load's mean cannot move);\n"
         "  VGS shift: the bias moved by the drive\n"
         "  (gate conduction charging the coupling capacitor, or the channel squashing)\n"
         "  < -180: below the simulation's numerical floor\n";
  if (verbose) {
    out << "\n  solver\n";
    text_table v({align::right, align::right, align::right, align::right, align::right, align::right, align::right});
    v.add({"drive", "Newton mean", "max", "failed", "shooting", "periods", "state change"});
    for (const auto& p : r.points)
      v.add({dbu(p.drive_vpk), format_number(p.newton.mean_evaluations(), 3), std::to_string(p.newton.max_evaluations),
             std::to_string(p.newton.failed),
             std::to_string(p.shooting_iterations) + (p.used_settling ? " +settle" : ""),
             std::to_string(p.periods_simulated), format_si(p.state_change_v, "V")});
    v.write(out);
  }
}

CLI::App* setup(CLI::App& app, sweep_options& opt, const data_files& data) {
  CLI::App* sub = app.add_subcommand("sweep", "Harmonics and THD against drive level, from the nonlinear simulation");
  add_stage_input(*sub, opt.input, data);
  sub->add_option("--freq", opt.freq, "Test-tone frequency (snapped so the record holds whole cycles)")->capture_default_str();
  sub->add_option("--drive", opt.drive, "Drive levels at the generator, comma separated: 100mVpk,300mVrms,-10dBu")
      ->type_name("L1,L2,...");
  sub->add_option("--from", opt.from, "Lowest drive of a stepped sweep (default -40dBu)")->type_name("LEVEL");
  sub->add_option("--to", opt.to, "Highest drive of a stepped sweep (default +20dBu)")->type_name("LEVEL");
  sub->add_option("--steps", opt.steps, "Drive levels from --from to --to, equal steps in dB")->capture_default_str();
  sub->add_option("--oversample", opt.oversample,
                 "Simulation rate as a multiple of --rate, 1 to 64 (default: chosen by the test frequency, 8 at 1 kHz "
                 "and above at 48 kHz, down to 1 at bass frequencies; see README)")
      ->each([&opt](const std::string&) { opt.oversample_given = true; });
  sub->add_option("--harmonics", opt.harmonics, "Highest harmonic N reported (H2..HN)")->capture_default_str();
  sub->add_option("--bandwidth", opt.bandwidth, "Harmonics above it are not counted (AES17: 20k)")->capture_default_str();
  sub->add_option("--rate", opt.rate, "The audio rate the oversampling multiplies")->capture_default_str();
  sub->add_flag("--json", opt.json, "Machine-readable output");
  sub->add_flag("--csv", opt.csv, "Every point as CSV");
  sub->add_option("--plot", opt.plot, "Write THD and H2..H5 against drive as SVG (a chain: and THD at each stage's output)")->type_name("FILE.svg");
  sub->add_option("--waveform", opt.waveform,
                  "Write one period of the output at up to six of the drives, each scaled to its peak, as SVG")
      ->type_name("FILE.svg");
  sub->add_option("--transfer", opt.transfer,
                  "Write the output against the generator's voltage over one period at up to six of the drives, as SVG")
      ->type_name("FILE.svg");
  sub->add_flag("--verbose", opt.verbose, "Also show Newton and steady-state statistics per point");
  sub->add_option("--threads", opt.threads, "Threads, 0 (one per core) to 256; results do not depend on it")->capture_default_str();
  sub->footer(
      "Examples:\n"
      "  pinchoff sweep presets/bass-booster-9v.toml\n"
      "      -40 dBu to +20 dBu in 25 steps at 1 kHz: where the stage starts to bend and clip\n"
      "  pinchoff sweep presets/clean-preamp-18v.toml --drive 100mVpk,300mVpk,1Vpk --harmonics 5\n"
      "  pinchoff sweep presets/bass-booster-9v.toml --freq 82 --from 10mVpk --to 2Vpk --plot boost.svg\n"
      "  pinchoff sweep presets/bass-booster-9v.toml --set source.resistor=1k --json\n"
      "  pinchoff sweep presets/two-stage-boost-9v.toml --plot chain.svg\n"
      "      a chain: also the level, THD and H2..H5 at each stage's output, and the drive at\n"
      "      which each stage first leaves its clean region\n"
      "Drive is the generator's open-circuit sine (a bare number is volts peak). Each point is\n"
      "the periodic steady state (found by shooting, not by seconds of settling), simulated at\n"
      "the oversampled rate; harmonics are read exactly from whole cycles, and energy between\n"
      "the harmonics within the bandwidth is reported as aliasing.");
  return sub;
}

// The settings as the options give them; `spl_stage`: the stage, read first when a level is
// a sound pressure (its capsule's sensitivity turns it into volts).
model::sweep_settings sweep_settings_of(const sweep_options& opt, const model::stage* spl_stage) {
  model::sweep_settings s;
  s.frequency_hz = option_frequency_hz(opt.freq, "--freq");
  s.drives_vpk = drive_levels(opt, spl_stage);
  s.oversample = opt.oversample;
  s.automatic_oversample = !opt.oversample_given;
  s.harmonics = opt.harmonics;
  s.bandwidth_hz = option_frequency_hz(opt.bandwidth, "--bandwidth");
  s.base_rate_hz = option_frequency_hz(opt.rate, "--rate");
  s.threads = opt.threads;
  s.per_stage = true;  // a chain's stages too; nothing changes for a single stage
  s.taps = true;       // the mean shift at the output tap, what moves under an AC-coupled load
  if (!opt.waveform.empty() || !opt.transfer.empty()) s.keep_records = pictured(s.drives_vpk);
  return s;
}

// Everything from the stage (rep.st) and the settings on.
void analyse_sweep_report(sweep_report& rep, const model::sweep_plan& plan, std::ostream& err) {
  const model::sweep_settings& s = rep.settings;
  // The rest point's cautions first (before the simulation's wait), then anything the
  // solver could not do: said, never hidden.
  rep.problems = rest_point_warnings(rep.st, "sweep", err);
  const std::size_t rest_warnings = rep.problems.size();
  rep.r = model::run_sweep(rep.st, plan);
  if (rep.st.has_capsule()) {
    // A microphone's rating: the pressure at which THD first reaches 0.5 % and 1 %.
    model::compare_settings c;
    c.mode = model::compare_mode::at_drive;
    c.level_vpk = s.drives_vpk.front();
    c.frequency_hz = s.frequency_hz;
    c.harmonics = std::min(s.harmonics, 100);
    c.oversample = s.oversample;
    c.automatic_oversample = s.automatic_oversample;
    c.base_rate_hz = s.base_rate_hz;
    c.bandwidth_hz = s.bandwidth_hz;
    c.threads = s.threads;
    rep.max_spl = model::find_max_spl(rep.st, c);
  }
  for (const auto& p : rep.r.points) {
    if (p.newton.failed > 0)
      rep.problems.push_back("at " + format_si(p.drive_vpk, "V") + " peak, " + std::to_string(p.newton.failed) +
                             " samples did not converge even sub-stepped: treat this point with caution");
    if (!p.converged)
      rep.problems.push_back("at " + format_si(p.drive_vpk, "V") + " peak the steady state was not reached (" +
                             "state still changes " + format_si(p.state_change_v, "V") + " a period)");
  }
  for (std::size_t k = rest_warnings; k < rep.problems.size(); ++k)
    err << "pinchoff sweep: warning: " << rep.problems[k] << '\n';
}

void run(const sweep_options& opt, std::ostream& out, std::ostream& err, base::output_set& outputs) {
  if (opt.json && opt.csv) throw input_error("--json and --csv: choose one");
  sweep_report rep;
  // A sound pressure level needs the capsule's sensitivity: the stage is read first then.
  const bool spl = is_spl_level(opt.drive) || is_spl_level(opt.from) || is_spl_level(opt.to);
  if (spl) rep.st = load_stage(opt.input);
  rep.settings = sweep_settings_of(opt, spl ? &rep.st : nullptr);
  const model::sweep_plan plan = model::plan_sweep(rep.settings);  // the settings' errors before any file is read
  if (!spl) rep.st = load_stage(opt.input);
  analyse_sweep_report(rep, plan, err);
  if (!opt.plot.empty()) write_plot(rep, opt.plot, outputs);
  if (!opt.waveform.empty()) write_waveform_plot(rep, opt.waveform, outputs);
  if (!opt.transfer.empty()) write_transfer_plot(rep, opt.transfer, outputs);
  if (opt.json) return print_json(rep, out);
  if (opt.csv) return write_csv(rep, out);
  print_text(rep, opt.verbose, out);
  if (!opt.plot.empty()) out << "\n  plot written to " << opt.plot << '\n';
  if (!opt.waveform.empty()) out << "  waveform written to " << opt.waveform << '\n';
  if (!opt.transfer.empty()) out << "  transfer curve written to " << opt.transfer << '\n';
}

}  // namespace

nlohmann::json sweep_json(const model::stage& st, std::ostream& err) {
  sweep_report rep;
  rep.settings = sweep_settings_of(sweep_options{}, nullptr);
  const model::sweep_plan plan = model::plan_sweep(rep.settings);
  rep.st = st;
  analyse_sweep_report(rep, plan, err);
  return sweep_report_json(rep);
}

void register_sweep(CLI::App& app, std::vector<command>& commands, const data_files& data) {
  auto opt = std::make_shared<sweep_options>();
  CLI::App* sub = setup(app, *opt, data);
  commands.push_back({sub, [opt](std::ostream& out, std::ostream& err, base::output_set& o) { run(*opt, out, err, o); },
                      {{"frequency_hz", "--freq"},
                       {"drives_vpk", "--drive"},
                       {"oversampling", "--oversample"},
                       {"threads", "--threads"},
                       {"harmonics", "--harmonics"},
                       {"bandwidth_hz", "--bandwidth"},
                       {"base_rate_hz", "--rate"}},
                      [opt] {
                        command_files f;
                        add_stage_inputs(f, opt->input.path, opt->input.devices);
                        if (!opt->plot.empty()) f.outputs.push_back({"--plot", opt->plot});
                        if (!opt->waveform.empty()) f.outputs.push_back({"--waveform", opt->waveform});
                        if (!opt->transfer.empty()) f.outputs.push_back({"--transfer", opt->transfer});
                        return f;
                      }});
}

}  // namespace pinchoff::cli
