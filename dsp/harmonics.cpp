#include "dsp/harmonics.hpp"

#include <algorithm>
#include <cmath>
#include <complex>
#include <limits>
#include <string>

#include "base/error.hpp"
#include "dsp/fft.hpp"
#include "base/units.hpp"

namespace pinchoff::dsp {
namespace {

double floored_db_from_power_ratio(double ratio) noexcept {
  if (std::isnan(ratio)) return ratio;
  if (ratio <= 0.0) return db_floor;
  return std::max(db_floor, 10.0 * std::log10(ratio));
}

void validate(std::size_t n, double fs_hz, std::size_t cycles, const coherent_settings& s) {
  if (!(fs_hz > 0.0) || !std::isfinite(fs_hz))
    throw input_error("sample rate must be a positive number of hertz, got " + base::format_number(fs_hz));
  if (cycles < 1) throw input_error("a coherent record must hold at least one cycle");
  if (2 * cycles >= n)
    throw input_error("a record of " + std::to_string(n) + " samples cannot hold " + std::to_string(cycles) +
                      " cycles below Nyquist (needs more than 2 samples a cycle)");
  if (s.harmonics < 1) throw input_error("number of harmonics must be at least 1, got " + std::to_string(s.harmonics));
  if (!(s.bandwidth_hz > 0.0))
    throw input_error("measurement bandwidth must be positive, got " + base::format_number(s.bandwidth_hz) + " Hz");
}

}  // namespace

harmonic_analysis analyse_coherent(std::span<const double> samples, double fs_hz, std::size_t cycles,
                                   const coherent_settings& settings) {
  validate(samples.size(), fs_hz, cycles, settings);
  return analyse_coherent(real_fft(samples.size()), samples, fs_hz, cycles, settings);
}

harmonic_analysis analyse_coherent(const real_fft& fft, std::span<const double> samples, double fs_hz,
                                   std::size_t cycles, const coherent_settings& settings) {
  const std::size_t n = samples.size();
  validate(n, fs_hz, cycles, settings);
  if (fft.size() != n)
    throw internal_error("FFT plan of size " + std::to_string(fft.size()) + " given a record of " +
                         std::to_string(n) + " samples");
  const std::vector<std::complex<double>> X = fft.forward(samples);
  const double nd = static_cast<double>(n);
  // Peak amplitude of bin k (0 < k < n/2); bins at or beyond Nyquist are never read as lines.
  auto peak = [&](std::size_t k) { return 2.0 * std::abs(X[k]) / nd; };

  harmonic_analysis r;
  r.fundamental_hz = static_cast<double>(cycles) * fs_hz / nd;
  r.fundamental_vpk = peak(cycles);
  r.dc_v = X[0].real() / nd;
  const double h1 = r.fundamental_vpk;
  const double nan = std::numeric_limits<double>::quiet_NaN();

  // Bins strictly below Nyquist: k < n/2 for even n, k <= (n-1)/2 for odd n.
  const std::size_t last_line_bin = (n % 2 == 0) ? n / 2 - 1 : n / 2;
  const int N = settings.harmonics;
  r.harmonics_vpk.assign(static_cast<std::size_t>(N - 1), nan);
  r.harmonics_dbc.assign(static_cast<std::size_t>(N - 1), nan);
  double sum_sq = 0.0, even_sq = 0.0, odd_sq = 0.0;
  for (int h = 2; h <= N; ++h) {
    const std::size_t k = static_cast<std::size_t>(h) * cycles;
    if (k > last_line_bin || static_cast<double>(h) * r.fundamental_hz > settings.bandwidth_hz) break;
    const double a = peak(k);
    r.highest_harmonic = h;
    r.harmonics_vpk[static_cast<std::size_t>(h - 2)] = a;
    r.harmonics_dbc[static_cast<std::size_t>(h - 2)] = h1 > 0.0 ? floored_db_from_power_ratio((a / h1) * (a / h1)) : nan;
    sum_sq += a * a;
    (h % 2 == 0 ? even_sq : odd_sq) += a * a;
  }

  if (h1 > 0.0) {
    r.thd_ratio = std::sqrt(sum_sq) / h1;
    r.thd_percent = 100.0 * r.thd_ratio;
    r.thd_db = floored_db_from_power_ratio(r.thd_ratio * r.thd_ratio);
    r.thd_r_ratio = r.thd_ratio / std::sqrt(1.0 + r.thd_ratio * r.thd_ratio);
  } else {
    r.thd_ratio = r.thd_percent = r.thd_db = r.thd_r_ratio = nan;
  }
  if (odd_sq > 0.0)
    r.even_odd_ratio = even_sq / odd_sq;
  else
    r.even_odd_ratio = even_sq > 0.0 ? std::numeric_limits<double>::infinity() : nan;

  // Non-harmonic bins from 1 to the bandwidth edge.
  const double band_bin = std::floor(settings.bandwidth_hz * nd / fs_hz);
  const std::size_t top = static_cast<std::size_t>(std::min(band_bin, static_cast<double>(last_line_bin)));
  double spur_sq = 0.0, largest_sq = 0.0;
  for (std::size_t k = 1; k <= top; ++k) {
    if (k % cycles == 0) continue;
    const double a = peak(k);
    spur_sq += a * a;
    largest_sq = std::max(largest_sq, a * a);
  }
  if (h1 > 0.0) {
    r.alias_dbc = floored_db_from_power_ratio(spur_sq / (h1 * h1));
    r.largest_spur_dbc = floored_db_from_power_ratio(largest_sq / (h1 * h1));
  } else {
    r.alias_dbc = r.largest_spur_dbc = nan;
  }
  return r;
}

}  // namespace pinchoff::dsp
