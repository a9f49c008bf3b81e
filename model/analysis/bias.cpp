#include "model/analysis/bias.hpp"

#include <cmath>

#include "base/units.hpp"
#include "model/analysis/response.hpp"
#include "model/analysis/warnings.hpp"

namespace pinchoff::model {

bias_figures analyse_bias(const stage& st, std::optional<double> at_hz) {
  bias_figures b;
  b.net = build_network(st);
  b.op = solve_operating_point(b.net);
  b.ss = analyse_small_signal(b.net, b.op);
  b.head = analyse_headroom(b.net, b.op);
  b.input = analyse_input(b.net, b.op);
  if (st.has_capsule())
    b.output_at_94_db_spl_vrms =
        std::fabs(b.ss.gain_midband) * st.capsule.sensitivity_v_per_pa * base::pa_rms_from_db_spl(94.0);
  b.warnings = operating_warnings(st, b.net, b.op);
  // The pass band: the first falling crossing is the upper point, the last rising one below
  // it the lower.
  const response_result resp = analyse_response(b.net, b.op, 10.0, 1e5, 2);
  for (const corner_crossing& c : resp.corners)
    if (!c.is_low) {
      b.high_3db_hz = c.frequency_hz;
      break;
    }
  for (const corner_crossing& c : resp.corners)
    if (c.is_low && (!b.high_3db_hz || c.frequency_hz < *b.high_3db_hz)) b.low_3db_hz = c.frequency_hz;
  b.at_hz = at_hz;
  if (at_hz) b.reactances = reactances_at(b.net, b.op, *at_hz);
  return b;
}

}  // namespace pinchoff::model
