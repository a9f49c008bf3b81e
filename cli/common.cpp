#include "cli/common.hpp"

#include "base/csv.hpp"
#include "model/device/fit.hpp"

#include <cmath>

#include <optional>
#include <sstream>

#include "base/error.hpp"
#include "base/units.hpp"
#include "cli/option_text.hpp"
#include "model/analysis/response.hpp"
#include "model/analysis/sweep.hpp"
#include "model/circuit/network.hpp"
#include "model/circuit/stage_file.hpp"
#include "model/analysis/warnings.hpp"

namespace pinchoff::cli {

void add_stage_input(CLI::App& sub, stage_input& in, const data_files& data) {
  in.devices = data.devices;
  sub.add_option("FILE", in.path, "Stage file (TOML); see README \"Stage file\"")->required();
  sub.add_option("--set", in.overrides,
                 "Override a stage-file value, KEY=VALUE (repeatable), e.g. --set drain.resistor=4.7k")
      ->type_name("KEY=VALUE")
      ->expected(1)
      ->allow_extra_args(false)  // one value per --set, so a FILE after it stays positional
      ->multi_option_policy(CLI::MultiOptionPolicy::TakeAll);  // and any number of --set
}

model::stage load_stage(const stage_input& in) { return load_stage(in.path, in.overrides, in.devices); }

model::stage load_stage(const std::string& path, std::span<const std::string> set_args,
                        const std::filesystem::path& devices) {
  std::vector<model::stage_override> overrides;
  for (const std::string& a : set_args) overrides.push_back(parse_set(a));
  try {
    return model::read_stage_file(path, overrides, devices);
  } catch (const setting_error& e) {
    throw input_error("--set " + e.field() + ": " + e.what());
  }
}

std::vector<std::string> rest_point_warnings(const model::stage& st, const std::string& command, std::ostream& err,
                                             const std::string& label) {
  const model::network net = model::build_network(st);
  return rest_point_warnings(st, net, model::solve_operating_point(net), command, err, label);
}

std::vector<std::string> rest_point_warnings(const model::stage& st, const model::network& net,
                                             const model::operating_point& op, const std::string& command,
                                             std::ostream& err, const std::string& label) {
  std::vector<std::string> w = model::operating_warnings(st, net, op);
  if (!label.empty())
    for (std::string& m : w) m = label + ": " + m;
  for (const std::string& m : w) err << "pinchoff " << command << ": warning: " << m << '\n';
  return w;
}

std::string json_text(const nlohmann::json& j) { return j.dump(2, ' ', false, nlohmann::json::error_handler_t::replace); }

nlohmann::json number_or_null(double v) { return std::isfinite(v) ? nlohmann::json(v) : nlohmann::json(nullptr); }

bool below_numerical_floor(double dbc) noexcept { return std::isfinite(dbc) && dbc < model::numerical_floor_dbc; }

nlohmann::json dbc_or_null(double dbc) { return below_numerical_floor(dbc) ? nlohmann::json(nullptr) : number_or_null(dbc); }

nlohmann::json below_floor_json(std::span<const double> dbc) {
  nlohmann::json flags = nlohmann::json::array();
  for (double v : dbc) flags.push_back(below_numerical_floor(v));
  return flags;
}

nlohmann::json operating_point_json(const model::terminal_point& t) {
  return {{"vg_v", t.vg_v},   {"vs_v", t.vs_v},   {"vd_v", t.vd_v}, {"vgs_v", t.vgs_v},
          {"vds_v", t.vds_v}, {"id_a", t.id_a},   {"ig_a", t.ig_a}, {"region", model::region_name(t.region)}};
}

const char* topology_name(model::topology t) noexcept {
  return t == model::topology::common_source ? "common-source" : "source-follower";
}

double option_frequency_hz(const std::string& text, const std::string& option) {
  try {
    return base::parse_frequency_hz(text);
  } catch (const input_error& e) {
    throw input_error(option + ": " + e.what());
  }
}

bool is_spl_level(const std::string& text) {
  std::stringstream ss(text);
  std::string item;
  while (std::getline(ss, item, ',')) {
    try {
      if (base::parse_spl_db(item)) return true;
    } catch (const input_error&) {
      return true;  // written as one: its message comes when it is read
    }
  }
  return false;
}

double option_level_vpk(const std::string& text, const std::string& option, const model::stage* source) {
  try {
    if (const std::optional<double> spl = base::parse_spl_db(text)) {
      if (source == nullptr)
        throw input_error("'" + text + "' is a sound pressure level, which this option does not take; give a voltage "
                          "level such as -10dBu");
      if (!source->has_capsule())
        throw input_error("'" + text + "' is a sound pressure level, which needs a capsule source ([signal] kind = "
                          "\"capsule\" with its sensitivity) to become a voltage; give a voltage level such as -10dBu");
      return model::capsule_drive_vpk(source->capsule, *spl);
    }
    return base::parse_level_vpk(text);
  } catch (const input_error& e) {
    throw input_error(option + ": " + e.what());
  }
}

double parse_analysis_frequency_hz(const std::string& text, const std::string& option) {
  const double f = option_frequency_hz(text, option);
  if (f < model::lowest_analysis_hz || f > model::highest_analysis_hz)
    throw input_error(option + " " + text + ": the small-signal analysis covers " +
                      base::format_si(model::lowest_analysis_hz, "Hz") + " to " +
                      base::format_si(model::highest_analysis_hz, "Hz") +
                      " (beyond that the lumped model with constant junction capacitances means nothing)");
  return f;
}

}  // namespace pinchoff::cli

#include "base/error.hpp"
#include "base/units.hpp"

