#include "model/analysis/bias.hpp"

#include <cmath>

#include "base/units.hpp"
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
  b.at_hz = at_hz;
  if (at_hz) b.reactances = reactances_at(b.net, b.op, *at_hz);
  return b;
}

}  // namespace pinchoff::model
