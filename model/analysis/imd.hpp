#pragma once
// Two-tone intermodulation of a stage from the periodic steady state of the nonlinear
// engine. The tones are snapped so the record holds whole cycles of both.
#include <string>

#include "dsp/intermod.hpp"
#include "model/engine/dk_stats.hpp"
#include "model/circuit/stage.hpp"

namespace pinchoff::model {

enum class imd_method { smpte, din, twin_tone };

struct imd_settings {
  imd_method method{imd_method::smpte};
  /// Peak of the composite drive at the generator (the two tones' peaks added): SMPTE and
  /// DIN split it 4:1 (low:high), twin-tone 1:1.
  double level_vpk{0.3};
  int oversample{8};                ///< 1..64
  double base_rate_hz{48000.0};
  int max_order{4};
};

struct imd_result {
  imd_method method{};
  double sample_rate_hz{};
  int record_samples{};
  double f1_hz{}, f2_hz{};          ///< as simulated
  double a1_vpk{}, a2_vpk{};        ///< tone peaks at the generator
  dsp::smpte_imd smpte;             ///< SMPTE and DIN
  dsp::difference_imd difference;   ///< twin-tone
  bool converged{false};
  double state_change_v{};
  dk_stats newton;
};

/// Throws setting_error naming the field ("level_vpk", "oversampling", "base_rate_hz": a
/// rate whose Nyquist limit the tones and their products do not fit under).
imd_result run_imd(const stage& st, const imd_settings& s);

}  // namespace pinchoff::model
