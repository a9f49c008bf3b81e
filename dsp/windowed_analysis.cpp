#include "dsp/windowed_analysis.hpp"

#include <algorithm>
#include <cmath>
#include <complex>
#include <limits>
#include <numbers>
#include <string>

#include "base/error.hpp"
#include "dsp/fft.hpp"
#include "dsp/harmonics.hpp"
#include "dsp/weighting.hpp"
#include "base/units.hpp"

namespace pinchoff::dsp {
namespace {

double floored_db(double power_ratio) noexcept {
  if (std::isnan(power_ratio)) return power_ratio;
  if (power_ratio <= 0.0) return db_floor;
  return std::max(db_floor, 10.0 * std::log10(power_ratio));
}

void validate(std::size_t n, double fs_hz, const windowed_settings& s) {
  if (n < 64) throw input_error("a record of " + std::to_string(n) + " samples is too short to analyse (need 64 or more)");
  if (!(fs_hz > 0.0) || !std::isfinite(fs_hz))
    throw input_error("sample rate must be a positive number of hertz, got " + base::format_number(fs_hz));
  if (s.harmonics < 1) throw input_error("number of harmonics must be at least 1, got " + std::to_string(s.harmonics));
  if (!(s.band_low_hz >= 0.0) || !(s.band_high_hz > s.band_low_hz))
    throw input_error("measurement band " + base::format_number(s.band_low_hz) + " Hz to " + base::format_number(s.band_high_hz) +
                      " Hz is not a range of positive frequencies");
  if (s.approx_fundamental_hz < 0.0 || s.approx_fundamental_hz >= fs_hz / 2)
    throw input_error("approximate fundamental " + base::format_number(s.approx_fundamental_hz) +
                      " Hz must lie between 0 and half the sample rate");
}

// Golden-section search for the maximum of |DTFT(xw)| on [a, b] bins.
double peak_frequency_bins(std::span<const double> xw, double a, double b) {
  const double g = (std::sqrt(5.0) - 1.0) / 2.0;
  double c = b - g * (b - a), d = a + g * (b - a);
  double fc = std::abs(window_dtft(xw, c)), fd = std::abs(window_dtft(xw, d));
  while (b - a > 1e-7) {
    if (fc > fd) {
      b = d; d = c; fd = fc;
      c = b - g * (b - a); fc = std::abs(window_dtft(xw, c));
    } else {
      a = c; c = d; fc = fd;
      d = a + g * (b - a); fd = std::abs(window_dtft(xw, d));
    }
  }
  return (a + b) / 2;
}

// Power of each bin in V^2 (step 5 of the header): doubled for the bins that stand for a
// positive and a negative frequency.
std::vector<double> bin_powers(const std::vector<std::complex<double>>& X, std::size_t n, double sw2) {
  std::vector<double> p(X.size());
  for (std::size_t k = 0; k < X.size(); ++k)
    p[k] = (k == 0 || (n % 2 == 0 && k == n / 2) ? 1.0 : 2.0) * std::norm(X[k]) / (static_cast<double>(n) * sw2);
  return p;
}

std::vector<double> windowed(std::span<const double> x, std::span<const double> w) {
  std::vector<double> out(x.size());
  for (std::size_t t = 0; t < x.size(); ++t) out[t] = x[t] * w[t];
  return out;
}

}  // namespace

windowed_analysis analyse_windowed(std::span<const double> samples, double fs_hz, const windowed_settings& settings) {
  const std::size_t n = samples.size();
  validate(n, fs_hz, settings);
  const double nd = static_cast<double>(n);
  const double df = fs_hz / nd;
  const int L = main_lobe_half_width_bins(settings.window);
  const double nan = std::numeric_limits<double>::quiet_NaN();

  windowed_analysis r;
  const std::vector<double> w = make_window(settings.window, n);
  double sw = 0.0, sw2 = 0.0;
  for (double v : w) {
    sw += v;
    sw2 += v * v;
  }
  // DC as the windowed mean: a plain mean would carry the tone's unfinished cycle.
  double dc = 0.0;
  for (std::size_t t = 0; t < n; ++t) dc += samples[t] * w[t];
  r.dc_v = dc / sw;
  std::vector<double> x(samples.begin(), samples.end());
  for (double& v : x) v -= r.dc_v;

  const real_fft fft(n);
  const std::vector<double> xw = windowed(x, w);
  const std::vector<double> p = bin_powers(fft.forward(xw), n, sw2);
  const std::size_t last = n / 2;

  // 2. Coarse peak.
  std::size_t k_lo = static_cast<std::size_t>(std::ceil(settings.band_low_hz / df));
  std::size_t k_hi = last > static_cast<std::size_t>(L) + 1 ? last - static_cast<std::size_t>(L) - 1 : 0;
  if (settings.approx_fundamental_hz > 0.0) {
    const double f = settings.approx_fundamental_hz / df;
    k_lo = static_cast<std::size_t>(std::max(0.0, std::floor(std::min(f / 1.1, f - L))));
    k_hi = std::min(k_hi, static_cast<std::size_t>(std::ceil(std::max(f * 1.1, f + L))));
  }
  k_lo = std::max<std::size_t>(k_lo, static_cast<std::size_t>(L) + 1);  // keep clear of the DC lobe
  if (k_lo > k_hi) throw input_error("the record is too short to resolve a tone in the requested range");
  std::size_t k0 = k_lo;
  for (std::size_t k = k_lo; k <= k_hi; ++k)
    if (p[k] > p[k0]) k0 = k;
  if (!(p[k0] > 0.0)) throw input_error("no tone found in the record (it is silent, or holds DC only)");

  // 3. Fine frequency under Blackman-Harris, whatever the measuring window.
  const std::vector<double> xbh =
      settings.window == window_kind::blackman_harris_4 ? xw : windowed(x, make_window(window_kind::blackman_harris_4, n));
  const double k0d = static_cast<double>(k0);
  const double f1_bins = peak_frequency_bins(xbh, k0d - 1.5, k0d + 1.5);
  r.fundamental_hz = f1_bins * df;

  // 4. Fundamental from the DTFT at f1: c = 2 X(f1) / sum(w) = A exp(i phi) for A cos(wt + phi).
  const std::complex<double> c = 2.0 * window_dtft(xw, f1_bins) / sw;
  r.fundamental_vpk = std::abs(c);
  const double h1 = r.fundamental_vpk;
  // A line more than 200 dB below the record's peak is the rounding of the DC removal and
  // the transform, not a tone: a 32-bit float sample holds 24 significant bits (IEEE 754),
  // about 144 dB of its own magnitude, and an integer one fewer.
  double peak = 0.0;
  for (const double v : samples) peak = std::max(peak, std::abs(v));
  if (!(h1 > no_tone_below * peak))
    throw input_error("no tone found in the record: what is left after removing its DC lies " +
                      base::format_number(-base::db_from_ratio(h1 / peak), 3) +
                      " dB below its peak, at the rounding of the arithmetic (it holds DC only)");

  // The notch: subtract the fitted fundamental. The phase is reduced in long double turns:
  // turns < n/2, so its rounding stays below 1e-12 turn for records up to 10^7 samples.
  std::vector<double> rest(n);
  for (std::size_t t = 0; t < n; ++t) {
    const long double turns = static_cast<long double>(f1_bins) * static_cast<long double>(t) / static_cast<long double>(n);
    const double phase = 2.0 * std::numbers::pi * static_cast<double>(turns - std::floor(turns));
    rest[t] = (x[t] - (c * std::polar(1.0, phase)).real()) * w[t];
  }
  const std::vector<double> pr = bin_powers(fft.forward(rest), n, sw2);

  // Harmonics from the notched record, so the fundamental's leakage does not touch them.
  const int N = settings.harmonics;
  r.harmonics_vpk.assign(static_cast<std::size_t>(N - 1), nan);
  r.harmonics_dbc.assign(static_cast<std::size_t>(N - 1), nan);
  double sum_sq = 0.0;
  for (int h = 2; h <= N; ++h) {
    const double fh = h * f1_bins;
    if (fh * df > settings.band_high_hz || fh + L >= static_cast<double>(last)) break;
    const double a = 2.0 * std::abs(window_dtft(rest, fh)) / sw;
    r.highest_harmonic = h;
    r.harmonics_vpk[static_cast<std::size_t>(h - 2)] = a;
    r.harmonics_dbc[static_cast<std::size_t>(h - 2)] = floored_db((a / h1) * (a / h1));
    sum_sq += a * a;
  }
  r.thd_ratio = std::sqrt(sum_sq) / h1;
  r.thd_percent = 100.0 * r.thd_ratio;
  r.thd_db = floored_db(r.thd_ratio * r.thd_ratio);

  // 5. Band powers: total from the record, residual from the notched record.
  auto in_lobe = [&](std::size_t k, double centre_bins) { return std::abs(static_cast<double>(k) - centre_bins) <= L; };
  const std::size_t band_lo = static_cast<std::size_t>(std::ceil(settings.band_low_hz / df));
  const std::size_t band_hi = std::min(last, static_cast<std::size_t>(std::floor(settings.band_high_hz / df)));
  double band = 0.0, residual = 0.0, noise = 0.0;
  std::size_t band_bins = 0, noise_bins = 0;
  // The weighted noise: each used bin's power times the weighting's power gain at its
  // centre, scaled by the weighting summed over the whole band against over the bins used.
  double noise_a = 0.0, noise_468 = 0.0, wa_all = 0.0, wa_used = 0.0, w468_all = 0.0, w468_used = 0.0;
  for (std::size_t k = band_lo; k <= band_hi; ++k) {
    band += p[k];
    residual += pr[k];
    ++band_bins;
    const double fk = static_cast<double>(k) * df;
    const double ga = a_weighting_gain(fk), g468 = itu468_weighting_gain(fk);
    wa_all += ga * ga;
    w468_all += g468 * g468;
    bool line = in_lobe(k, f1_bins);
    for (int h = 2; h <= r.highest_harmonic && !line; ++h) line = in_lobe(k, h * f1_bins);
    if (line) continue;
    noise += pr[k];
    ++noise_bins;
    noise_a += pr[k] * ga * ga;
    noise_468 += pr[k] * g468 * g468;
    wa_used += ga * ga;
    w468_used += g468 * g468;
  }
  if (band_bins == 0 || !(band > 0.0)) throw input_error("the measurement band holds no signal");
  r.band_rms_v = std::sqrt(band);
  r.thd_n_ratio = std::sqrt(residual / band);
  r.thd_n_percent = 100.0 * r.thd_n_ratio;
  r.thd_n_db = floored_db(residual / band);
  const double noise_power = noise_bins > 0 ? noise * static_cast<double>(band_bins) / static_cast<double>(noise_bins) : 0.0;
  r.noise_rms_v = std::sqrt(noise_power);
  r.noise_a_rms_v = wa_used > 0.0 ? std::sqrt(noise_a * wa_all / wa_used) : 0.0;
  r.noise_468_rms_v = w468_used > 0.0 ? std::sqrt(noise_468 * w468_all / w468_used) : 0.0;
  const double p1 = h1 * h1 / 2.0;
  r.noise_dbc = floored_db(noise_power / p1);
  const double band_hz = static_cast<double>(band_bins) * df;
  r.noise_floor_dbc_per_hz = floored_db(noise_power / band_hz / p1);
  return r;
}

noise_reading analyse_noise_record(std::span<const double> x, double fs_hz, double band_low_hz, double band_high_hz) {
  if (!(fs_hz > 0.0) || !std::isfinite(fs_hz)) throw input_error("sample rate must be above 0 Hz");
  if (!(band_low_hz >= 0.0) || !(band_high_hz > band_low_hz))
    throw input_error("measurement band " + base::format_number(band_low_hz) + " Hz to " + base::format_number(band_high_hz) +
                      " Hz is empty");
  const std::size_t n = x.size();
  if (n < 64) throw input_error("a record of " + std::to_string(n) + " samples is too short (at least 64)");
  // Hann window (periodic): the band's edges lie far from DC, so its leakage of the DC and
  // of the lowest octave is negligible at the band's 20 Hz (1.5 bins ENBW, sidelobes -31 dB
  // falling 18 dB an octave; Harris 1978).
  const std::vector<double> w = make_window(window_kind::hann, n);
  double mean = 0.0, sw = 0.0, sw2 = 0.0;
  for (std::size_t i = 0; i < n; ++i) {
    mean += x[i] * w[i];
    sw += w[i];
    sw2 += w[i] * w[i];
  }
  mean /= sw;
  std::vector<double> xw(n);
  for (std::size_t i = 0; i < n; ++i) xw[i] = (x[i] - mean) * w[i];
  const real_fft fft(n);
  const std::vector<std::complex<double>> bins = fft.forward(xw);
  const double df = fs_hz / static_cast<double>(n);
  const std::size_t last = bins.size() - 1;
  const std::size_t lo = std::max<std::size_t>(2, static_cast<std::size_t>(std::ceil(band_low_hz / df)));
  const std::size_t hi = std::min(last, static_cast<std::size_t>(std::floor(std::min(band_high_hz, fs_hz / 2) / df)));
  if (hi < lo) throw input_error("the record is too short to resolve the band's low edge, " + base::format_si(band_low_hz, "Hz"));
  noise_reading r;
  r.band_low_hz = static_cast<double>(lo) * df;
  r.band_high_hz = static_cast<double>(hi) * df;
  double un = 0.0, a = 0.0, w468 = 0.0;
  for (std::size_t k = lo; k <= hi; ++k) {
    // 2 |X|^2 / (n sum w^2) is the bin's share of the mean square (k < n/2).
    const double pk = 2.0 * std::norm(bins[k]) / (static_cast<double>(n) * sw2) * (k == last && n % 2 == 0 ? 0.5 : 1.0);
    const double fk = static_cast<double>(k) * df;
    const double ga = a_weighting_gain(fk), g468 = itu468_weighting_gain(fk);
    un += pk;
    a += pk * ga * ga;
    w468 += pk * g468 * g468;
  }
  r.rms_v = std::sqrt(un);
  r.a_rms_v = std::sqrt(a);
  r.itu468_rms_v = std::sqrt(w468);
  return r;
}

std::size_t steady_block_samples(double fs_hz) {
  return std::max<std::size_t>(1, static_cast<std::size_t>(std::llround(0.01 * fs_hz)));
}

sample_range steady_part(std::span<const double> x, double fs_hz) {
  const std::size_t n = x.size();
  const std::size_t block = steady_block_samples(fs_hz);
  const std::size_t blocks = n / block;
  std::vector<double> rms(blocks);
  for (std::size_t b = 0; b < blocks; ++b) {
    double s = 0.0;
    for (std::size_t t = b * block; t < (b + 1) * block; ++t) s += x[t] * x[t];
    rms[b] = std::sqrt(s / static_cast<double>(block));
  }
  return steady_part_of_blocks(rms, block, n);
}

sample_range steady_part_of_blocks(std::span<const double> rms, std::size_t block, std::size_t n) {
  const std::size_t blocks = rms.size();
  if (blocks < 8) return {0, n};
  double loudest = 0.0;
  for (const double v : rms) loudest = std::max(loudest, v);
  const auto settled = [&](std::size_t b, std::size_t next) { return rms[b] >= 0.99 * rms[next] && rms[b] >= 0.01 * loudest; };
  std::size_t first = 0;
  while (first + 1 < blocks && !settled(first, first + 1)) ++first;
  std::size_t last = blocks - 1;  // inclusive
  while (last > first + 1 && !settled(last, last - 1)) --last;
  ++first;  // the margins
  if (last == 0 || last <= first + 1) return {0, n};
  --last;
  // Trailing samples past the last whole block belong to the ending: keep them only when
  // the last block is itself steady, i.e. nothing was trimmed at the end.
  const std::size_t end = last + 2 == blocks ? n : (last + 1) * block;
  const std::size_t begin = first == 1 ? 0 : first * block;
  return {begin, end};
}

std::size_t fast_analysis_length(std::size_t n) {
  std::size_t best = 1;
  for (std::size_t p2 = 1; p2 <= n; p2 *= 2)
    for (std::size_t p3 = p2; p3 <= n; p3 *= 3)
      for (std::size_t p5 = p3; p5 <= n; p5 *= 5) best = std::max(best, p5);
  return best;
}

display_spectrum spectrum_for_display(std::span<const double> samples, double fs_hz, window_kind window, double low_hz,
                                      double high_hz, std::size_t points) {
  const std::size_t n = samples.size();
  if (n < 64) throw input_error("a record of " + std::to_string(n) + " samples is too short to analyse (need 64 or more)");
  if (!(fs_hz > 0.0) || !(low_hz > 0.0) || !(high_hz > low_hz) || points < 2)
    throw input_error("the spectrum's frequency range is empty");
  const std::vector<double> w = make_window(window, n);
  double sw = 0.0, dc = 0.0;
  for (std::size_t t = 0; t < n; ++t) {
    sw += w[t];
    dc += samples[t] * w[t];
  }
  dc /= sw;
  std::vector<double> xw(n);
  for (std::size_t t = 0; t < n; ++t) xw[t] = (samples[t] - dc) * w[t];
  const std::vector<std::complex<double>> X = real_fft(n).forward(xw);
  const double df = fs_hz / static_cast<double>(n);
  const std::size_t k_lo = std::max<std::size_t>(1, static_cast<std::size_t>(std::ceil(low_hz / df)));
  const std::size_t k_hi = std::min(X.size() - 1, static_cast<std::size_t>(std::floor(high_hz / df)));
  display_spectrum out;
  if (k_lo > k_hi) throw input_error("the spectrum's frequency range holds no bins");
  const double log_lo = std::log(low_hz), step = (std::log(high_hz) - log_lo) / static_cast<double>(points);
  std::size_t k = k_lo;
  while (k <= k_hi) {
    // The bucket holding bin k ends where the next log step begins (at least one bin on).
    const double bucket = std::floor((std::log(static_cast<double>(k) * df) - log_lo) / step);
    const double edge_hz = std::exp(log_lo + (bucket + 1.0) * step);
    std::size_t best = k, j = k;
    while (j <= k_hi && (j == k || static_cast<double>(j) * df < edge_hz)) {
      if (std::abs(X[j]) > std::abs(X[best])) best = j;
      ++j;
    }
    out.frequency_hz.push_back(static_cast<double>(best) * df);
    out.amplitude_vpk.push_back(2.0 * std::abs(X[best]) / sw);
    k = j;
  }
  return out;
}

}  // namespace pinchoff::dsp
