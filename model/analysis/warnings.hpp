#pragma once
// Cautions about an operating point: device ratings, supply safety, bias that is not a
// linear amplifier bias. Plain sentences, shown by every command that reports a point.
#include <string>
#include <vector>

#include "model/circuit/network.hpp"
#include "model/circuit/operating_point.hpp"
#include "model/circuit/stage.hpp"

namespace pinchoff::model {

/// Current drawn from the supply source (A, magnitude).
double supply_current_a(const network& net, const operating_point& op);

std::vector<std::string> operating_warnings(const stage& s, const network& net, const operating_point& op);

}  // namespace pinchoff::model
