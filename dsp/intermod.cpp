#include "dsp/intermod.hpp"

#include <cmath>
#include <complex>
#include <string>

#include "base/error.hpp"
#include "dsp/fft.hpp"

namespace pinchoff::dsp {
namespace {

std::vector<double> peak_spectrum(std::span<const double> record) {
  const real_fft fft(record.size());
  const std::vector<std::complex<double>> x = fft.forward(record);
  std::vector<double> a(x.size());
  const double n = static_cast<double>(record.size());
  for (std::size_t k = 0; k < x.size(); ++k) a[k] = std::abs(x[k]) * ((k == 0 || 2 * k == record.size()) ? 1.0 : 2.0) / n;
  return a;
}

void check(std::span<const double> record, double fs_hz, std::size_t k1, std::size_t k2, std::size_t highest) {
  if (!(fs_hz > 0)) throw input_error("intermodulation: the sample rate must be above 0");
  if (k1 == 0 || k2 <= k1) throw input_error("intermodulation: need 0 < k1 < k2 cycles");
  if (2 * highest >= record.size())
    throw input_error("intermodulation: the record of " + std::to_string(record.size()) +
                      " samples is too short for a product on bin " + std::to_string(highest));
}

}  // namespace

smpte_imd analyse_smpte(std::span<const double> record, double fs_hz, std::size_t k1, std::size_t k2, int max_order) {
  check(record, fs_hz, k1, k2, k2 + static_cast<std::size_t>(max_order) * k1);
  const std::vector<double> a = peak_spectrum(record);
  const double bin_hz = fs_hz / static_cast<double>(record.size());
  smpte_imd r;
  r.f1_hz = k1 * bin_hz;
  r.f2_hz = k2 * bin_hz;
  r.u1_vpk = a[k1];
  r.u2_vpk = a[k2];
  double sum = 0.0;
  for (int n = 1; n <= max_order; ++n) {
    const std::size_t off = static_cast<std::size_t>(n) * k1;
    if (off >= k2) break;
    sideband_order o;
    o.order = n;
    o.lower_hz = (k2 - off) * bin_hz;
    o.upper_hz = (k2 + off) * bin_hz;
    o.lower_vpk = a[k2 - off];
    o.upper_vpk = a[k2 + off];
    o.d_ratio = (o.lower_vpk + o.upper_vpk) / r.u2_vpk;
    sum += o.d_ratio * o.d_ratio;
    r.orders.push_back(o);
  }
  r.imd_ratio = std::sqrt(sum);
  return r;
}

difference_imd analyse_difference(std::span<const double> record, double fs_hz, std::size_t k1, std::size_t k2) {
  check(record, fs_hz, k1, k2, 2 * k2 - k1);
  if (2 * k1 <= k2) throw input_error("intermodulation: the twin tones must be closer than an octave (2 f1 > f2)");
  const std::vector<double> a = peak_spectrum(record);
  const double bin_hz = fs_hz / static_cast<double>(record.size());
  difference_imd r;
  r.f1_hz = k1 * bin_hz;
  r.f2_hz = k2 * bin_hz;
  r.u1_vpk = a[k1];
  r.u2_vpk = a[k2];
  r.difference_vpk = a[k2 - k1];
  r.lower3_vpk = a[2 * k1 - k2];
  r.upper3_vpk = a[2 * k2 - k1];
  const double uref = 2.0 * r.u2_vpk;
  r.d2_ratio = r.difference_vpk / uref;
  r.d3_ratio = (r.lower3_vpk + r.upper3_vpk) / uref;
  return r;
}

}  // namespace pinchoff::dsp
