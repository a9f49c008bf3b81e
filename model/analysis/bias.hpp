#pragma once
// Everything known about a stage at rest, in one call: its network and operating point, the
// small-signal figures, the headroom, the cautions, and (when asked) each capacitor's
// reactance at one frequency.
#include <optional>
#include <string>
#include <vector>

#include "model/analysis/headroom.hpp"
#include "model/analysis/response.hpp"
#include "model/analysis/small_signal.hpp"
#include "model/circuit/network.hpp"
#include "model/circuit/operating_point.hpp"
#include "model/circuit/stage.hpp"

namespace pinchoff::model {

struct bias_figures {
  network net;
  operating_point op;
  small_signal_figures ss;
  headroom_figures head;
  input_figures input;                     ///< what the source sees of the first stage
  /// A capsule stage: the output at 94 dB SPL (1.002 Pa), V rms, the capsule's sensitivity
  /// times the pressure times the mid-band (1 kHz) gain; 0 for another source.
  double output_at_94_db_spl_vrms{0};
  std::vector<std::string> warnings;       ///< operating_warnings (model/analysis/warnings.hpp)
  /// The -3 dB points of the whole response (every capacitor at once, junction capacitances
  /// too), re the mid-band gain; absent when the gain does not cross it in the analysis band.
  std::optional<double> low_3db_hz, high_3db_hz;
  std::optional<double> at_hz;             ///< the frequency of `reactances`, when asked
  std::vector<cap_reactance> reactances;   ///< at at_hz
};

/// `at_hz`, when given, is a frequency above 0 (the reactances are those of reactances_at).
bias_figures analyse_bias(const stage& st, std::optional<double> at_hz = {});

}  // namespace pinchoff::model
