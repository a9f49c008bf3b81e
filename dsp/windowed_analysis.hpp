#pragma once
// Harmonic and noise analysis of a recording that is not coherent: the tone's frequency is
// not known exactly and the record does not hold whole cycles. A window controls leakage.
//
// Method:
// 1. The DC (the mean under the window) is removed; the record is multiplied by the chosen window (periodic
//    form, window.hpp) and transformed.
// 2. Coarse peak: the strongest bin within 10 % of `approx_fundamental_hz` when given,
//    else the strongest bin at or above band_low_hz (20 Hz).
// 3. Fine frequency: the maximum of |DTFT| of the record under a 4-term Blackman-Harris
//    window within 1.5 bins of the coarse peak, by golden-section search to 1e-7 bin.
//    (Flat-tops are not used for this step: their ripple puts the maximum off the tone.)
// 4. Fundamental: c = 2 DTFT(f1) / sum(w) = A exp(i phi), the windowed DTFT evaluated at
//    f1 itself, so there is no scallop loss. The fitted A cos(2 pi f1 t + phi) is then
//    subtracted from the record (a notch of zero width, as an analyser's notch filter but
//    without its skirts).
//    Harmonics: Hn = 2 |DTFT(n f1)| / sum(w) of the notched, windowed record. Interference
//    from other lines is the window's leakage at their distance (below -92 dB for
//    Blackman-Harris, far less further away). A line below the noise in about ENBW bins
//    reads as that noise.
// 5. Bin powers p_k = 2 |X_k|^2 / (n sum w^2) (V^2; they sum to the mean square of the
//    record, so white noise of variance s^2 gives s^2 * df / (fs/2) a bin).
//    In-band bins: band_low_hz <= k df <= band_high_hz (a brick-wall band on bin centres).
//    THD+N (AES17 sense) = sqrt(in-band power of the notched record / in-band power of the
//    record): everything but the fundamental relative to the total rms.
//    Noise: in-band bins of the notched record outside the main lobes (2L+1 bins,
//    L = main_lobe_half_width_bins) of the fundamental and the counted harmonics, scaled
//    up by (all band bins)/(bins used) to stand for the whole band.
//
// Units: samples in volts (or any unit, e.g. full scale; amplitudes carry it), frequencies
// in hertz. Harmonics are counted, as in harmonics.hpp, when n f1 <= band_high_hz and their
// main lobe lies below Nyquist; the others are NaN. dB figures are floored at db_floor.
#include <cstddef>
#include <span>
#include <vector>

#include "dsp/window.hpp"

