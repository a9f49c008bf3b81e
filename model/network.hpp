#pragma once
// The stage as a circuit: numbered nodes (0 = ground), linear parts, two ideal voltage
// sources (the supply and the signal generator) and one JFET. Every analysis builds on
// this: the DC operating point, small-signal figures, the frequency response and the
// time-domain engines.
//
// The network is always the n-channel mirror image: for a p-channel stage every voltage
// and current is negated (Sedra & Smith's complementary-circuit argument, common
// practice), so `supply_v` > 0 and `device.vp_v` < 0. Real value = sign * network value.
#include <string>
#include <string_view>
#include <vector>

#include "model/jfet.hpp"
#include "model/stage.hpp"

namespace pinchoff::model {

enum class cap_role { input_coupling, source_bypass, output_coupling, supply_reservoir, junction_gs, junction_gd };

/// True for the capacitors that are shorts in the mid-band (coupling, bypass, reservoir),
/// false for the junction capacitances (open in the mid-band).
bool is_large_cap(cap_role r) noexcept;

struct net_resistor {
  int a, b;
  double ohm;
  std::string_view key;  ///< stage-file key ("drain.resistor"), or "load" style names
};

struct net_capacitor {
  int a, b;
  double farad;
  cap_role role;
  std::string_view key;
};

struct network {
  int node_count{1};                  ///< including ground, node 0
  std::vector<std::string> node_names;
  std::vector<net_resistor> resistors;
  std::vector<net_capacitor> capacitors;
  int supply_node{0};     ///< ideal supply source from ground: V = supply_v
  double supply_v{0};     ///< mirrored supply voltage, > 0
  int generator_node{0};  ///< ideal generator from ground: V = u (mirrored)
  int input_node{0};      ///< after the generator impedance; stage input impedance seen here
  int drain{0}, gate{0}, source{0};  ///< JFET terminals
  int output_tap{0};      ///< drain (common source) or source terminal (follower)
  int output_node{0};     ///< the node across the load (after the output coupling cap)
  bool has_load{false};
  jfet_params device;     ///< mirrored: vp_v < 0
  double vt_v{0};
  double sign{1.0};       ///< +1 n-channel, -1 p-channel
};

/// Builds the network of a validated stage.
network build_network(const stage& s);

}  // namespace pinchoff::model
