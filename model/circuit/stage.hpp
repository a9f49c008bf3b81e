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

struct supply_part {
  double volts_v{};           ///< > 0 for n-channel, < 0 for p-channel
  double resistance_ohm{0};   ///< series resistance; 0 = none
  double capacitance_f{0};    ///< reservoir capacitor after it; 0 = none
};

struct gate_part {
  double coupling_cap_f{0};   ///< 0 = DC-coupled input
  double resistor_ohm{0};     ///< gate to bias node; 0 = gate tied straight to the bias node
  double bias_top_ohm{0};     ///< divider from the supply; 0 = no divider (bias node = ground)
  double bias_bottom_ohm{0};
};

struct source_part {
  double unbypassed_ohm{0};   ///< in series, never bypassed; 0 = none
  double resistor_ohm{0};     ///< the part bypass_cap shunts; 0 = source grounded
  double bypass_cap_f{0};     ///< 0 = none
};

struct output_part {
  double coupling_cap_f{0};   ///< 0 = DC-coupled output
  double load_ohm{0};         ///< 0 = no load (open)
};

struct stage {
  std::string name;
  std::string file;           ///< the file it was read from, for messages; empty for a stage built in code
  topology topo{topology::common_source};
  polarity pol{polarity::n};
  double temperature_k{default_temperature_k};
  supply_part supply;
  jfet_params jfet;           ///< in real signs (vp > 0 for p-channel)
  jfet_ratings ratings;
  std::optional<device_class> jfet_class;  ///< when the file names `class`: its ranges (n-channel signs)
  double signal_impedance_ohm{0};  ///< generator series resistance; 0 = ideal source
  gate_part gate;
  double drain_resistor_ohm{0};    ///< 0 = drain straight to the supply (source follower)
  source_part source;
  output_part output;
};

/// +1 for n-channel, -1 for p-channel: real value = sign * mirrored n-channel value.
inline double polarity_sign(const stage& s) noexcept { return s.pol == polarity::p ? -1.0 : 1.0; }

/// The resistors that tuning may solve for and a spread varies, as stage-file keys
/// ("source.resistor").
std::vector<std::string_view> adjustable_resistor_keys() noexcept;
/// The field behind an adjustable key, or nullptr when the key is not one.
double* resistor_field(stage& s, std::string_view key) noexcept;

/// Checks that the stage can have a DC operating point at all: the gate has a DC path,
/// values are in range. Throws input_error naming the key. (The file reader calls it.)
void validate(const stage& s);

}  // namespace pinchoff::model