namespace pinchoff::cli {

void add_spread_options(CLI::App& sub, spread_input& in) {
  sub.add_option("--idss", in.idss, "IDSS range of the batch, e.g. 2m..8m")->type_name("LO..HI");
  sub.add_option("--vp", in.vp, "Pinch-off voltage range, either order, e.g. -0.8..-3")->type_name("A..B");
  sub.add_option("--class", in.device_class,
                 "Take the IDSS and VP ranges from a device class (presets/devices.toml: low-cutoff, general-purpose, "
                 "high-current); a stage that names a class uses its ranges by default")
      ->type_name("NAME");
  sub.add_option("--correlation", in.correlation, "Correlation of IDSS with |VP| (real parts: strongly positive)")
      ->capture_default_str();
  sub.add_option("--tolerance", in.tolerance, "Resistor tolerance, e.g. 5% (applied to every resistor)")->type_name("PCT");
  sub.add_option("--supply", in.supply, "Supply range, e.g. 7..9.6 for a draining 9 V battery")->type_name("LO..HI");
  sub.add_option("--distribution", in.distribution, "uniform within the ranges, or normal (range = +-3 sigma)")
      ->capture_default_str()
      ->check(CLI::IsMember({"uniform", "normal"}));
  sub.add_option("--runs", in.runs,
                 "Number of Monte Carlo runs, 1 to " + std::to_string(model::max_spread_runs) +
                     " (that many pin the yield to within 0.16 %; each run takes about 0.5 ms and 1 KB)")
      ->capture_default_str()
      ->each([&in](const std::string&) { in.runs_given = true; });
  sub.add_option("--parts", in.parts,
                 "Measured parts in place of IDSS and VP ranges: a parts table (`fit --csv`) or a bag's readings. Every "
                 "part once; with --runs, drawn from the bag")
      ->type_name("PARTS.csv");
  sub.add_option("--seed", in.seed, "Seed: the same seed gives the same runs")->capture_default_str();
  sub.add_option("--threads", in.threads, "Threads, 0 (one per core) to 256; results do not depend on it")->capture_default_str();
}

void map_spread_fields(std::map<std::string, std::string, std::less<>>& options_of_fields) {
  options_of_fields.insert({{"idss_a", "--idss"},
                            {"vp_v", "--vp"},
                            {"supply_v", "--supply"},
                            {"correlation", "--correlation"},
                            {"resistor_tolerance", "--tolerance"},
                            {"runs", "--runs"},
                            {"threads", "--threads"},
                            {"parts", "--parts"}});
}

model::spread_settings spread_settings_from(const spread_input& in, const model::stage& st, const stage_input& stage) {
  model::spread_settings s;
  // Measured parts take the place of the class's ranges (a range given as well is refused).
  std::optional<model::device_class> cls = in.parts.empty() ? st.jfet_class : std::nullopt;
  if (!in.device_class.empty()) cls = model::find_device_class(in.device_class, model::device_file_for(stage.path, stage.devices));
  if (cls) {
    const double sign = model::polarity_sign(st);
    s.idss_a = cls->idss_a;
    s.vp_v = base::value_range{std::min(sign * cls->vp_v.lo, sign * cls->vp_v.hi), std::max(sign * cls->vp_v.lo, sign * cls->vp_v.hi)};
    s.class_name = cls->name;
  }
  if (!in.idss.empty()) s.idss_a = base::parse_range(in.idss, base::unit::ampere, "--idss");
  if (!in.vp.empty()) s.vp_v = base::parse_range(in.vp, base::unit::volt, "--vp", true);
  if (!in.supply.empty()) s.supply_v = base::parse_range(in.supply, base::unit::volt, "--supply", true);
  if (!in.tolerance.empty()) s.resistor_tolerance = base::parse_fraction(in.tolerance, "--tolerance");
  s.correlation = in.correlation;
  s.distribution = in.distribution == "normal" ? model::spread_distribution::normal : model::spread_distribution::uniform;
  s.runs = in.runs;
  s.seed = in.seed;
  s.threads = in.threads;
  if (!in.parts.empty()) {
    const base::csv_table t = base::read_csv_file(in.parts, model::bench_readings_file_kind, model::bench_layout());
    s.parts = model::parts_for_spread(model::read_parts(t), st);
    s.parts_source = t.source;
    s.parts_drawn = in.runs_given;
    if (!in.runs_given) s.runs = static_cast<int>(s.parts.size());
  }
  return s;
}

std::string describe_spread(const model::spread_settings& s, const model::stage& st) {
  using base::format_si;
  std::string d = std::to_string(s.runs) + " runs, seed " + std::to_string(s.seed) + ": ";
  auto range = [](const base::value_range& r, const char* u) { return format_si(r.lo, u) + " to " + format_si(r.hi, u); };
  if (!s.class_name.empty()) d += "class " + s.class_name + ", ";
  if (!s.parts.empty()) {
    d += (s.parts_drawn ? "parts drawn from the " : "every part once of the ") + std::to_string(s.parts.size()) +
         " in " + s.parts_source;
  } else {
    d += "IDSS " + (s.idss_a ? range(*s.idss_a, "A") : format_si(st.jfet.idss_a, "A") + " fixed");
    d += ", VP " + (s.vp_v ? range(*s.vp_v, "V") : format_si(st.jfet.vp_v, "V") + " fixed");
    if (s.idss_a && s.vp_v) d += " (correlation " + base::format_number(s.correlation, 2) + ")";
  }
  d += s.distribution == model::spread_distribution::uniform ? ", uniform" : ", normal";
  d += ", resistors " + (s.resistor_tolerance > 0 ? "±" + base::format_number(100 * s.resistor_tolerance, 2) + " %" : std::string("exact"));
  d += ", supply " + (s.supply_v ? range(*s.supply_v, "V") : format_si(st.supply.volts_v, "V"));
  return d;
}

}  // namespace pinchoff::cli