namespace pinchoff::dsp {

struct windowed_settings {
  window_kind window{window_kind::blackman_harris_4};  ///< a flat-top (hft90d) on request
  int harmonics{10};                                   ///< N >= 1
  double band_low_hz{20.0};                            ///< AES17 band, 0 <= low < high
  double band_high_hz{20000.0};
  double approx_fundamental_hz{0.0};                   ///< 0: strongest line above band_low_hz
};

struct windowed_analysis {
  double fundamental_hz{};
  double fundamental_vpk{};
  double dc_v{};                        ///< the removed DC: sum(x w) / sum(w)
  int highest_harmonic{1};              ///< last counted harmonic (1: none)
  std::vector<double> harmonics_vpk;    ///< H2..HN, NaN when not counted
  std::vector<double> harmonics_dbc;
  double thd_ratio{}, thd_percent{}, thd_db{};
  double thd_n_ratio{}, thd_n_percent{}, thd_n_db{};
  double band_rms_v{};                  ///< rms of everything in the band, fundamental included
  double noise_rms_v{};                 ///< in-band rms without the fundamental and counted harmonics
  double noise_a_rms_v{};               ///< the same, A-weighted (IEC 61672-1; weighting.hpp)
  double noise_468_rms_v{};             ///< the same, ITU-R BS.468-4 weighted (rms, not quasi-peak)
  double noise_dbc{};                   ///< noise power relative to the fundamental's power
  double noise_floor_dbc_per_hz{};      ///< noise density relative to the fundamental's power, per hertz
};

/// A fundamental this far below the record's peak (-200 dB) is taken for rounding, not a tone.
inline constexpr double no_tone_below = 1e-10;

/// Analyses `samples` at fs_hz as described above. Throws input_error when the arguments
/// are out of range, the record is shorter than 64 samples or too short for the band, or no
/// tone is found (silence, DC only: a fundamental at or below no_tone_below times the
/// record's peak, or the band holds no bins).
windowed_analysis analyse_windowed(std::span<const double> samples, double fs_hz,
                                   const windowed_settings& settings = {});

/// A record that holds noise alone (a stage's output with its input shorted or terminated):
/// its in-band rms unweighted, A-weighted and ITU-R BS.468-4 weighted (the filter of
/// weighting.hpp read as rms, not the recommendation's quasi-peak meter). The DC (the mean
/// under the window) is removed; one Hann-windowed transform of the whole record; each bin
/// p_k = 2 |X_k|^2 / (n sum w^2) (the bins sum to the mean square, as in step 5 above) times
/// the weighting's power gain at the bin's centre, summed over the bins from band_low_hz to
/// band_high_hz (at least the third bin, clear of the DC's main lobe). Throws input_error
/// for fewer than 64 samples or an empty band.
struct noise_reading {
  double band_low_hz{}, band_high_hz{};  ///< the bin centres actually summed
  double rms_v{}, a_rms_v{}, itu468_rms_v{};
};
noise_reading analyse_noise_record(std::span<const double> samples, double fs_hz, double band_low_hz = 20.0,
                                   double band_high_hz = 20000.0);

/// The largest n' <= n of the form 2^a 3^b 5^c: a record trimmed to it transforms fast
/// (a prime length would cost O(n^2) in KissFFT's generic radix). The trim loses under
/// 10 % of the record from n = 64, under 4 % from 10^4 and under 3 % from 10^5 (computed
/// over the smooth numbers up to 2e8).
std::size_t fast_analysis_length(std::size_t n);

/// The part of a recorded tone between the ramps at its ends: a fade-in or fade-out under
/// the window's edges would read as noise (at about -107 dBc for a 10 ms fade in a 5 s
/// record under Blackman-Harris, whose edge value is 6e-5). In blocks of 10 ms, leading
/// blocks are skipped up to the first one that is within 1 % of the next block's rms and
/// at least 1 % of the loudest block's (neither rising nor silence), then one more block as
/// a margin; the same from the end. Returns [begin, end) in samples; the whole record when
/// it is shorter than 8 blocks or nothing would remain.
struct sample_range {
  std::size_t begin{}, end{};
};
sample_range steady_part(std::span<const double> samples, double fs_hz);
/// The same from the blocks' rms alone (for a record streamed from a file): `rms` holds the
/// rms of each whole block of `block` samples, `n` the record's length in samples.
sample_range steady_part_of_blocks(std::span<const double> rms, std::size_t block, std::size_t n);
/// The block length steady_part uses at fs_hz: 10 ms, at least one sample.
std::size_t steady_block_samples(double fs_hz);

/// The windowed amplitude spectrum for display, on a log frequency axis.
/// The record (DC removed as in step 1) is windowed and transformed; a bin reads
/// 2 |X_k| / sum(w), so a sine on a bin shows its peak amplitude (between bins it reads low
/// by up to the window's scallop loss; a flat-top keeps that under 0.01 dB). Bins from
/// low_hz to high_hz are grouped into `points` buckets spaced evenly in log frequency and
/// each bucket shows its largest bin (peak hold, so narrow lines survive the thinning);
/// where buckets are narrower than a bin, each bin is its own point.
struct display_spectrum {
  std::vector<double> frequency_hz;
  std::vector<double> amplitude_vpk;
};
/// Throws input_error when the record is shorter than 64 samples or the range is empty.
display_spectrum spectrum_for_display(std::span<const double> samples, double fs_hz, window_kind window, double low_hz,
                                      double high_hz, std::size_t points = 2000);

}  // namespace pinchoff::dsp
