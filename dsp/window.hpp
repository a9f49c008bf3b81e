#pragma once
// Cosine-sum windows in the periodic (DFT-even) form, and figures of merit computed from a
// window's samples.
//
//   w[t] = sum_{k=0}^{K} (-1)^k a_k cos(2 pi k t / n),   t = 0 .. n-1
//
// The periodic form is the symmetric window of length n+1 with its last sample dropped;
// it is the one whose DFT has exactly 2K+1 non-zero bins (Harris 1978, section III).
// Coefficients are kept as published, so the peak value is sum a_k: 1 for the Harris
// windows (Hann, Blackman, Blackman-Harris) and about 4.7 for Heinzel's flat-tops, which are
// normalised to a_0 = 1 instead. Coherent gain is therefore a_0 exactly.
//
// Figures (Harris, "On the use of windows for harmonic analysis with the DFT", Proc. IEEE
// 66(1), 1978; Heinzel, Rüdiger & Schilling, "Spectrum and spectral density estimation by
// the DFT", 2002):
//   coherent gain CG = sum(w) / n                     (dimensionless)
//   ENBW = n sum(w^2) / (sum w)^2                     (bins)
//   W(f) = sum w[t] exp(-2 pi i f t / n)              (f in bins, any real f)
//   scallop loss = -20 log10 |W(1/2) / W(0)|          (dB; negative when W(1/2) > W(0))
//   highest sidelobe = max over |f| beyond the first null of 20 log10 |W(f)/W(0)|  (dB)
// All functions accept any n >= 1 window (n >= 8 for the sidelobe search).
#include <complex>
#include <cstddef>
#include <span>
#include <string_view>
#include <vector>

namespace pinchoff::dsp {

enum class window_kind {
  rectangular,
  hann,                ///< .5, .5; Harris 1978
  blackman,            ///< .42, .5, .08; Harris 1978 ("exact" Blackman differs)
  blackman_harris_4,   ///< .35875, .48829, .14128, .01168; Harris 1978, 4-term -92 dB
  hft95,               ///< Heinzel et al. 2002, flat-top, -95 dB sidelobes
  hft90d,              ///< Heinzel et al. 2002, flat-top, -90 dB, sidelobes falling 18 dB/oct
};

/// The a_k of the definition above, a_0 first.
std::span<const double> cosine_coefficients(window_kind kind) noexcept;

/// Short lower-case name for messages and output: "hann", "blackman-harris-4", "hft90d".
std::string_view window_name(window_kind kind) noexcept;

/// Half-width of the main lobe in bins: the first null of the periodic form at K + 1.
int main_lobe_half_width_bins(window_kind kind) noexcept;

/// n samples of the periodic window. Throws input_error when n == 0.
std::vector<double> make_window(window_kind kind, std::size_t n);

double coherent_gain(std::span<const double> w);
double enbw_bins(std::span<const double> w);
/// The DTFT of any real sequence of n samples (a window, or a windowed record) at
/// `freq_bins` (bins of the n-point DFT, any real value), evaluated directly in O(n).
std::complex<double> window_dtft(std::span<const double> w, double freq_bins);
double scallop_loss_db(std::span<const double> w);

/// Highest sidelobe relative to W(0), in dB. Walks |W| outward on a grid of 1/32 bin
/// to the first local minimum (the main lobe's edge), then takes the largest local maximum
/// up to n/2 bins, each refined by golden-section search to 1e-6 bin.
double highest_sidelobe_db(std::span<const double> w);

/// The amplitude error of a tone between two bins at its worst: the signed
/// 20 log10 |W(f)/W(0)| of largest size for 0 <= f <= 1/2 bin, on a grid of 1/2000 bin.
/// Positive when the window reads high (a flat-top's ripple); for windows whose lobe falls
/// monotonically it is minus the scallop loss. Heinzel et al. 2002 tabulate this figure.
double worst_amplitude_error_db(std::span<const double> w);

}  // namespace pinchoff::dsp
