#include "model/analysis/temperature_drift.hpp"

#include <cmath>
#include <exception>

#include "base/error.hpp"
#include "base/units.hpp"
#include "model/analysis/small_signal.hpp"
#include "model/circuit/network.hpp"
#include "model/device/parameter_ranges.hpp"

namespace pinchoff::model {


void validate(const temperature_law& law) {
  if (const std::string m = ranges::vp_drift_problem(law.vp_drift_v_per_k, ranges::drift_frame::n_channel_sign); !m.empty())
    throw setting_error("temperature_law.vp_drift", "the pinch-off drift " + m);
  if (const std::string m = ranges::beta_exponent_problem(law.beta_exponent); !m.empty())
    throw setting_error("temperature_law.beta_exponent", "the exponent of beta's temperature law " + m);
  if (!(law.leakage_doubling_k > 1.0) || !std::isfinite(law.leakage_doubling_k))
    throw setting_error("temperature_law", "the gate leakage's doubling step must be above 1 K, got " +
                                               base::format_number(law.leakage_doubling_k) + " K");
}

const char* source_name(coefficient_source s) noexcept {
  switch (s) {
    case coefficient_source::law_default: return "default";
    case coefficient_source::part: return "part";
    case coefficient_source::setting: return "setting";
  }
  return "default";
}

part_law law_of(const stage& st, int k, const temperature_law_setting& setting) {
  part_law out;
  const jfet_tempco& own = st.part(k).tempco;
  if (setting.vp_drift_v_per_k) {
    out.law.vp_drift_v_per_k = *setting.vp_drift_v_per_k;
    out.vp_drift_from = coefficient_source::setting;
  } else if (own.vp_drift_v_per_k) {
    const double n_frame = polarity_sign(st) * *own.vp_drift_v_per_k;
    const ranges::drift_frame frame = polarity_sign(st) > 0 ? ranges::drift_frame::n_channel_part : ranges::drift_frame::p_channel_part;
    if (const std::string m = ranges::vp_drift_problem(n_frame, frame); !m.empty())
      throw setting_error(stage_key(st, k, "jfet.vp_drift"), stage_key(st, k, "jfet.vp_drift") + " " + m);
    out.law.vp_drift_v_per_k = n_frame;
    out.vp_drift_from = coefficient_source::part;
  }
  if (setting.beta_exponent) {
    out.law.beta_exponent = *setting.beta_exponent;
    out.beta_exponent_from = coefficient_source::setting;
  } else if (own.beta_exponent) {
    if (const std::string m = ranges::beta_exponent_problem(*own.beta_exponent); !m.empty())
      throw setting_error(stage_key(st, k, "jfet.beta_exponent"), stage_key(st, k, "jfet.beta_exponent") + " " + m);
    out.law.beta_exponent = *own.beta_exponent;
    out.beta_exponent_from = coefficient_source::part;
  }
  validate(out.law);  // the setting's values
  return out;
}

namespace {
void move_part(jfet_params& p, polarity pol, double t0, double t, const temperature_law& law) {
  const double sign = pol == polarity::p ? -1.0 : 1.0;  // real = sign * n-frame
  const double vp0 = sign * p.vp_v;                     // n-frame, < 0
  const double beta0 = p.idss_a / (vp0 * vp0);
  const double vp = vp0 + law.vp_drift_v_per_k * (t - t0);
  if (!(vp < 0.0))
    throw input_error("at " + base::format_number(t - 273.15, 4) + " °C the pinch-off voltage would cross 0 V (" +
                      base::format_number(vp0, 4) + " V at the stage's temperature, " +
                      base::format_number(law.vp_drift_v_per_k * 1e3, 3) + " mV/K): the law does not reach so far");
  const double beta = beta0 * std::pow(t / t0, law.beta_exponent);
  p.vp_v = sign * vp;
  p.idss_a = beta * vp * vp;
  p.gate_leakage_a *= std::exp2((t - t0) / law.leakage_doubling_k);
}
}  // namespace

stage at_temperature(const stage& st, double temperature_k, const temperature_law_setting& setting) {
  stage s = st;
  for (int k = 0; k < s.stage_count(); ++k)
    move_part(s.part(k).jfet, s.pol, st.temperature_k, temperature_k, law_of(st, k, setting).law);
  s.temperature_k = temperature_k;
  return s;
}

zero_tc_point zero_tc(const jfet_params& p, polarity pol, double temperature_k, const temperature_law& law) {
  const double sign = pol == polarity::p ? -1.0 : 1.0;
  const double vp = sign * p.vp_v;  // n-frame, < 0
  zero_tc_point z;
  z.vov_v = 2.0 * temperature_k * law.vp_drift_v_per_k / law.beta_exponent;
  z.id_a = p.idss_a / (vp * vp) * z.vov_v * z.vov_v;
  z.vgs_v = sign * (vp + z.vov_v);
  z.below_idss = vp + z.vov_v <= 0.0;
  return z;
}

temperature_drift analyse_temperature_drift(const stage& st, const std::vector<double>& temperatures_k,
                                            const temperature_law_setting& setting) {
  temperature_drift d;
  d.reference_k = st.temperature_k;
  for (int k = 0; k < st.stage_count(); ++k) d.laws.push_back(law_of(st, k, setting));
  auto terminals = [](const network& net, const operating_point& op, int k) {
    const int device = net.stages.empty() ? k : net.stages[static_cast<std::size_t>(k)].jfet;
    return terminals_of(net, op.x, device);
  };
  {
    const network net = build_network(st);
    const operating_point op = solve_operating_point(net);
    for (int k = 0; k < st.stage_count(); ++k) {
      d.rest.push_back(terminals(net, op, k));
      d.zero_tc.push_back(zero_tc(st.part(k).jfet, st.pol, st.temperature_k, d.laws[static_cast<std::size_t>(k)].law));
    }
  }
  for (double t : temperatures_k) {
    drift_point p;
    p.temperature_k = t;
    try {
      const stage s = at_temperature(st, t, setting);
      const network net = build_network(s);
      const operating_point op = solve_operating_point(net);
      for (int k = 0; k < s.stage_count(); ++k) p.stages.push_back(terminals(net, op, k));
      p.gain_db = base::db_from_ratio(std::fabs(analyse_small_signal(net, op).gain_midband));
      p.solved = true;
    } catch (const std::exception& e) {
      p.failure = e.what();
    }
    d.points.push_back(std::move(p));
  }
  return d;
}

}  // namespace pinchoff::model
