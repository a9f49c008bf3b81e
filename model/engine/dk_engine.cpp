#include "model/engine/dk_engine.hpp"

#include <algorithm>

#include "base/error.hpp"

namespace pinchoff::model {

std::variant<single_solver, general_solver> dk_engine::make_solver(const network& net, const operating_point& op,
                                                                   double sample_rate_hz, const dk_options& opt) {
  dk_matrices m = discretise(net, sample_rate_hz);
  if (m.devices == 1) return std::variant<single_solver, general_solver>(std::in_place_type<single_solver>, net, op, std::move(m), opt);
  return std::variant<single_solver, general_solver>(std::in_place_type<general_solver>, net, op, std::move(m), opt);
}

dk_engine::dk_engine(const network& net, const operating_point& op, double sample_rate_hz, const dk_options& opt)
    : solver_(make_solver(net, op, sample_rate_hz, opt)), sign_(net.sign) {}

dk_engine::dk_engine(const network& net, double sample_rate_hz, const dk_options& opt)
    : dk_engine(net, solve_operating_point(net), sample_rate_hz, opt) {}

double dk_engine::process(double generator_v) noexcept {
  double y = 0.0;
  if (single_solver* s = std::get_if<single_solver>(&solver_))
    s->process(&generator_v, &y, 1);
  else
    std::get_if<general_solver>(&solver_)->process(&generator_v, &y, 1);
  return y;
}

void dk_engine::process(std::span<const double> in, std::span<double> out) noexcept {
  const std::size_t n = std::min(in.size(), out.size());
  // In place (in and out the same span) is fine: sample k is read before it is written.
  if (single_solver* s = std::get_if<single_solver>(&solver_))
    s->process(in.data(), out.data(), n);
  else
    std::get_if<general_solver>(&solver_)->process(in.data(), out.data(), n);
}

double dk_engine::process_tracked(double generator_v, Eigen::MatrixXd& sensitivity) {
  const double y = process(generator_v);
  std::visit([&sensitivity](auto& s) { s.track(sensitivity); }, solver_);
  return y;
}

void dk_engine::reset() {
  std::visit([](auto& s) { s.reset(); }, solver_);
}

void dk_engine::set_state(const Eigen::Ref<const Eigen::VectorXd>& x) {
  if (x.size() != states()) throw internal_error("dk_engine::set_state: wrong number of states");
  std::visit([&x](auto& s) { s.set_state(x); }, solver_);
}

}  // namespace pinchoff::model
