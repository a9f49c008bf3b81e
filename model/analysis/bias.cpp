#include "model/analysis/bias.hpp"

#include "model/analysis/warnings.hpp"

namespace pinchoff::model {

bias_figures analyse_bias(const stage& st, std::optional<double> at_hz) {
  bias_figures b;
  b.net = build_network(st);
  b.op = solve_operating_point(b.net);
  b.ss = analyse_small_signal(b.net, b.op);
  b.head = analyse_headroom(b.net, b.op);
  b.warnings = operating_warnings(st, b.net, b.op);
  b.at_hz = at_hz;
  if (at_hz) b.reactances = reactances_at(b.net, b.op, *at_hz);
  return b;
}

}  // namespace pinchoff::model
