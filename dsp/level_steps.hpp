#pragma once
// The steps of a level staircase in a recording: the plateaus where a test tone holds one
// level (the staircases dsp/tone.hpp makes, or any recording of such a staircase), found
// from the rms of short blocks, so a recording of any length is read in flat memory.
//
// Method (blocks of step_block_seconds, 50 ms):
// - A block is silent when its rms is below silent_rms (-140 dBFS, under any converter's
//   noise; common practice): it belongs to no step.
// - Runs: from the first block that is not silent, blocks are added while each lies within
//   tolerance_db of the mean level (dB) of the run so far; the first block that does not
//   ends the run and starts the next. So two steps are told apart when their levels differ
//   by more than twice the tolerance (1 dB with the default 0.5 dB).
// - A run of at least min_step_blocks is a step; one block is dropped at each end of it as
//   a margin, so the ramp between two steps (tone's raised-cosine fades, up to a block
//   long) and the settling right after it are left out.
// Why 50 ms: the rms of a block of a sine of frequency f over T seconds ripples by at most
// 1 / (4 pi f T) of its power (the sin^2 average over a part of a cycle), under +-0.3 dB
// from 25 Hz on at 50 ms (exactly 0 at 20 Hz, a whole cycle), well inside the tolerance;
// a tone's fade of up to 25 ms spoils at most the block it falls in and one more.
//
// A step is where the level holds; whether it holds a tone (and not noise at the
// recorder's floor) is for the analysis of each step to say.
#include <cstddef>
#include <span>
#include <vector>

#include "dsp/windowed_analysis.hpp"

namespace pinchoff::dsp {

inline constexpr double step_block_seconds = 0.05;
/// rms below this (-140 dBFS re a full-scale sine's rms) is silence.
inline constexpr double silent_rms = 1e-7;

struct step_settings {
  double tolerance_db{0.5};      ///< a block belongs to the run within this of its mean level
  std::size_t min_step_blocks{6};  ///< 0.3 s: shorter plateaus are not steps (the analysed part is 0.2 s)
};

/// The block length at fs_hz: step_block_seconds, at least one sample.
std::size_t step_block_samples(double fs_hz);

/// The steps, as [begin, end) in samples of the record, in time order. `rms` holds the rms
/// of each whole block of `block` samples from the record's start.
std::vector<sample_range> find_level_steps(std::span<const double> rms, std::size_t block,
                                           const step_settings& settings = {});

/// The same from the samples themselves.
std::vector<sample_range> find_level_steps(std::span<const double> samples, double fs_hz,
                                           const step_settings& settings = {});

/// The rms of each whole block of `block` samples.
std::vector<double> block_rms(std::span<const double> samples, std::size_t block);

/// How far the level moves within a record: the loudest block's level minus the quietest's,
/// in dB, over whole blocks of step_block_samples (silent blocks count as silent_rms). 0 for
/// a record shorter than two blocks. A steady tone reads under 0.6 dB from 25 Hz on (the
/// ripple above); a span that holds several levels of a staircase reads their distance.
double level_spread_db(std::span<const double> samples, double fs_hz);

}  // namespace pinchoff::dsp
