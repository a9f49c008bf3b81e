#pragma once
// A single JFET gain stage as described by a stage file (see README, "Stage file").
// Values are in SI units and in real (bench) signs: a p-channel stage has a negative
// supply and a positive pinch-off voltage. A value of 0 means "absent" where the field
// says so.
#include <string>
#include <string_view>
#include <vector>

#include <optional>

#include "model/device/device_class.hpp"
#include "model/device/jfet.hpp"

namespace pinchoff::model {

enum class topology { common_source, source_follower };
enum class polarity { n, p };

/// A phantom feed of IEC 61938 (`[supply] phantom`): its voltage, the feed resistance of
/// both legs together (a microphone draws from both in parallel) and the most current the
/// standard lets it draw.
struct phantom_feed {
  std::string_view name;      ///< "P48", "P24", "P12"
  double volts_v{};
  double resistance_ohm{};    ///< both legs in parallel: half of one leg's
  double max_current_a{};
};
/// The feeds of IEC 61938 (from memory: P48 48 V, 6.8 kΩ a leg, 10 mA; P24 24 V, 1.2 kΩ a
/// leg, 10 mA; P12 12 V, 680 Ω a leg, 15 mA), or nullptr for another name.
const phantom_feed* find_phantom(std::string_view name) noexcept;

struct supply_part {
  double volts_v{};           ///< > 0 for n-channel, < 0 for p-channel
  double resistance_ohm{0};   ///< series resistance; 0 = none
  double capacitance_f{0};    ///< reservoir capacitor after it; 0 = none
  const phantom_feed* phantom{nullptr};  ///< when the file names a phantom feed (which set volts and resistance)
};

struct gate_part {
  double coupling_cap_f{0};   ///< 0 = DC-coupled input
  double resistor_ohm{0};     ///< gate to bias node; 0 = gate tied straight to the bias node
  double bias_top_ohm{0};     ///< divider from the supply; 0 = no divider (bias node = ground)
  double bias_bottom_ohm{0};
  /// A source follower's bootstrap: a capacitor from the source to the gate resistor's foot
  /// (the bias node), so the foot follows the gate and the resistor carries less signal
  /// current; 0 = none.
  double bootstrap_cap_f{0};
  /// A common-source stage's drain-to-gate resistor (combination bias, shunt feedback);
  /// 0 = none.
  double feedback_ohm{0};
};

struct source_part {
  double unbypassed_ohm{0};   ///< in series, never bypassed; 0 = none
  double resistor_ohm{0};     ///< the part bypass_cap shunts; 0 = source grounded
  double bypass_cap_f{0};     ///< 0 = none
};

struct output_part {
  double coupling_cap_f{0};   ///< 0 = DC-coupled output
  double load_ohm{0};         ///< 0 = no load (open); in a chain, only the last stage has one
};

/// A stage's own supply filter in a chain: an RC from the shared supply to the stage's rail.
struct rail_part {
  double resistance_ohm{0};   ///< 0 = the stage is fed straight from the supply
  double capacitance_f{0};    ///< reservoir after it; 0 = none
};

/// One element of the network between two stages of a chain, in signal order.
enum class between_kind { series, series_cap, shunt, shunt_cap, pot };
/// A potentiometer's law. Linear: the wiper-to-ground part is x R. Log ("audio", common
/// practice: 10 % of the resistance at half rotation): two straight segments through (0, 0),
/// (0.5, 0.1) and (1, 1), the usual construction of audio-taper tracks.
enum class pot_taper { linear, log };
struct between_part {
  between_kind kind{between_kind::series};
  double value{0};            ///< ohm, or farad for series_cap and shunt_cap
  double position{0};         ///< pot only: knob rotation 0..1
  pot_taper taper{pot_taper::linear};
};
/// The fraction of a pot's resistance between its wiper and ground at a knob position.
double pot_fraction(pot_taper taper, double position) noexcept;

/// What drives the first stage (`[signal] kind`).
enum class source_kind {
  resistive,  ///< a voltage behind `signal.impedance` (the default)
  capsule,    ///< a condenser capsule: its open-circuit voltage behind its capacitance, straight to the gate
  pickup,     ///< a magnetic pickup and its cable: the coil's open-circuit voltage behind its resistance and
              ///< inductance, with the pickup's and the cable's capacitance across its output
};

/// A condenser capsule at the first stage's gate.
struct capsule_part {
  double capacitance_f{0};          ///< the capsule's own capacitance, in series with its open-circuit voltage
  double stray_f{0};                ///< from the gate to ground (wiring, the capsule's mount); 0 = none
  double sensitivity_v_per_pa{0};   ///< open-circuit voltage per pascal at 1 kHz (rms per rms)
};
/// The capsule's open-circuit sine peak at a sound pressure level (dB SPL, 0 dB = 20 µPa rms),
/// and the level whose open-circuit peak is `drive_vpk`: sensitivity x pressure, as peak volts.
double capsule_drive_vpk(const capsule_part& c, double level_db_spl) noexcept;
double capsule_level_db_spl(const capsule_part& c, double drive_vpk) noexcept;

/// A magnetic pickup and its cable, driving the first stage. The open-circuit voltage (the
/// generator) is the coil's, behind its winding resistance and its inductance in series; the
/// pickup's own capacitance and the cable's lie from the pickup's output to ground.
struct pickup_part {
  double resistance_ohm{0};         ///< the coil's DC resistance
  double inductance_h{0};           ///< the coil's inductance
  double capacitance_f{0};          ///< from the output to ground: the pickup's own, plus a cable given here
  double cable_m{0};                ///< a cable's length, metres; 0 = none
  double cable_f_per_m{100e-12};    ///< the cable's capacitance per metre (100 pF/m: common practice)
  /// Everything from the pickup's output to ground: its capacitance and the cable's.
  double total_capacitance_f() const noexcept { return capacitance_f + cable_m * cable_f_per_m; }
};

/// The parts of one JFET stage: the whole file for a single stage, one `[[stage]]` of a chain.
struct stage_parts {
  std::string label;          ///< a chain stage's `name` ("input buffer"); empty: "stage N"
  topology topo{topology::common_source};
  polarity pol{polarity::n};
  jfet_params jfet;           ///< in real signs (vp > 0 for p-channel)
  jfet_ratings ratings;
  jfet_tempco tempco;         ///< the part's own temperature coefficients, when the file (or its class) gives them
  std::optional<device_class> jfet_class;  ///< when the file names `class`: its ranges (n-channel signs)
  gate_part gate;
  double drain_resistor_ohm{0};    ///< 0 = drain straight to the supply (source follower)
  double drain_shunt_cap_f{0};     ///< across the drain resistor (a treble cut); 0 = none
  source_part source;
  output_part output;
  rail_part rail;                  ///< chains only
  std::vector<between_part> between;  ///< chains only, stages after the first: from the previous stage's output
};

/// A design as read from a stage file: one JFET stage, or a chain of up to six. Its own
/// stage_parts are the first (or only) stage; `later` holds the stages after it. The supply,
/// the signal and the temperature are shared by the whole chain; the load is the last
/// stage's `output.load`.
struct stage : stage_parts {
  std::string name;
  std::string file;           ///< the file it was read from, for messages; empty for a stage built in code
  double temperature_k{default_temperature_k};
  supply_part supply;
  double signal_impedance_ohm{0};  ///< generator series resistance; 0 = ideal source (resistive source only)
  source_kind signal_kind{source_kind::resistive};
  capsule_part capsule;            ///< when signal_kind is capsule
  pickup_part pickup;              ///< when signal_kind is pickup
  std::vector<stage_parts> later;  ///< a chain's second and later stages; empty for a single stage
  /// Values the file gave that are allowed but unusual (a JFET outside the plausible range of
  /// small-signal parts, a likely unit slip), located "file:line:col: ..."; every command
  /// shows them with the rest point's cautions.
  std::vector<std::string> file_warnings;

