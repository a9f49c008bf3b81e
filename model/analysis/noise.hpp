#pragma once
// Noise of a stage or chain at its DC operating point. Every part is a noise current source
// across its terminals, uncorrelated with the others:
// - each resistor: thermal noise, 4 k T / R (Johnson 1928, Nyquist 1928); the load is the
//   next equipment's and is not counted; the signal source's own resistance (a key under
//   `signal.`) is counted and marked as the source's;
// - each JFET's channel, drain to source: thermal noise 4 k T gd0 (2/3)(1 + a + a^2)/(1 + a),
//   a = 1 - vds/vdsat, gd0 = 2 beta (vgs - vp)(1 + lambda vds) (van der Ziel, Proc. IRE 50,
//   1962, long-channel form): (8/3) k T gm in saturation (a = 0), 4 k T gd0 at vds = 0 (the
//   channel as a resistor); none in cutoff;
// - each channel's flicker noise K |id|^a / f (`flicker_k`, `flicker_exponent`);
// - gate shot noise 2 q |I| of each gate junction's DC current, the gate leakage's added on
//   the gate-source side (leakage as datasheets give it, drain shorted to source).
// Temperature: the network's thermal voltage (the stage's `temperature`).
// Each source's transfer to the load (and to each stage's output) comes from one adjoint
// (transposed) solve of the linearised network per frequency, every capacitor at its
// admittance, the generator at 0 V (the source's impedance in place), the supply an AC ground.
#include <complex>
#include <string>
#include <vector>

#include "model/circuit/network.hpp"
#include "model/circuit/operating_point.hpp"

namespace pinchoff::model {

enum class noise_mechanism { thermal, channel, flicker, gate_shot };
/// "thermal", "channel", "flicker", "gate shot"
const char* noise_mechanism_name(noise_mechanism m) noexcept;

/// One noise current source between nodes a and b: density white + flicker / f (A^2/Hz).
struct noise_source {
  std::string part;        ///< stage-file key ("gate.resistor", "stage2.jfet")
  noise_mechanism mechanism{noise_mechanism::thermal};
  int a{0}, b{0};
  double white_a2_hz{};
  double flicker_a2{};     ///< A^2 (the density at 1 Hz of the 1/f part)
  int stage{-1};           ///< stage index; -1 for shared parts (supply, signal source)
  bool of_source{false};   ///< the signal source's own resistance
  double density(double f_hz) const noexcept { return white_a2_hz + flicker_a2 / f_hz; }
};

/// Every noise source of the network at its operating point.
std::vector<noise_source> noise_sources(const network& net, const operating_point& op);

/// The stage's temperature, from the network's thermal voltage (K).
double noise_temperature_k(const network& net) noexcept;

struct noise_settings {
  double from_hz{10.0}, to_hz{100e3};  ///< the density sweep
  int points{200};
  double band_lo_hz{20.0}, band_hi_hz{20e3};  ///< integration band
  int band_points_per_decade{200};
};

/// The noise at one frequency.
struct noise_point {
  double frequency_hz{};
  std::complex<double> gain;          ///< generator (the source's open-circuit voltage) to load
  double output_v2_hz{};              ///< total at the load, V^2/Hz
  double input_v2_hz{};               ///< referred to the source's open-circuit voltage: output / |gain|^2
  std::vector<double> source_v2_hz;   ///< each source's share at the load, as noise_result::sources
  std::vector<double> stage_output_v2_hz;  ///< total at each stage's output node
};
/// The noise at one frequency (sources from noise_sources).
noise_point noise_at(const network& net, const operating_point& op, const std::vector<noise_source>& sources, double f_hz);

/// Band integrals, V^2.
struct band_power {
  double unweighted{}, a{}, itu468{};
};

/// One part's share (its mechanisms grouped: a JFET's channel, flicker and gate noise are
/// separate rows).
struct noise_contribution {
  std::string part;
  noise_mechanism mechanism{noise_mechanism::thermal};
  int stage{-1};
  bool of_source{false};
  double share_percent_100{}, share_percent_1k{}, share_percent_10k{};  ///< of the load density there
  double share_percent{}, share_percent_a{};  ///< of the band totals, unweighted and A-weighted
  band_power power;
};

struct noise_stage_figures {
  std::string label;
  band_power at_output;     ///< the total at the stage's output node, V^2
  double gain_1k_abs{};     ///< generator to the stage's output node at 1 kHz
  double share_percent{}, share_percent_a{};  ///< of the load's totals, from the stage's own parts
};

struct noise_result {
  double temperature_k{};
  double band_lo_hz{}, band_hi_hz{};
  std::vector<noise_source> sources;
  std::vector<noise_point> density;      ///< the sweep
  band_power output;                     ///< at the load, V^2
  band_power from_source;                ///< the part of it from the source's own resistance
  bool has_source_resistance{false};
  double gain_1k_abs{};                  ///< |generator to load| at 1 kHz, what band figures are referred by
  double spot_noise_figure_1k_db{};      ///< NaN without a source resistance
  double noise_figure_db{};              ///< integrated, unweighted; NaN without a source resistance
  std::vector<noise_contribution> contributions;  ///< sorted by their share of the A-weighted total
  std::vector<noise_stage_figures> stages;

  double output_v() const noexcept;
  double output_a_v() const noexcept;
  double output_468_v() const noexcept;
  double input_v() const noexcept;       ///< output_v / gain_1k_abs
  double input_a_v() const noexcept;
  double input_468_v() const noexcept;
};

/// Sweeps and integrates. Throws setting_error("frequencies", ...) or ("band", ...) for a
/// range that is not increasing and positive, ("points", ...) for fewer than 2 points.
noise_result analyse_noise(const network& net, const operating_point& op, const noise_settings& s);

/// Equivalent sound pressure level of a capsule's A-weighted self-noise (IEC 60268-4 usage):
/// 94 + 20 log10(vn / sensitivity), vn in V rms referred to the capsule's open-circuit
/// voltage, sensitivity in V/Pa (94 dB SPL is 1 Pa).
double self_noise_db_spl(double vn_rms, double sensitivity_v_per_pa) noexcept;

/// 20 log10(v / 0.7746 V) and 20 log10(v / 1 V) of an rms voltage.
double dbu_of_rms(double v_rms) noexcept;
double dbv_of_rms(double v_rms) noexcept;

}  // namespace pinchoff::model
