#pragma once
// Small-signal frequency response from the generator to the load: the circuit linearised
// at its operating point with every capacitor (coupling, bypass, reservoir and the
// junction capacitances cgs and cgd, so the Miller effect shows) as its admittance j w C.
#include <complex>
#include <optional>
#include <vector>

#include "model/circuit/network.hpp"
#include "model/circuit/operating_point.hpp"

namespace pinchoff::model {

/// The band the small-signal analyses cover: 1 mHz to 1 GHz. Above it the lumped model
/// (constant junction capacitances, no lead inductance) means nothing and the nodal solve
/// loses all precision; the corner search spans exactly this band.
inline constexpr double lowest_analysis_hz = 1e-3;
inline constexpr double highest_analysis_hz = 1e9;

struct response_point {
  double frequency_hz{};
  std::complex<double> gain;  ///< V(load) / V(generator), real signs
  std::complex<double> zin_ohm;  ///< looking into the stage after the generator impedance (a pickup's own capacitance left out)
};

/// Gain and input impedance at one frequency (> 0).
response_point response_at(const network& net, const operating_point& op, double f_hz);

/// A peak of the response made by an inductor (a pickup's coil) against the capacitance at
/// its output: where |gain| is largest, how far it rises above the mid-band, and the two
/// points either side where it is 3.0103 dB (half power) below the peak.
struct resonance_figures {
  double frequency_hz{};             ///< of the peak, refined to 1e-9 relative
  double peak_gain{};                ///< |gain| there, V/V
  double peak_db{};                  ///< re the mid-band gain, > 0
  std::optional<double> below_hz;    ///< half power below the peak; absent when the gain gets back to the mid-band first (a peak under 3 dB)
  std::optional<double> above_hz;    ///< half power above the peak
};

/// The peak of |V(node) / V(generator)| over the analysis band, re its mid-band value (every
/// capacitor at its admittance, the inductors j w L); empty for a network without an
/// inductor, or when the gain never rises above the mid-band (a resonance damped flat).
std::optional<resonance_figures> find_resonance(const network& net, const operating_point& op, int node);

/// What a source sees of the first stage at audio frequencies: the capacitance of its gate
/// (cgs and cgd with the Miller effect: each junction's current over the gate voltage, at
/// 1 kHz) and the input impedance, every capacitor at its admittance.
struct input_figures {
  double capacitance_f{};               ///< Re[cgs (1 - vs/vg) + cgd (1 - vd/vg)] at 1 kHz
  std::optional<resonance_figures> resonance;  ///< a pickup's peak at the stage's input, loaded by it
  std::complex<double> z_1khz_ohm;      ///< looking into the stage after the source's impedance (a capsule's gate side)
  std::complex<double> z_10khz_ohm;
};
input_figures analyse_input(const network& net, const operating_point& op);

struct corner_crossing {
  double frequency_hz{};
  bool is_low{};  ///< true: the gain rises through -3 dB (a low corner); false: it falls
};

struct response_result {
  double midband_gain{};          ///< signed V/V, capacitors as in the mid-band (a capsule network: at 1 kHz,
                                  ///< the magnitude with the sign of its real part)
  std::vector<corner_crossing> corners;  ///< where |gain| crosses |midband| - 3.0103 dB
  std::optional<resonance_figures> resonance;  ///< a pickup's peak at the load (find_resonance)
  std::vector<response_point> points;
};

/// `points` log-spaced frequencies from f_lo to f_hi (f_lo < f_hi, points >= 2, both
/// within the analysis band). The corners are searched over the whole analysis band
/// whatever the plotted range, and refined by bisection to 1e-9 relative in frequency.
response_result analyse_response(const network& net, const operating_point& op, double f_lo_hz, double f_hi_hz,
                                 int points);

}  // namespace pinchoff::model