  int stage_count() const noexcept { return 1 + static_cast<int>(later.size()); }
  bool is_chain() const noexcept { return !later.empty(); }
  bool has_capsule() const noexcept { return signal_kind == source_kind::capsule; }
  bool has_pickup() const noexcept { return signal_kind == source_kind::pickup; }
  /// Stage k, counted from 0.
  const stage_parts& part(int k) const { return k == 0 ? *this : later.at(static_cast<std::size_t>(k - 1)); }
  stage_parts& part(int k) { return k == 0 ? *this : later.at(static_cast<std::size_t>(k - 1)); }
  const stage_parts& last() const { return part(stage_count() - 1); }
  stage_parts& last() { return part(stage_count() - 1); }
};

/// A chain holds two to six stages.
inline constexpr int max_chain_stages = 6;

/// The name of a stage's key as the user writes it: "drain.resistor" in a single-stage file,
/// "stage2.drain.resistor" in a chain (k counted from 0). Shared keys (supply, signal,
/// output.load) are never prefixed.
std::string stage_key(const stage& s, int k, std::string_view key);

/// +1 for n-channel, -1 for p-channel: real value = sign * mirrored n-channel value.
inline double polarity_sign(const stage& s) noexcept { return s.pol == polarity::p ? -1.0 : 1.0; }

/// The resistors that tuning may solve for and a spread varies, as stage-file keys: for a
/// single stage "source.resistor", ...; for a chain each stage's ("stage2.source.resistor")
/// and the shared ones ("supply.resistance", "output.load").
std::vector<std::string> adjustable_resistor_keys(const stage& s);
/// The field behind an adjustable key, or nullptr when the key is not one.
double* resistor_field(stage& s, std::string_view key) noexcept;

/// What is wrong with a stage's gate bootstrap or feedback resistor, or empty: each belongs
/// to one topology and needs the parts it connects to. `key` is set to the offending key
/// ("gate.bootstrap", "gate.feedback"); `prefix` ("stage2.") goes before the keys a message names.
std::string gate_extras_problem(const stage_parts& p, const std::string& prefix, std::string& key);

/// Checks that the stage can have a DC operating point at all: the gate has a DC path,
/// values are in range. Throws input_error naming the key. (The file reader calls it.)
void validate(const stage& s);

}  // namespace pinchoff::model
