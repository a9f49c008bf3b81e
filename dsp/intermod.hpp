#pragma once
// Intermodulation analysis of a coherent two-tone record: one holding exactly k1 cycles
// of tone f1 and k2 cycles of tone f2 (k1 < k2), so every product m f1 + n f2 falls on bin
// m k1 + n k2 and is read without a window.
//
// SMPTE RP120 / DIN 45403 (low tone f1 and high tone f2, amplitude ratio 4:1): per order
// n >= 1 the sidebands f2 - n f1 and f2 + n f1 relative to the high tone,
//   d_n = (U(f2 - n f1) + U(f2 + n f1)) / U(f2),   IMD = sqrt(sum d_n^2).
// IEC 60268-3 difference-frequency distortion (two equal tones, e.g. 19 + 20 kHz):
//   d2 = U(f2 - f1) / U_ref,  d3 = (U(2 f1 - f2) + U(2 f2 - f1)) / U_ref,  U_ref = 2 U(f2).
// Amplitudes are peak values (2 |X_k| / n for a bin between DC and Nyquist).
#include <cstddef>
#include <span>
#include <vector>

namespace pinchoff::dsp {

struct sideband_order {
  int order{};                 ///< n
  double lower_hz{}, upper_hz{};
  double lower_vpk{}, upper_vpk{};
  double d_ratio{};            ///< (lower + upper) / U(f2)
};

struct smpte_imd {
  double f1_hz{}, f2_hz{};
  double u1_vpk{}, u2_vpk{};   ///< the tones at the output
  std::vector<sideband_order> orders;  ///< n = 1..max_order (f2 - n f1 > 0 only)
  double imd_ratio{};          ///< sqrt(sum d_n^2)
};

/// SMPTE/DIN intermodulation; orders whose lower sideband would fall at or below DC are
/// left out. Throws input_error when k1, k2 or the record do not fit (k2 + max_order k1
/// must stay below Nyquist).
smpte_imd analyse_smpte(std::span<const double> record, double fs_hz, std::size_t k1, std::size_t k2, int max_order = 4);

struct difference_imd {
  double f1_hz{}, f2_hz{};
  double u1_vpk{}, u2_vpk{};
  double d2_ratio{}, d3_ratio{};
  double difference_vpk{};     ///< U(f2 - f1)
  double lower3_vpk{}, upper3_vpk{};  ///< U(2 f1 - f2), U(2 f2 - f1)
};

difference_imd analyse_difference(std::span<const double> record, double fs_hz, std::size_t k1, std::size_t k2);

}  // namespace pinchoff::dsp
