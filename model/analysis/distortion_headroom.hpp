#pragma once
// Headroom as distortion: the output levels at which the stage's THD reaches 1 %, 3 % and
// 10 % (at 1 kHz, H2..H10 within 20 kHz), from the nonlinear engine, beside the clean swing
// of headroom.hpp. The clean swing is the hard limit of the mid-band transfer curve (the
// triode edge, cutoff or gate conduction); a square-law channel bends well before it, so
// a stage reaches 1 % THD at a fraction of that swing.
//
// The levels are found as `sweep` finds them: one sweep (sweep.hpp) over drives spaced
// evenly in log from clean_drive / 100 to 30 clean_drive (the clean drive of headroom.hpp;
// 1 mV to 10 V peak when it has none), each crossing interpolated log-log between the two
// drives around it (sweep_result::crossings). A level already passed at the lowest drive,
// or not reached at the highest, is said so, not guessed.
#include <vector>

#include "model/analysis/headroom.hpp"
#include "model/analysis/sweep.hpp"
#include "model/circuit/stage.hpp"

namespace pinchoff::model {

struct distortion_headroom {
  double frequency_hz{};                ///< as simulated (snapped)
  double from_vpk{}, to_vpk{};          ///< the drives swept, peak at the generator
  int points{};
  int oversample{};
  std::vector<thd_crossing> levels;     ///< 1 %, 3 %, 10 %
  double lowest_drive_thd_percent{};    ///< THD at the lowest drive: a level below it was passed already
  double highest_drive_thd_percent{};   ///< THD at the highest drive: a level above it is not reached
  int unconverged{};                    ///< points whose steady state did not converge
  long long newton_failures{};          ///< engine samples that did not converge, summed
};

/// The sweep behind it: `points` drives (at least 2) around `head`'s clean drive.
sweep_settings distortion_headroom_settings(const headroom_figures& head, int points = 33);

/// Runs that sweep on `st` (head: analyse_headroom of the same stage).
distortion_headroom find_distortion_headroom(const stage& st, const headroom_figures& head, int points = 33);

}  // namespace pinchoff::model
