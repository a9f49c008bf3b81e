#pragma once
// Harmonic analysis of a coherent record: one that holds exactly `cycles` whole periods of
// the fundamental, as the sweep produces from a periodic steady state. Every harmonic n
// then falls exactly on DFT bin n * cycles, so no window is used and nothing leaks.
//
// Inputs: samples in volts (any unit; results carry the same unit), fs_hz > 0, cycles >= 1
// with 2 * cycles < samples.size() (the fundamental below Nyquist).
// Frequencies: fundamental_hz = cycles * fs_hz / samples.size().
//
// Conventions of the result:
// - Amplitudes are peak values: a bin k strictly between DC and Nyquist reads 2|X[k]|/n.
// - Harmonic n (2..N) is counted when n * fundamental_hz <= bandwidth_hz and its bin lies
//   strictly below Nyquist (a line on the Nyquist bin cannot be told from its alias).
//   Counted harmonics are always H2..H`highest_harmonic`; the rest are NaN in both vectors.
// - THD = sqrt(sum of counted Hn^2) / H1 (ratio to the fundamental, IEC 61000-2-2 usage);
//   THD_R = THD / sqrt(1 + THD^2) (ratio to the total rms of fundamental plus harmonics).
// - Levels in dB are floored at db_floor (-300 dB) so that an exactly zero quantity gives
//   a finite number; a fundamental of exactly zero makes every relative figure NaN.
// - alias_dbc: total power on all non-harmonic bins from bin 1 up to the bandwidth (bins
//   k <= bandwidth_hz * n / fs_hz, and below Nyquist), relative to the fundamental's power.
//   Bins on multiples of `cycles` are harmonics, also beyond N, and are never counted here.
//   A product folded from above Nyquist lands on a harmonic bin whenever fs/f0 is an
//   integer, so choose the record so that n / cycles is not an integer to see aliasing.
// - largest_spur_dbc: the strongest single non-harmonic bin in that range.
// - even_odd_ratio: (sum of even Hn^2) / (sum of odd Hn^2) over counted harmonics, n >= 2
//   (the fundamental excluded). +infinity when the odd sum is zero and the even sum is not;
//   NaN when both are zero.
#include <cstddef>
#include <span>
#include <vector>

namespace pinchoff::dsp {

class real_fft;

/// Floor for levels in dB (an exactly zero power reads -300 dB rather than -infinity).
inline constexpr double db_floor = -300.0;

struct coherent_settings {
  int harmonics{10};              ///< N: highest harmonic considered, >= 1 (1: none)
  double bandwidth_hz{20000.0};   ///< measurement bandwidth, > 0 (AES17 uses 20 kHz)
};

struct harmonic_analysis {
  double fundamental_hz{};
  double fundamental_vpk{};
  double dc_v{};
  int highest_harmonic{1};              ///< last counted harmonic (1: none counted)
  std::vector<double> harmonics_vpk;    ///< H2..HN, N-1 values, NaN when not counted
  std::vector<double> harmonics_dbc;    ///< 20 log10(Hn/H1), NaN when not counted
  double thd_ratio{};
  double thd_percent{};
  double thd_db{};                      ///< 20 log10(THD)
  double thd_r_ratio{};
  double alias_dbc{};
  double largest_spur_dbc{};
  double even_odd_ratio{};
};

/// Analyses a coherent record as described above. Throws input_error naming the bad
/// argument when fs_hz, cycles, the record length or the settings are out of range.
harmonic_analysis analyse_coherent(std::span<const double> samples, double fs_hz, std::size_t cycles,
                                   const coherent_settings& settings = {});

/// Same, reusing a plan of size samples.size() (a sweep analyses many records of one size).
harmonic_analysis analyse_coherent(const real_fft& fft, std::span<const double> samples, double fs_hz,
                                   std::size_t cycles, const coherent_settings& settings = {});

}  // namespace pinchoff::dsp
