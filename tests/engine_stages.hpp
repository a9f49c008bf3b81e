#pragma once
// Stages for the time-domain engine tests, written here as stage-file text. Scenario
// values of our own (not measured parts); each exercises a different network shape.
#include <array>
#include <string_view>

#include "model/network.hpp"
#include "model/operating_point.hpp"
#include "model/stage_file.hpp"

namespace pinchoff::test {

struct engine_stage {
  const char* name;
  std::string_view toml;
};

// 9 V common-source booster: fully bypassed source resistor, input and output coupling.
inline constexpr std::string_view booster_9v = R"(
name = "booster 9 V"
topology = "common-source"
[supply]
volts = 9
resistance = "100"
capacitance = "47u"
[jfet]
idss = "6m"
vp = -2.0
lambda = 0.01
is = 1e-14
cgs = "3p"
cgd = "1.5p"
[signal]
impedance = "1k"
[gate]
coupling_cap = "100n"
resistor = "1M"
[drain]
resistor = "2.7k"
[source]
resistor = "470"
bypass_cap = "22u"
[output]
coupling_cap = "1u"
load = "100k"
)";

// 18 V common-source: divider bias, source resistor partly bypassed.
inline constexpr std::string_view divider_18v = R"(
name = "divider 18 V"
topology = "common-source"
[supply]
volts = 18
resistance = "220"
capacitance = "100u"
[jfet]
idss = "10m"
vp = -3.0
lambda = 0.005
cgs = "5p"
cgd = "2p"
[signal]
impedance = "600"
[gate]
coupling_cap = "220n"
resistor = "1M"
bias_top = "3.3M"
bias_bottom = "1M"
[drain]
resistor = "3.9k"
[source]
unbypassed = "330"
resistor = "1.5k"
bypass_cap = "47u"
[output]
coupling_cap = "2.2u"
load = "47k"
)";

// Source follower fed like a phantom-powered microphone: 48 V through 6.8 kOhm (one leg of
// IEC 61938 P48), a capsule-like 30 pF source into a 1 GOhm gate resistor.
inline constexpr std::string_view phantom_48v = R"(
name = "phantom follower 48 V"
topology = "source-follower"
[supply]
volts = 48
resistance = "6.8k"
capacitance = "22u"
[jfet]
idss = "3m"
vp = -1.2
lambda = 0.002
cgs = "5p"
cgd = "2p"
[signal]
impedance = "0"
[gate]
coupling_cap = "30p"
resistor = "1G"
[source]
resistor = "2.7k"
[output]
coupling_cap = "4.7u"
load = "1k"
)";

// p-channel common-source on a negative supply, unbypassed part in the source.
inline constexpr std::string_view pchannel_9v = R"(
name = "p-channel 9 V"
topology = "common-source"
[supply]
volts = -9
resistance = "47"
capacitance = "100u"
[jfet]
polarity = "p"
idss = "4m"
vp = 1.8
lambda = 0.008
cgs = "4p"
cgd = "2p"
[signal]
impedance = "2.2k"
[gate]
coupling_cap = "47n"
resistor = "1M"
[drain]
resistor = "2.2k"
[source]
unbypassed = "100"
resistor = "560"
bypass_cap = "10u"
[output]
coupling_cap = "470n"
load = "50k"
)";

inline constexpr std::array<engine_stage, 4> engine_stages{{
    {"booster 9 V", booster_9v},
    {"divider 18 V", divider_18v},
    {"phantom follower 48 V", phantom_48v},
    {"p-channel 9 V", pchannel_9v},
}};

inline model::network network_of(std::string_view toml, const char* name) {
  return model::build_network(model::parse_stage(toml, name));
}

/// A test stage built and at its DC operating point: where every engine test starts.
struct solved_stage {
  model::network net;
  model::operating_point op;
};
inline solved_stage solve(const engine_stage& st) {
  solved_stage s{network_of(st.toml, st.name), {}};
  s.op = model::solve_operating_point(s.net);
  return s;
}

}  // namespace pinchoff::test
