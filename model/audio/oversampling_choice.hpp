#pragma once
// Choosing the oversampling factor of a render from its input (render_job::oversample 0,
// which the command line calls auto).
//
// Why a choice is needed: a stage driven into hard clipping has a waveform whose harmonics
// fall slowly (the bass booster at 4 V peak, 10 kHz: H37-H40 at -51 to -61 dBc, H75-H78 at
// -65 to -75 dBc, measured on the periodic steady state at 3.84 and 7.68 MHz, which agree
// within 0.2 dB). Running the engine at fs samples the waveform, so harmonic k of f0 lands
// at |k f0 - m fs| (Nyquist-Shannon; any sampled method does this, whatever its
// integration rule); at 8x 48 kHz, H37-H40 of 10 kHz fold to 14, 4, 6 and 16 kHz. No
// filter after the engine can remove them, so the cure is a higher engine rate.
// (Antiderivative anti-aliasing lowers aliasing at the same rate for a memoryless
// nonlinearity, Parker, Zavalishin & Le Bivic, DAFx-16; it is extended to a class of
// stateful systems by Holters, Applied Sciences 10(1), 20, 2020, and to wave digital
// structures with a multi-port nonlinearity, shown on diode and bipolar-transistor circuits,
// by Albertini, Bernardini & Sarti, JAES 69(7/8), 2021. It has not been worked out for a
// JFET stage in the nodal DK form used here, so it is not used.)
// A light drive or low-pitched material needs no more than 8x (a 1 kHz tone at 4 V: about
// -81 dBc at 8x), so the rate is raised only when the input calls for it.
//
// Method (a rule of this project, announced with its figures in the output):
// 1. Survey the input: its sample peak over all channels, and its upper spectral edge, the
//    frequency below which 99 % of its power lies (Hann-windowed blocks of 4096 frames,
//    power spectra summed over blocks and channels; DC excluded).
// 2. Probe each stage with a sine at the input's peak drive (peak times input_peak_v) and
//    at the edge frequency, clamped to 1 kHz .. min(20 kHz, 0.45 fs): its periodic steady
//    state at 8x, 16x, 32x, 64x (model/engine/steady_state.hpp, the record of model/analysis/sweep.hpp:
//    3 cycles in a length coprime with 3, so folded products fall between harmonic bins),
//    and the non-harmonic power below 20 kHz relative to the fundamental
//    (dsp::analyse_coherent). The steady state at the engine rate gives the same figure as
//    a render through the oversampler (tests/model/audio/test_render.cpp): the half-band filters add
//    nothing at this level.
// 3. The factor is the lowest of those at which every stage's probe is below the target
//    (-80 dBc), or 64x when none is; a silent input takes 8x.
// A sine at the input's peak and at its edge is a pessimistic stand-in for real material
// (a recording seldom has its peak at its highest frequencies), so the choice errs toward
// the higher rate.
#include <atomic>
#include <filesystem>
#include <span>
#include <vector>

#include "model/circuit/network.hpp"
#include "model/circuit/operating_point.hpp"

namespace pinchoff::model {

struct input_survey {
  double sample_peak{0};     ///< largest |sample| over all channels, full scale 1
  double edge_hz{0};         ///< 99 % of the power (DC excluded) lies below it; 0 when silent
  double rate_hz{0};
};

/// Reads the whole file once (streaming, blocks of 4096 frames). Throws as
/// dsp::sound_reader does, and pinchoff::interrupted when `stop` is set (checked every block).
input_survey survey_input(const std::filesystem::path& path, const std::atomic<bool>* stop = nullptr);

/// The same for interleaved samples in memory.
input_survey survey_samples(std::span<const double> interleaved, int channels, double rate_hz);

struct oversampling_probe {
  int factor{0};
  double alias_dbc{0};       ///< worst over the stages
};

struct oversampling_choice {
  int factor{8};
  double target_dbc{-80.0};
  double probe_hz{0};        ///< as simulated (snapped to the record); 0: no probe (silence)
  double probe_vpk{0};       ///< generator volts peak
  std::vector<oversampling_probe> probes;  ///< the factors tried, in order
  bool target_met{true};     ///< false: 64x was still above the target
};

/// One stage as the choice sees it.
struct stage_ref {
  const network* net;
  const operating_point* op;
};

/// Lowest factor in 8, 16, 32, 64 at which the probe (see the file comment) of every stage
/// aliases below target_dbc. drive_vpk >= 0; base_rate_hz > 40 kHz. Throws
/// pinchoff::interrupted when `stop` is set (checked before each probe).
oversampling_choice choose_oversampling(std::span<const stage_ref> stages, double drive_vpk, double edge_hz,
                                        double base_rate_hz, double target_dbc = -80.0,
                                        const std::atomic<bool>* stop = nullptr);

}  // namespace pinchoff::model
