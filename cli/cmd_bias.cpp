// pinchoff bias: operating point, small-signal figures, headroom, corners and warnings.
#include <algorithm>
#include <cmath>
#include <complex>
#include <cstdlib>
#include <memory>
#include <numbers>
#include <optional>
#include <string>
#include <vector>

#include <CLI/CLI.hpp>
#include <nlohmann/json.hpp>

#include "cli/app.hpp"
#include "cli/common.hpp"
#include "cli/report_json.hpp"
#include "cli/text_table.hpp"
#include "base/units.hpp"
#include "model/analysis/bias.hpp"
#include "model/analysis/distortion_headroom.hpp"
#include "model/analysis/noise.hpp"
#include "model/analysis/temperature_drift.hpp"
#include "model/analysis/warnings.hpp"

namespace pinchoff::cli {
namespace {

using base::format_si;
using base::format_number;
using align = text_table::align;

struct bias_options {
  stage_input input;
  std::string at_text;
  bool thd_levels{false};
  std::string temperature;         ///< --temperature LO..HI, °C
  std::string vp_drift_text;           ///< --vp-drift: a plain number in mV/K, or a value with a unit (n-channel frame)
  std::optional<double> beta_exponent;  ///< --beta-exponent; likewise
  bool json{false};
};

struct bias_report {
  model::stage st;
  model::bias_figures b;
  double ein_a_dbu{};          ///< A-weighted EIN, 20 Hz to 20 kHz
  double self_noise_dba_spl{};  ///< a capsule's
  std::optional<model::distortion_headroom> thd;  ///< --thd-levels
  std::optional<model::temperature_drift> drift;  ///< --temperature
};

double celsius(double kelvin) { return kelvin - 273.15; }

// A part's law as the text report writes it, each coefficient with where it came from when
// not the default: "VP -2.2 mV/K, beta ∝ T^-1.5, gate leakage doubling every 10 K".
std::string law_text(const model::part_law& l, model::polarity pol) {
  auto from = [](model::coefficient_source s, const char* option) -> std::string {
    switch (s) {
      case model::coefficient_source::part: return " (the part's own)";
      case model::coefficient_source::setting: return std::string(" (") + option + ")";
      case model::coefficient_source::law_default: break;
    }
    return "";
  };
  return "VP " + format_number(l.law.vp_drift_v_per_k * 1e3, 3) + " mV/K" + (pol == model::polarity::p ? " mirrored" : "") +
         from(l.vp_drift_from, "--vp-drift") + ", beta ∝ T^" + format_number(l.law.beta_exponent, 3) +
         from(l.beta_exponent_from, "--beta-exponent") + ", gate leakage doubling every " +
         format_number(l.law.leakage_doubling_k, 3) + " K";
}

// Where a coefficient came from, as the JSON report names it.
const char* source_json(model::coefficient_source s) {
  return s == model::coefficient_source::setting ? "option" : model::source_name(s);
}

bool all_laws_alike(const model::temperature_drift& d) {
  return std::all_of(d.laws.begin(), d.laws.end(), [&](const model::part_law& l) {
    return law_text(l, model::polarity::n) == law_text(d.laws.front(), model::polarity::n);
  });
}

// --temperature: the rest point at each temperature, and each part's zero-TC current.
void print_drift(const bias_report& r, std::ostream& out) {
  const model::temperature_drift& d = *r.drift;
  const int n = r.st.stage_count();
  out << "\nTemperature drift (the parts' figures at " << format_number(celsius(d.reference_k), 3) << " °C";
  if (all_laws_alike(d)) out << "; " << law_text(d.laws.front(), r.st.pol);
  out << ")\n";
  std::vector<align> cols{align::right};
  std::vector<std::string> head{"°C"};
  for (int k = 0; k < n; ++k) {
    const std::string pre = n > 1 ? "stage" + std::to_string(k + 1) + " " : std::string();
    cols.insert(cols.end(), {align::right, align::right, align::right});
    head.insert(head.end(), {pre + "ID", pre + "VGS", pre + "VD"});
  }
  cols.push_back(align::right);
  head.push_back("gain");
  text_table t(cols);
  t.add(head);
  for (const model::drift_point& p : d.points) {
    std::vector<std::string> row{format_number(celsius(p.temperature_k), 3)};
    if (!p.solved) {
      row.push_back("no operating point: " + p.failure);
      while (row.size() < head.size()) row.push_back("");
      t.add(row);
      continue;
    }
    for (const model::terminal_point& at : p.stages)
      row.insert(row.end(), {format_si(at.id_a, "A", 4), format_si(at.vgs_v, "V", 4), format_si(at.vd_v, "V", 4)});
    row.push_back(format_number(p.gain_db, 4) + " dB");
    t.add(row);
  }
  t.write(out);
  for (int k = 0; k < n; ++k) {
    const model::zero_tc_point& z = d.zero_tc[static_cast<std::size_t>(k)];
    const double id = std::fabs(d.rest[static_cast<std::size_t>(k)].id_a);
    out << "  " << (n > 1 ? "stage " + std::to_string(k + 1) + ": " : std::string());
    if (!all_laws_alike(d)) out << law_text(d.laws[static_cast<std::size_t>(k)], r.st.pol) << "; ";
    out << "zero-TC drain current "
        << format_si(z.id_a, "A") << " (VGS = VP + " << format_si(z.vov_v, "V") << ")";
    if (!z.below_idss)
      out << ", above IDSS: out of reach with the gate reverse-biased; ID rises as the part warms\n";
    else
      out << "; the bias (" << format_si(id, "A") << ") is " << format_number(100.0 * id / z.id_a, 3) << " % of it"
          << (std::fabs(id / z.id_a - 1.0) <= 0.1 ? ", near it: the drain current hardly drifts"
              : id > z.id_a                        ? ": above, ID falls as the part warms"
                                                   : ": below, ID rises as the part warms")
          << "\n";
  }
  out << "  (at a fixed VGS; a source resistor's feedback shrinks the drift of a self-biased stage)\n";
}

nlohmann::json drift_json(const bias_report& r) {
  const model::temperature_drift& d = *r.drift;
  nlohmann::json points = nlohmann::json::array();
  for (const model::drift_point& p : d.points) {
    nlohmann::json stages = nlohmann::json::array();
    for (const model::terminal_point& at : p.stages)
      stages.push_back({{"id_a", at.id_a}, {"vgs_v", at.vgs_v}, {"vd_v", at.vd_v}, {"region", model::region_name(at.region)}});
    points.push_back({{"temperature_c", celsius(p.temperature_k)},
                      {"solved", p.solved},
                      {"failure", p.solved ? nlohmann::json(nullptr) : nlohmann::json(p.failure)},
                      {"stages", stages},
                      {"gain_db", p.solved ? nlohmann::json(p.gain_db) : nlohmann::json(nullptr)}});
  }
  auto law_json = [](const model::part_law& l) {
    return nlohmann::json{{"vp_drift_v_per_k", l.law.vp_drift_v_per_k},
                          {"beta_exponent", l.law.beta_exponent},
                          {"leakage_doubling_k", l.law.leakage_doubling_k},
                          {"vp_drift_from", source_json(l.vp_drift_from)},
                          {"beta_exponent_from", source_json(l.beta_exponent_from)}};
  };
  nlohmann::json ztc = nlohmann::json::array();
  for (std::size_t k = 0; k < d.zero_tc.size(); ++k)
    ztc.push_back({{"stage", k + 1},
                   {"law", law_json(d.laws[k])},
                   {"id_a", d.zero_tc[k].id_a},
                   {"vov_v", d.zero_tc[k].vov_v},
                   {"vgs_v", d.zero_tc[k].vgs_v},
                   {"below_idss", d.zero_tc[k].below_idss},
                   {"bias_id_a", std::fabs(d.rest[k].id_a)}});
  return {{"reference_c", celsius(d.reference_k)},
          {"law", law_json(d.laws.front())},  // the first stage's; each stage's is in zero_tc
          {"points", points},
          {"zero_tc", ztc}};
}

// Headroom as distortion (--thd-levels): the output at 1 %, 3 % and 10 % THD from the
// engine, beside the clean swing; without the option, one line saying how to ask for it.
void print_thd_levels(const bias_report& r, std::ostream& out) {
  if (!r.thd) {
    out << "  (--thd-levels adds the output at 1 %, 3 % and 10 % THD from the engine)\n";
    return;
  }
  const model::distortion_headroom& d = *r.thd;
  out << "  THD from the engine (a " << format_si(d.frequency_hz, "Hz", 4) << " sine, as sweep finds it):\n";
  for (const model::thd_crossing& c : d.levels) {
    out << "    " << format_number(c.thd_percent, 2) << " % ";
    if (c.found)
      out << "at " << format_si(c.output_vpk, "V") << " peak (" << format_number(base::dbu_from_vpk(c.output_vpk), 3)
          << " dBu) at the load, drive " << format_si(c.drive_vpk, "V") << " peak\n";
    else if (d.lowest_drive_thd_percent >= c.thd_percent)
      out << "already passed at the lowest drive swept, " << format_si(d.from_vpk, "V") << " peak ("
          << format_number(d.lowest_drive_thd_percent, 3) << " %)\n";
    else
      out << "not reached up to " << format_si(d.to_vpk, "V") << " peak of drive ("
          << format_number(d.highest_drive_thd_percent, 3) << " %)\n";
  }
  out << "  the clean swing is the hard limit of the transfer curve; THD rises well before it\n";
  if (d.unconverged > 0 || d.newton_failures > 0)
    out << "  ! " << d.unconverged << " of " << d.points << " drives did not settle to a steady state, "
        << d.newton_failures << " engine samples did not converge\n";
}

std::string db_text(double gain) { return format_number(base::db_from_ratio(std::fabs(gain)), 3) + " dB"; }

void print_tail(const bias_report& r, std::ostream& out);

std::string stage_title(const bias_report& r, int k) {
  const model::stage_parts& p = r.st.part(k);
  return "Stage " + std::to_string(k + 1) + (p.label.empty() ? std::string() : ": " + p.label) + " (" +
         topology_name(p.topo) + (p.jfet_class ? ", class " + p.jfet_class->name : std::string()) + ")";
}

std::string stage_name(const bias_report& r, int k) {
  const model::stage_parts& p = r.st.part(k);
  return "stage " + std::to_string(k + 1) + (p.label.empty() ? std::string() : " (" + p.label + ")");
}

void print_chain_text(const bias_report& r, const std::string& path, std::ostream& out) {
  const int n = r.st.stage_count();
  out << r.st.name << "\n  chain of " << n << " stages, " << (r.st.pol == model::polarity::p ? "p" : "n")
      << "-channel, supply " << format_si(r.st.supply.volts_v, "V") << ", draws "
      << format_si(model::supply_current_a(r.b.net, r.b.op), "A") << "  (" << path << ")\n";
  for (int k = 0; k < n; ++k) {
    const model::terminal_point t = model::terminals_of(r.b.net, r.b.op.x, k);
    out << '\n' << stage_title(r, k) << '\n';
    text_table op({align::left, align::right, align::left, align::left, align::right, align::left, align::left,
                   align::right});
    op.add({"VG", format_si(t.vg_v, "V", 4), "", "VGS", format_si(t.vgs_v, "V", 4), "", "ID", format_si(t.id_a, "A", 4)});
    op.add({"VS", format_si(t.vs_v, "V", 4), "", "VDS", format_si(t.vds_v, "V", 4), "", "PD",
            format_si(std::fabs(t.id_a * t.vds_v), "W")});
    op.add({"VD", format_si(t.vd_v, "V", 4), "", "region", model::region_name(t.region), "", "", ""});
    op.write(out);
    if (static_cast<std::size_t>(k) < r.b.ss.stages.size()) {
      const model::stage_small_signal& s = r.b.ss.stages[static_cast<std::size_t>(k)];
      const std::string to = k + 1 < n ? "to stage " + std::to_string(k + 2) + "'s input" : "to the load";
      out << "  gm " << format_si(s.gm_s, "S") << ", "
          << (std::isfinite(s.rds_ohm) ? "rds " + format_si(s.rds_ohm, "Ω") : std::string("rds infinite")) << "; gain "
          << to << " "
          << (std::isfinite(s.gain) ? format_number(s.gain, 4) + " V/V (" + db_text(s.gain) + ")"
                                    : std::string("none (no signal reaches this stage)"))
          << '\n';
    }
  }

  out << (r.st.has_capsule() ? "\nChain (mid-band: 1 kHz through the capsule's divider, coupling and bypass capacitors "
                               "shorted, treble cuts in place)\n"
                             : "\nChain (mid-band: coupling and bypass capacitors shorted, treble cuts open)\n");
  text_table ss({align::left, align::right, align::left});
  ss.add({"gain", format_number(r.b.ss.gain_midband, 4) + " V/V",
          db_text(r.b.ss.gain_midband) + (r.b.ss.gain_midband < 0 ? ", inverting" : "") + ", generator to load"});
  ss.add({"input impedance", format_si(r.b.ss.zin_ohm, "Ω"), "after the generator's own impedance"});
  ss.add({"output impedance", format_si(r.b.ss.zout_ohm, "Ω"), "looking back from the load"});
  ss.write(out);

  out << "\nClip order (drive at the chain's input where each stage leaves its clean region,\n"
         "negative where the input's negative swing gets there first; mid-band, capacitors\n"
         "holding their rest voltages)\n";
  text_table co({align::left, align::left, align::right, align::left});
  for (const model::stage_clip& c : r.b.head.clip_order) {
    if (c.kind == model::swing_limit_kind::none)
      co.add({"", stage_name(r, c.stage), "-", "clean up to " + format_si(r.b.head.search_limit_v, "V") + " drive"});
    else if (c.drive_vpk == 0.0)
      co.add({"", stage_name(r, c.stage), "at rest", model::swing_limit_text(c.kind)});
    else
      co.add({"", stage_name(r, c.stage), format_si(c.drive_sign * c.drive_vpk, "V"), model::swing_limit_text(c.kind)});
  }
  co.write(out);
  if (!r.b.head.clip_order.empty() && r.b.head.clip_order.front().kind != model::swing_limit_kind::none) {
    const model::stage_clip& first = r.b.head.clip_order.front();
    if (first.drive_vpk == 0.0)
      out << "  " << stage_name(r, first.stage) << " is out of its clean region at rest: see the warnings\n";
    else
      out << "  " << stage_name(r, first.stage) << " clips first, at " << format_si(first.drive_vpk, "V") << " peak ("
          << format_number(base::dbu_from_vpk(first.drive_vpk), 3) << " dBu) at the input\n";
  }
  out << "  clean symmetric swing " << format_si(r.b.head.symmetric_output_vpk, "V") << " peak ("
      << format_number(base::dbu_from_vpk(r.b.head.symmetric_output_vpk), 3) << " dBu) at the load\n";
  print_thd_levels(r, out);
}

void print_text(const bias_report& r, const std::string& path, std::ostream& out) {
  if (r.st.is_chain()) {
    print_chain_text(r, path, out);
    print_tail(r, out);
    return;
  }
  const model::terminal_point& t = r.b.op.at;
  out << r.st.name << "\n  " << topology_name(r.st.topo) << ", " << (r.st.pol == model::polarity::p ? "p" : "n")
      << "-channel" << (r.st.jfet_class ? " (class " + r.st.jfet_class->name + ")" : std::string()) << ", supply "
      << format_si(r.st.supply.volts_v, "V") << "  (" << path << ")\n\n";

  out << "Operating point\n";
  text_table op({align::left, align::right, align::left, align::left, align::right});
  op.add({"VG", format_si(t.vg_v, "V", 4), "", "ID", format_si(t.id_a, "A", 4)});
  op.add({"VS", format_si(t.vs_v, "V", 4), "", "PD", format_si(std::fabs(t.id_a * t.vds_v), "W")});
  op.add({"VD", format_si(t.vd_v, "V", 4), "", "region", model::region_name(t.region)});
  op.add({"VGS", format_si(t.vgs_v, "V", 4), "", "supply draws", format_si(model::supply_current_a(r.b.net, r.b.op), "A")});
  op.add({"VDS", format_si(t.vds_v, "V", 4), "", "", ""});
  op.write(out);

  out << (r.st.has_capsule() ? "\nSmall signal (mid-band: 1 kHz through the capsule's divider, coupling and bypass "
                               "capacitors shorted)\n"
          : r.st.has_pickup() ? "\nSmall signal (mid-band: the pass band below the pickup's resonance, its coil's "
                                "resistance alone; coupling and bypass capacitors shorted)\n"
                             : "\nSmall signal (mid-band: coupling and bypass capacitors shorted)\n");
  text_table ss({align::left, align::right, align::left});
  ss.add({"gm", format_si(r.b.ss.gm_s, "S"), ""});
  ss.add({"gds", format_si(r.b.ss.gds_s, "S"),
          std::isfinite(r.b.ss.rds_ohm) ? "rds " + format_si(r.b.ss.rds_ohm, "Ω") : "rds infinite (lambda = 0)"});
  ss.add({"gain", format_number(r.b.ss.gain_midband, 4) + " V/V",
          db_text(r.b.ss.gain_midband) + (r.b.ss.gain_midband < 0 ? ", inverting" : "") + "; ignoring gds " +
              format_number(r.b.ss.gain_midband_no_gds, 4) + " V/V (" + db_text(r.b.ss.gain_midband_no_gds) + ")"});
  ss.add({"input impedance", format_si(r.b.ss.zin_ohm, "Ω"), "after the generator's own impedance"});
  ss.add({"output impedance", format_si(r.b.ss.zout_ohm, "Ω"), "looking back from the load"});
  ss.write(out);

  out << "\nHeadroom (mid-band, capacitors holding their rest voltages)\n";
  text_table hr({align::left, align::right, align::left, align::left});
  auto limit_row = [&](const char* name, const model::swing_limit& l) {
    hr.add({name, format_si(l.output_v, "V"), "at drive " + format_si(l.drive_v, "V"),
            std::string("limit: ") + model::swing_limit_text(l.kind)});
  };
  limit_row("output up", r.b.head.up);
  limit_row("output down", r.b.head.down);
  hr.write(out);
  out << "  clean symmetric swing " << format_si(r.b.head.symmetric_output_vpk, "V") << " peak ("
      << format_number(base::dbu_from_vpk(r.b.head.symmetric_output_vpk), 3) << " dBu) at the load, for drive up to "
      << format_si(r.b.head.clean_drive_vpk, "V") << " peak ("
      << format_number(base::dbu_from_vpk(r.b.head.clean_drive_vpk), 3) << " dBu)\n";
  print_thd_levels(r, out);
  print_tail(r, out);
}

std::string impedance_text(std::complex<double> z) {
  return format_si(std::abs(z), "Ω") + " at " + format_number(std::arg(z) * 180.0 / std::numbers::pi, 3) + "°";
}

// What the source sees of the first stage, and a capsule stage's output at 94 dB SPL.
void print_input(const bias_report& r, std::ostream& out) {
  out << "\nWhat the source sees" << (r.st.is_chain() ? " (stage 1)" : "") << '\n';
  text_table in({align::left, align::right, align::left});
  // Without junction capacitances the model has none at the input: say so, rather than let
  // "0 F" read as a measured property of the stage.
  const bool no_junction_caps = r.st.jfet.cgs_f == 0.0 && r.st.jfet.cgd_f == 0.0;
  in.add({"input capacitance", format_si(r.b.input.capacitance_f, "F"),
          no_junction_caps ? "none modelled: " + model::stage_key(r.st, 0, "jfet.cgs") + " and " +
                                 model::stage_key(r.st, 0, "jfet.cgd") + " not given (a datasheet's Ciss and Crss)"
                           : std::string("cgs and the Miller cgd, at 1 kHz")});
  in.add({"input impedance", impedance_text(r.b.input.z_1khz_ohm), "at 1 kHz"});
  in.add({"", impedance_text(r.b.input.z_10khz_ohm), "at 10 kHz"});
  if (r.st.has_pickup()) {
    const model::pickup_part& pu = r.st.pickup;
    in.add({"pickup", format_si(pu.inductance_h, "H") + ", " + format_si(pu.resistance_ohm, "Ω"),
            format_si(pu.total_capacitance_f(), "F") + " across it" +
                (pu.cable_m > 0 ? " (" + format_number(pu.cable_m, 3) + " m of cable at " +
                                      format_si(pu.cable_f_per_m, "F") + "/m included)"
                                : std::string())});
    if (const auto& res = r.b.input.resonance) {
      in.add({"loaded resonance", format_si(res->frequency_hz, "Hz", 4),
              "peak " + format_number(res->peak_db, 3) + " dB above the pass band, at the stage's input"});
      in.add({"", res->below_hz ? format_si(*res->below_hz, "Hz", 4) + " to " + format_si(*res->above_hz, "Hz", 4)
                                : "up to " + format_si(*res->above_hz, "Hz", 4),
              res->below_hz ? "-3 dB from the peak, either side" : "-3 dB from the peak (under 3 dB high: no lower point)"});
    } else {
      in.add({"loaded resonance", "no peak", "damped flat by the load and the cable"});
    }
  }
  if (r.st.has_capsule()) {
    const double v = r.b.output_at_94_db_spl_vrms;
    in.add({"output at 94 dB SPL", format_number(base::db_from_ratio(v), 3) + " dBV",
            format_number(v * 1e3, 4) + " mV rms at the load, capsule " +
                format_number(r.st.capsule.sensitivity_v_per_pa * 1e3, 4) + " mV/Pa"});
  }
  in.write(out);
}

nlohmann::json input_json(const bias_report& r) {
  auto z = [](std::complex<double> v) {
    return nlohmann::json{{"magnitude_ohm", std::abs(v)}, {"phase_deg", std::arg(v) * 180.0 / std::numbers::pi}};
  };
  nlohmann::json j{{"capacitance_f", r.b.input.capacitance_f},
                   {"impedance_1khz", z(r.b.input.z_1khz_ohm)},
                   {"impedance_10khz", z(r.b.input.z_10khz_ohm)}};
  if (r.st.has_pickup()) {
    nlohmann::json res = nullptr;
    if (const auto& p = r.b.input.resonance) {
      res = {{"frequency_hz", p->frequency_hz}, {"peak_db", p->peak_db}};
      res["below_3db_hz"] = p->below_hz ? nlohmann::json(*p->below_hz) : nlohmann::json(nullptr);
      res["above_3db_hz"] = p->above_hz ? nlohmann::json(*p->above_hz) : nlohmann::json(nullptr);
    }
    j["loaded_resonance"] = res;
    j["pickup_capacitance_f"] = r.st.pickup.total_capacitance_f();
  }
  if (r.st.has_capsule()) {
    j["output_at_94_db_spl_dbv"] = base::db_from_ratio(r.b.output_at_94_db_spl_vrms);
    j["output_at_94_db_spl_vrms"] = r.b.output_at_94_db_spl_vrms;
  }
  return j;
}

// What single stages and chains share: corners, reactances, warnings.
void print_tail(const bias_report& r, std::ostream& out) {
  print_input(r, out);
  if (r.st.has_capsule())
    out << "  self-noise " << format_number(r.self_noise_dba_spl, 3) << " dB(A) SPL (`pinchoff noise` names the parts)\n";
  else
    out << "  EIN " << format_number(r.ein_a_dbu, 4) << " dBu A-weighted, 20 Hz to 20 kHz (`pinchoff noise` names the parts)\n";

  if (!r.b.ss.corners.empty()) {
    out << "\nLow-frequency corners (each capacitor alone, the others shorted)\n";
    text_table ct({align::left, align::right, align::left, align::right});
    for (const model::cap_corner& c : r.b.ss.corners)
      ct.add({c.key, format_si(c.farad, "F"), "sees " + format_si(c.r_seen_ohm, "Ω"), format_si(c.corner_hz, "Hz")});
    ct.write(out);
    out << "  sum of the corners (the hand estimate of the lower -3 dB point): "
        << format_si(r.b.ss.low_corner_estimate_hz, "Hz") << '\n';
  }
  out << "\n-3 dB points of the whole response (every capacitor at once, re the mid-band gain)\n  lower "
      << (r.b.low_3db_hz ? format_si(*r.b.low_3db_hz, "Hz") : std::string("none (flat to DC)")) << ", upper "
      << (r.b.high_3db_hz ? format_si(*r.b.high_3db_hz, "Hz") : std::string("none below 1 GHz")) << '\n';

  if (r.b.at_hz) {
    out << "\nCapacitors at " << format_si(*r.b.at_hz, "Hz") << '\n';
    text_table xt({align::left, align::right, align::left, align::right, align::left});
    for (const model::cap_reactance& c : r.b.reactances) {
      std::string verdict = "a short here";
      if (c.loss_db < -1.0) verdict = "not a short: costs " + format_number(-c.loss_db, 2) + " dB here";
      else if (c.loss_db < -0.1) verdict = "partly a short";
      xt.add({c.key, "Xc " + format_si(c.xc_ohm, "Ω"), "vs " + format_si(c.r_seen_ohm, "Ω"),
              format_number(c.loss_db, 2) + " dB", verdict});
    }
    xt.write(out);
  }

  if (r.b.at_hz)
    out << "  loss: drop of the mid-band gain from that capacitor alone (a bypass capacitor gives a shelf)\n";
  out << "\nWarnings\n";
  if (r.b.warnings.empty()) out << "  none\n";
  for (const std::string& w : r.b.warnings) out << "  ! " << w << '\n';
}

nlohmann::json corner_json(const model::cap_corner& c) {
  return {{"key", c.key}, {"capacitance_f", c.farad}, {"r_seen_ohm", c.r_seen_ohm}, {"corner_hz", c.corner_hz}};
}

nlohmann::json limit_json(const model::swing_limit& l) {
  return {{"output_v", l.output_v}, {"drive_v", l.drive_v}, {"limit", model::swing_limit_text(l.kind)}};
}

nlohmann::json small_signal_json(const model::small_signal_figures& ss) {
  return {{"gm_s", ss.gm_s},
          {"gds_s", ss.gds_s},
          {"rds_ohm", number_or_null(ss.rds_ohm)},
          {"gain_midband_db", base::db_from_ratio(std::fabs(ss.gain_midband))},
          {"gain_midband_v_per_v", ss.gain_midband},
          {"gain_midband_no_gds_db", base::db_from_ratio(std::fabs(ss.gain_midband_no_gds))},
          {"gain_midband_no_gds_v_per_v", ss.gain_midband_no_gds},
          {"zin_ohm", ss.zin_ohm},
          {"zout_ohm", ss.zout_ohm}};
}

void chain_json(const bias_report& r, nlohmann::json& j) {
  nlohmann::json stages = nlohmann::json::array();
  for (int k = 0; k < r.st.stage_count(); ++k) {
    const model::stage_parts& p = r.st.part(k);
    const model::terminal_point t = model::terminals_of(r.b.net, r.b.op.x, k);
    nlohmann::json op = operating_point_json(t);
    op["pd_w"] = std::fabs(t.id_a * t.vds_v);
    nlohmann::json sj = nlohmann::json::object();
    if (static_cast<std::size_t>(k) < r.b.ss.stages.size()) {
      const model::stage_small_signal& s = r.b.ss.stages[static_cast<std::size_t>(k)];
      sj = {{"gm_s", s.gm_s},
            {"gds_s", s.gds_s},
            {"rds_ohm", number_or_null(s.rds_ohm)},
            {"gain_v_per_v", number_or_null(s.gain)},
            {"gain_db", number_or_null(base::db_from_ratio(std::fabs(s.gain)))}};
    }
    stages.push_back({{"name", p.label.empty() ? "stage " + std::to_string(k + 1) : p.label},
                      {"topology", topology_name(p.topo)},
                      {"operating_point", op},
                      {"small_signal", sj}});
  }
  j["stages"] = stages;
  j["chain"] = {{"gain_midband_db", base::db_from_ratio(std::fabs(r.b.ss.gain_midband))},
                {"gain_midband_v_per_v", r.b.ss.gain_midband},
                {"zin_ohm", r.b.ss.zin_ohm},
                {"zout_ohm", r.b.ss.zout_ohm},
                {"supply_current_a", model::supply_current_a(r.b.net, r.b.op)}};
  nlohmann::json order = nlohmann::json::array();
  for (const model::stage_clip& c : r.b.head.clip_order)
    order.push_back({{"stage", c.stage + 1},
                     {"drive_vpk", c.kind == model::swing_limit_kind::none ? nlohmann::json(nullptr) : nlohmann::json(c.drive_vpk)},
                     {"drive_sign", c.drive_sign},
                     {"limit", model::swing_limit_text(c.kind)}});
  j["clip_order"] = order;
}

nlohmann::json bias_report_json(const bias_report& r) {
  nlohmann::json j;
  if (r.st.is_chain()) {
    j["name"] = r.st.name;
    j["polarity"] = r.st.pol == model::polarity::p ? "p" : "n";
    j["supply_v"] = r.st.supply.volts_v;
    chain_json(r, j);
  } else {
    j["stage"] = {{"name", r.st.name},
                  {"topology", topology_name(r.st.topo)},
                  {"polarity", r.st.pol == model::polarity::p ? "p" : "n"},
                  {"supply_v", r.st.supply.volts_v}};
    j["operating_point"] = operating_point_json(r.b.op.at);
    j["operating_point"]["pd_w"] = std::fabs(r.b.op.at.id_a * r.b.op.at.vds_v);
    j["operating_point"]["supply_current_a"] = model::supply_current_a(r.b.net, r.b.op);
    j["small_signal"] = small_signal_json(r.b.ss);
  }
  // What single stages and chains share.
  j["headroom"] = {{"up", limit_json(r.b.head.up)},
                   {"down", limit_json(r.b.head.down)},
                   {"symmetric_output_vpk", r.b.head.symmetric_output_vpk},
                   {"clean_drive_vpk", r.b.head.clean_drive_vpk},
                   {"thd_levels", nullptr}};
  if (r.thd) {
    nlohmann::json levels = nlohmann::json::array();
    for (const model::thd_crossing& c : r.thd->levels)
      levels.push_back({{"thd_percent", c.thd_percent},
                        {"found", c.found},
                        {"output_vpk", c.found ? nlohmann::json(c.output_vpk) : nlohmann::json(nullptr)},
                        {"drive_vpk", c.found ? nlohmann::json(c.drive_vpk) : nlohmann::json(nullptr)},
                        {"passed_at_lowest_drive", !c.found && r.thd->lowest_drive_thd_percent >= c.thd_percent}});
    j["headroom"]["thd_levels"] = levels;
    j["headroom"]["thd_sweep"] = {{"frequency_hz", r.thd->frequency_hz},
                                  {"from_vpk", r.thd->from_vpk},
                                  {"to_vpk", r.thd->to_vpk},
                                  {"points", r.thd->points},
                                  {"oversampling", r.thd->oversample},
                                  {"unconverged", r.thd->unconverged},
                                  {"newton_failures", r.thd->newton_failures}};
  }
  nlohmann::json corners = nlohmann::json::array();
  for (const auto& c : r.b.ss.corners) corners.push_back(corner_json(c));
  j["corners"] = corners;
  j["low_corner_estimate_hz"] = r.b.ss.low_corner_estimate_hz;
  j["input"] = input_json(r);
  j["low_3db_hz"] = r.b.low_3db_hz ? nlohmann::json(*r.b.low_3db_hz) : nlohmann::json(nullptr);
  j["high_3db_hz"] = r.b.high_3db_hz ? nlohmann::json(*r.b.high_3db_hz) : nlohmann::json(nullptr);
  if (r.b.at_hz) {
    nlohmann::json xs = nlohmann::json::array();
    for (const auto& c : r.b.reactances)
      xs.push_back({{"key", c.key},
                    {"frequency_hz", *r.b.at_hz},
                    {"xc_ohm", c.xc_ohm},
                    {"r_seen_ohm", c.r_seen_ohm},
                    {"loss_db", c.loss_db}});
    j["reactances"] = xs;
  }
  j["warnings"] = r.b.warnings;
  j["temperature"] = r.drift ? drift_json(r) : nlohmann::json(nullptr);
  j["noise"] = {{"ein_a_dbu", number_or_null(r.ein_a_dbu)},
                {"self_noise_dba_spl", r.st.has_capsule() ? number_or_null(r.self_noise_dba_spl) : nlohmann::json(nullptr)}};
  return j;
}

void print_json(const bias_report& r, std::ostream& out) { out << json_text(bias_report_json(r)) << '\n'; }

CLI::App* setup(CLI::App& app, bias_options& opt, const data_files& data) {
  CLI::App* sub = app.add_subcommand("bias", "Operating point, gain, impedances, headroom and corners of a stage");
  add_stage_input(*sub, opt.input, data);
  sub->add_option("--at", opt.at_text, "Also show each capacitor's reactance and loss at this frequency, e.g. 1k or 40")
      ->type_name("FREQ");
  sub->add_flag("--thd-levels", opt.thd_levels,
                "Also the output at 1 %, 3 % and 10 % THD (1 kHz) from the engine, beside the clean swing: a sweep of "
                "33 drives, which adds about 0.1 s on one stage and 0.5 to 2 s on a chain");
  CLI::Option* temperature = sub->add_option("--temperature", opt.temperature,
                  "Also the operating point's drift over this range in °C, LO..HI (steps of at most 10 °C; -55 to 150), "
                  "and each part's zero-TC drain current")
      ->type_name("LO..HI");
  sub->add_option("--vp-drift", opt.vp_drift_text,
                  "With --temperature: the pinch-off drift of every part (n-channel sign): a plain number in mV/K "
                  "(-2.2), or a value with its unit (-2.2mV/K, -2.2m); overrides the file's [jfet] vp_drift; default: "
                  "the part's own, else -2.2 mV/K")
      ->type_name("DRIFT")
      ->needs(temperature);
  sub->add_option("--beta-exponent", opt.beta_exponent,
                  "With --temperature: m in beta ∝ T^m (the channel's mobility) for every part; overrides the file's "
                  "[jfet] beta_exponent; default: the part's own, else -1.5")
      ->type_name("M")
      ->needs(temperature);
  sub->add_flag("--json", opt.json, "Machine-readable output (keys carry their unit as a suffix)");
  sub->footer(
      "Examples:\n"
      "  pinchoff bias presets/bass-booster-9v.toml\n"
      "      where the stage biases, its mid-band gain, headroom and corners\n"
      "  pinchoff bias presets/bass-booster-9v.toml --at 41\n"
      "      is every capacitor a short at the low E of a bass (41 Hz)?\n"
      "  pinchoff bias presets/clean-preamp-18v.toml --set drain.resistor=3.9k --set supply.volts=9\n"
      "      try a change without editing the file\n"
      "  pinchoff bias presets/phantom-mic-follower.toml --json\n"
      "  pinchoff bias presets/bass-booster-9v.toml --temperature 0..50\n"
      "      how the bias drifts from a cold stage to a hot one, and where the zero-TC current is\n"
      "  pinchoff bias presets/bass-booster-9v.toml --thd-levels\n"
      "      the clean swing (the hard limit) beside the levels at 1 %, 3 % and 10 % THD\n"
      "  pinchoff bias presets/two-stage-boost-9v.toml --set stage2.source.resistor=1k\n"
      "      a chain: each stage's bias and gain, the chain's gain, and which stage clips first\n"
      "Headroom is found by sweeping the drive slowly with every coupling and bypass capacitor\n"
      "holding its rest voltage: the clean region ends at the triode edge, at cutoff, or when the\n"
      "gate rises to the source voltage.");
  return sub;
}

// --vp-drift's value in V/K: a plain number is in mV/K (as the help says, and as datasheets
// quote the drift); a value with a prefix or a unit is read as the files read vp_drift.
double parse_vp_drift_v_per_k(const std::string& text) {
  const char* b = text.c_str();
  char* e = nullptr;
  const double plain = std::strtod(b, &e);
  if (e != b && *e == '\0' && std::isfinite(plain)) return plain * 1e-3;
  if (const std::optional<double> v = base::try_parse_value(text, base::unit::volt_per_kelvin)) return *v;
  throw input_error("--vp-drift: cannot read '" + text +
                    "': give a plain number in mV/K (-2.2) or a value in V/K with its prefix (-2.2m, -2.2mV/K)");
}

// opt: the command's options (--thd-levels, --temperature); the workbench's analysis takes
// the defaults, as `bias FILE --json` does.
bias_report analyse_bias_report(model::stage st, std::optional<double> at_hz, const bias_options& opt = {}) {
  bias_report r;
  r.st = std::move(st);
  r.b = model::analyse_bias(r.st, at_hz);
  if (opt.thd_levels) r.thd = model::find_distortion_headroom(r.st, r.b.head);
  if (!opt.temperature.empty()) {
    const base::value_range c = base::parse_range(opt.temperature, base::unit::none, "--temperature");
    if (!(c.lo >= -55.0 && c.hi <= 150.0))
      throw input_error("--temperature " + opt.temperature +
                        ": give -55 to 150 °C (the range silicon parts are rated over, common practice)");
    const int n = c.hi > c.lo ? std::max(2, static_cast<int>(std::ceil((c.hi - c.lo) / 10.0 - 1e-9)) + 1) : 1;
    std::vector<double> kelvin;
    for (int i = 0; i < n; ++i) kelvin.push_back(273.15 + c.lo + (n == 1 ? 0.0 : (c.hi - c.lo) * i / (n - 1)));
    model::temperature_law_setting setting;
    if (!opt.vp_drift_text.empty()) setting.vp_drift_v_per_k = parse_vp_drift_v_per_k(opt.vp_drift_text);
    setting.beta_exponent = opt.beta_exponent;
    r.drift = model::analyse_temperature_drift(r.st, kelvin, setting);
  }
  const model::noise_result n = model::analyse_noise(r.b.net, r.b.op, {.points = 2, .band_points_per_decade = 50});
  r.ein_a_dbu = model::dbu_of_rms(n.input_a_v());
  if (r.st.has_capsule()) r.self_noise_dba_spl = model::self_noise_db_spl(n.input_a_v(), r.st.capsule.sensitivity_v_per_pa);
  return r;
}

void run(const bias_options& opt, std::ostream& out) {
  std::optional<double> at_hz;
  if (!opt.at_text.empty()) at_hz = parse_analysis_frequency_hz(opt.at_text, "--at");
  const bias_report r = analyse_bias_report(load_stage(opt.input), at_hz, opt);
  if (opt.json) return print_json(r, out);
  print_text(r, opt.input.path, out);
  if (r.drift) print_drift(r, out);
}

}  // namespace

nlohmann::json bias_json(const model::stage& st) { return bias_report_json(analyse_bias_report(st, std::nullopt)); }

void register_bias(CLI::App& app, std::vector<command>& commands, const data_files& data) {
  auto opt = std::make_shared<bias_options>();
  CLI::App* sub = setup(app, *opt, data);
  commands.push_back({sub, [opt](std::ostream& out, std::ostream&, base::output_set&) { run(*opt, out); },
                      {{"temperature_law", "--vp-drift/--beta-exponent"},
                       {"temperature_law.vp_drift", "--vp-drift"},
                       {"temperature_law.beta_exponent", "--beta-exponent"}}});
}

}  // namespace pinchoff::cli
