#pragma once
// The stage as a circuit: numbered nodes (0 = ground), linear parts, two ideal voltage
// sources (the supply and the signal generator) and a list of JFETs (one for a stage read
// from a stage file; chains of stages built in code list more). Every analysis builds on
// this: the DC operating point, small-signal figures, the frequency response and the
// time-domain engines.
//
// The network is always the n-channel mirror image: for a p-channel stage every voltage
// and current is negated (Sedra & Smith's complementary-circuit argument, common
// practice), so `supply_v` > 0 and every `device.vp_v` < 0. Real value = sign * network
// value. The sign is one per network: all of its JFETs have the same polarity.
#include <string>
#include <string_view>
#include <vector>

#include "model/device/jfet.hpp"
#include "model/circuit/stage.hpp"

namespace pinchoff::model {

enum class cap_role {
  input_coupling, source_bypass, output_coupling, supply_reservoir, junction_gs, junction_gd,
  interstage_coupling,  ///< a series capacitor in a chain's `between`
  rail_reservoir,       ///< a chain stage's rail filter capacitor
  treble_cut,           ///< a shunt capacitor in `between`, or across a drain resistor: open in the mid-band
  capsule,              ///< a condenser capsule's own capacitance, from the generator to the gate: never shorted
  capsule_stray,        ///< stray capacitance from the capsule's gate to ground
  pickup_load,          ///< a pickup's own and its cable's capacitance, across its output: open in the mid-band
  bootstrap,            ///< a follower's source to its gate resistor's foot: a short in the mid-band
};

/// What an inductor is in the circuit.
enum class ind_role {
  pickup_coil,  ///< a magnetic pickup's coil, in series with its winding resistance
};

/// The frequency a capsule network's mid-band is taken at: 1 kHz, where a microphone's
/// sensitivity is stated (IEC 60268-4). There the capsule, its stray capacitance and the
/// junction capacitances are their admittances (the capacitive divider at the gate is the
/// signal path), and the coupling, bypass and reservoir capacitors are shorts.
inline constexpr double capsule_midband_hz = 1000.0;

/// True for the reservoirs of the supply and of the stage rails (left out of the corners).
bool is_reservoir(cap_role r) noexcept;

/// True for the capacitors that are shorts in the mid-band (coupling, bypass, reservoir),
/// false for the junction capacitances, the treble cuts (open in the mid-band) and a
/// capsule's capacitances (admittances at `network::midband_hz`).
bool is_large_cap(cap_role r) noexcept;

struct net_resistor {
  int a, b;
  double ohm;
  std::string key;  ///< stage-file key ("drain.resistor", "stage2.drain.resistor")
};

struct net_capacitor {
  int a, b;
  double farad;
  cap_role role;
  std::string key;
};

/// An inductor: a short at DC (its winding resistance is a resistor of its own, in series),
/// j w L in the small-signal solve, a trapezoidal companion in the time domain.
struct net_inductor {
  int a, b;
  double henry;
  ind_role role;
  std::string key;
};

/// One JFET of the network: its terminals and its parameters (mirrored: vp_v < 0).
struct net_jfet {
  int drain{0}, gate{0}, source{0};
  jfet_params device;
};

/// One stage of the network: its JFET and the nodes a chain's analyses report on.
struct net_stage {
  int jfet{0};            ///< index into network::jfets
  int input{0};           ///< where the stage's signal arrives: before its gate coupling cap (the generator side
                          ///< for the first stage's impedance, the end of `between` for the others)
  int output_tap{0};      ///< drain (common source) or source (follower)
  int output{0};          ///< after the output coupling capacitor (the tap when there is none)
  int rail{0};            ///< the node its drain resistor and bias divider hang from
  std::string label;      ///< "stage 2" or the stage's own name
};

struct network {
  int node_count{1};                  ///< including ground, node 0
  std::vector<std::string> node_names;
  std::vector<net_resistor> resistors;
  std::vector<net_capacitor> capacitors;
  std::vector<net_inductor> inductors;
  int supply_node{0};     ///< ideal supply source from ground: V = supply_v
  double supply_v{0};     ///< mirrored supply voltage, > 0
  int generator_node{0};  ///< ideal generator from ground: V = u (mirrored)
  int input_node{0};      ///< after the generator impedance (a capsule's gate side, a pickup's output); stage input impedance seen here
  /// The JFETs, at least one. The solvers (nodal, DC point, reference transient, DK
  /// engine) handle any number; the stage analyses built on one stage (small signal,
  /// headroom, tune) use the first.
  std::vector<net_jfet> jfets;
  int output_tap{0};      ///< drain (common source) or source terminal (follower) of the last stage's JFET
  int output_node{0};     ///< the node across the load (after the output coupling cap)
  bool has_load{false};
  double vt_v{0};         ///< thermal voltage, the same for every JFET
  double sign{1.0};       ///< +1 n-channel, -1 p-channel (every JFET of the network)
  /// 0: the mid-band has every small capacitor open (a resistive source). A capsule
  /// network's is `capsule_midband_hz`: its small capacitors are admittances there.
  double midband_hz{0};
  std::string source;     ///< the stage file it was built from, for messages (may be empty)
  /// The stages in signal order (one for a single stage; empty for a network built in code
  /// without them).
  std::vector<net_stage> stages;

  /// The first JFET: the stage's device for the analyses of a single stage.
  const net_jfet& jfet() const { return jfets.front(); }
  net_jfet& jfet() { return jfets.front(); }
  int devices() const noexcept { return static_cast<int>(jfets.size()); }
};

/// Builds the network of a validated stage.
network build_network(const stage& s);

/// For a message when the network's matrix cannot be solved: the two parts whose
/// conductances lie furthest apart (1/R; 2C/T for a capacitor and T/(2L) for an inductor at
/// the sample period T, both left out at DC when `sample_rate_hz` is 0), with their keys and values:
/// "gate.resistor (100 GΩ) against gate.coupling_cap (1 F)".
std::string widest_parts(const network& net, double sample_rate_hz);

/// "FILE: " for messages about the network, or nothing when it was built in code.
std::string source_prefix(const network& net);

}  // namespace pinchoff::model
