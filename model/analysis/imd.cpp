#include "model/analysis/imd.hpp"

#include <cmath>
#include <numbers>

#include "base/error.hpp"
#include "model/circuit/network.hpp"
#include "model/circuit/operating_point.hpp"
#include "model/engine/steady_state.hpp"

namespace pinchoff::model {

imd_result run_imd(const stage& st, const imd_settings& s) {
  if (!(s.level_vpk > 0) || !std::isfinite(s.level_vpk))
    throw setting_error("level_vpk", "the level must be above 0 V, got " + base::format_si(s.level_vpk, "Vpk"));
  if (s.oversample < 1 || s.oversample > 64)
    throw setting_error("oversampling", "oversampling must be 1 to 64, got " + std::to_string(s.oversample));
  imd_result r;
  r.method = s.method;
  r.sample_rate_hz = s.base_rate_hz * s.oversample;
  // Records: the tones are whole multiples of the record's repetition rate fr = fs / M.
  //  SMPTE RP120: 60 Hz and 7 kHz, 4:1  -> fr = 60 Hz, k1 = 1, k2 = 117 (7.02 kHz)
  //  DIN 45403:   250 Hz and 8 kHz, 4:1 -> fr = 250 Hz, k1 = 1, k2 = 32 (8 kHz exactly)
  //  IEC 60268-3: 19 and 20 kHz, 1:1    -> fr = 1 kHz, k1 = 19, k2 = 20
  double fr = 60.0;
  std::size_t k1 = 1, k2 = 117;
  if (s.method == imd_method::din) {
    fr = 250.0;
    k2 = 32;
  } else if (s.method == imd_method::twin_tone) {
    fr = 1000.0;
    k1 = 19;
    k2 = 20;
  }
  r.record_samples = static_cast<int>(std::llround(r.sample_rate_hz / fr));
  const double bin = r.sample_rate_hz / r.record_samples;
  r.f1_hz = k1 * bin;
  r.f2_hz = k2 * bin;
  const double nyquist = 0.5 * s.base_rate_hz;
  const double top = s.method == imd_method::twin_tone ? r.f2_hz : r.f2_hz + s.max_order * r.f1_hz;
  if (top >= nyquist)
    throw setting_error("base_rate_hz", "the " + base::format_si(s.base_rate_hz, "Hz") +
                                            " rate cannot carry tones and products up to " + base::format_si(top, "Hz") +
                                            " (Nyquist " + base::format_si(nyquist, "Hz") + "); use a rate of 48 kHz or more");
  const bool four_to_one = s.method != imd_method::twin_tone;
  r.a1_vpk = four_to_one ? 0.8 * s.level_vpk : 0.5 * s.level_vpk;
  r.a2_vpk = four_to_one ? 0.2 * s.level_vpk : 0.5 * s.level_vpk;

  std::vector<double> drive(static_cast<std::size_t>(r.record_samples));
  const double m = r.record_samples;
  for (std::size_t n = 0; n < drive.size(); ++n)
    drive[n] = r.a1_vpk * std::sin(2.0 * std::numbers::pi * double(k1) * double(n) / m) +
               r.a2_vpk * std::sin(2.0 * std::numbers::pi * double(k2) * double(n) / m);

  const network net = build_network(st);
  const operating_point op = solve_operating_point(net);
  dk_engine eng(net, op, r.sample_rate_hz);
  const steady_state_result ss = periodic_steady_state(eng, drive, {});
  r.converged = ss.converged;
  r.state_change_v = ss.state_change_v;
  r.newton = ss.engine;
  if (s.method == imd_method::twin_tone)
    r.difference = dsp::analyse_difference(ss.output_v, r.sample_rate_hz, k1, k2);
  else
    r.smpte = dsp::analyse_smpte(ss.output_v, r.sample_rate_hz, k1, k2, s.max_order);
  return r;
}

}  // namespace pinchoff::model
