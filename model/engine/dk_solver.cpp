#include "model/engine/dk_solver.hpp"

#include <utility>

#include "model/engine/dk_steps.hpp"

namespace pinchoff::model {

dk_solver_base::dk_solver_base(dk_matrices m, const dk_options& opt, const network& net)
    : m_(std::move(m)), opt_(opt), sign_(net.sign), supply_v_(net.supply_v) {
  detail::check_options(opt_);
  phi_.resize(m_.states, m_.states);
  tmp_.resize(m_.states, m_.states);
}

}  // namespace pinchoff::model
