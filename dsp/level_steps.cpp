#include "dsp/level_steps.hpp"

#include <algorithm>
#include <cmath>

namespace pinchoff::dsp {

std::size_t step_block_samples(double fs_hz) {
  return std::max<std::size_t>(1, static_cast<std::size_t>(std::llround(step_block_seconds * fs_hz)));
}

std::vector<double> block_rms(std::span<const double> samples, std::size_t block) {
  std::vector<double> rms;
  if (block == 0) return rms;
  const std::size_t blocks = samples.size() / block;
  rms.reserve(blocks);
  for (std::size_t b = 0; b < blocks; ++b) {
    double s = 0.0;
    for (std::size_t t = b * block; t < (b + 1) * block; ++t) s += samples[t] * samples[t];
    rms.push_back(std::sqrt(s / static_cast<double>(block)));
  }
  return rms;
}

std::vector<sample_range> find_level_steps(std::span<const double> rms, std::size_t block, const step_settings& s) {
  std::vector<sample_range> steps;
  const std::size_t blocks = rms.size();
  const auto level_db = [&](std::size_t b) { return 20.0 * std::log10(std::max(rms[b], silent_rms)); };
  const auto silent = [&](std::size_t b) { return !(rms[b] >= silent_rms); };  // NaN counts as silent
  const std::size_t min_blocks = std::max<std::size_t>(s.min_step_blocks, 3);
  std::size_t i = 0;
  while (i < blocks) {
    if (silent(i)) {
      ++i;
      continue;
    }
    double sum = level_db(i);
    std::size_t count = 1, j = i + 1;
    while (j < blocks && !silent(j) && std::fabs(level_db(j) - sum / static_cast<double>(count)) <= s.tolerance_db) {
      sum += level_db(j);
      ++count;
      ++j;
    }
    if (count >= min_blocks) steps.push_back({(i + 1) * block, (j - 1) * block});
    i = j;
  }
  return steps;
}

std::vector<sample_range> find_level_steps(std::span<const double> samples, double fs_hz, const step_settings& s) {
  const std::size_t block = step_block_samples(fs_hz);
  const std::vector<double> rms = block_rms(samples, block);
  return find_level_steps(rms, block, s);
}

double level_spread_db(std::span<const double> samples, double fs_hz) {
  const std::vector<double> rms = block_rms(samples, step_block_samples(fs_hz));
  if (rms.size() < 2) return 0.0;
  double lo = rms.front(), hi = rms.front();
  for (const double v : rms) {
    const double r = std::max(v, silent_rms);
    lo = std::min(lo, r);
    hi = std::max(hi, r);
  }
  lo = std::max(lo, silent_rms);
  return 20.0 * std::log10(hi / lo);
}

}  // namespace pinchoff::dsp
