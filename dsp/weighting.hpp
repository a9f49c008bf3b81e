#pragma once
// Frequency weightings for noise readings, as magnitudes of their defining responses:
// - A-weighting of IEC 61672-1 (Annex E's analytic form: poles at 20.598997, 107.65265,
//   737.86223 and 12194.217 Hz), normalised to 0 dB at 1 kHz exactly;
// - ITU-R BS.468-4 weighting (the recommendation's network as the rational response of
//   degree 6 commonly used to realise it), normalised to 0 dB at 1 kHz (the "CCIR-1k" form).
// The 468 reading of the recommendation uses a quasi-peak meter; these are the filters alone,
// for rms readings of a computed or measured spectrum.
namespace pinchoff::dsp {

/// A-weighting in dB (IEC 61672-1), 0 dB at 1 kHz; -infinity at 0 Hz.
double a_weighting_db(double f_hz) noexcept;
/// The same as a magnitude ratio (10^(dB/20)).
double a_weighting_gain(double f_hz) noexcept;

/// ITU-R BS.468-4 weighting in dB, 0 dB at 1 kHz (+12.2 dB near 6.3 kHz).
double itu468_weighting_db(double f_hz) noexcept;
double itu468_weighting_gain(double f_hz) noexcept;

}  // namespace pinchoff::dsp
