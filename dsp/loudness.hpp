#pragma once
// Loudness and peaks of a signal through libebur128, as a move-only owner that throws on
// init (as every C resource here: the release cannot fail, the acquire is checked).
//
// - Integrated loudness per ITU-R BS.1770 (K-weighting, 400 ms blocks overlapping by 75 %,
//   absolute gate at -70 LUFS, relative gate 10 LU below the ungated mean) as EBU R128
//   uses it, in LUFS: L = -0.691 + 10 log10(sum over channels of the K-weighted mean
//   square). A full-scale (peak 1) 997 Hz sine in one channel reads -3.01 LUFS.
//   Every channel has weight 1, BS.1770's weight for the front channels: the files here are
//   recordings of instruments, not surround mixes, so no channel is taken for an LFE or a
//   surround (libebur128 would by default for a fourth and later channels).
// - Sample peak: the largest |sample| over all channels, as a ratio (1 = full scale).
// - True peak: the largest |value| of the signal interpolated between samples (BS.1770
//   Annex 2; libebur128 oversamples 4x below 96 kHz, 2x below 192 kHz), as a ratio.
//
// Units: the samples may be in any unit (full scale, volts); loudness is then re 1 unit,
// peaks in that unit. Scaling the signal by g adds 20 log10(g) to the loudness and
// multiplies the peaks by g.
#include <memory>
#include <span>

namespace pinchoff::dsp {

class loudness_meter {
 public:
  /// channels 1..64; rate_hz a whole number of hertz from 8000 to 768000. Throws
  /// input_error when they are out of range, internal_error when libebur128 cannot
  /// initialise (out of memory).
  loudness_meter(int channels, double rate_hz);

  loudness_meter(loudness_meter&&) noexcept;
  loudness_meter& operator=(loudness_meter&&) noexcept;
  ~loudness_meter();

  /// Adds interleaved frames (size a multiple of channels; every value finite). Throws
  /// internal_error when the size is not a multiple or libebur128 runs out of memory.
  void add(std::span<const double> interleaved);

  /// Integrated loudness of everything added, LUFS; -infinity when no block passes the
  /// absolute gate (silence, or less than 400 ms added).
  double integrated_lufs() const;
  /// Largest |sample| so far over every channel (a ratio; 0 before anything is added).
  double sample_peak() const;
  /// Largest interpolated |value| so far over every channel (a ratio).
  double true_peak() const;

  int channels() const noexcept { return channels_; }
  double rate_hz() const noexcept { return rate_hz_; }
  long long frames() const noexcept { return frames_; }

 private:
  // Owns the ebur128_state (an anonymous struct in ebur128.h, so it cannot be named here).
  struct handle;
  std::unique_ptr<handle> h_;
  int channels_{0};
  double rate_hz_{0.0};
  long long frames_{0};
};

}  // namespace pinchoff::dsp
