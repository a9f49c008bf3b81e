#include "model/audio/oversampling_choice.hpp"

#include <algorithm>
#include <cmath>
#include <complex>
#include <numbers>
#include <string>

#include "base/error.hpp"
#include "dsp/fft.hpp"
#include "dsp/harmonics.hpp"
#include "dsp/io/sound_file.hpp"
#include "model/engine/steady_state.hpp"
#include "model/analysis/sweep.hpp"

namespace pinchoff::model {

namespace {

constexpr std::size_t survey_block = 4096;

// Accumulates the peak and the Hann-windowed power spectra of whole blocks per channel.
class surveyor {
 public:
  surveyor(int channels, double rate_hz)
      : channels_(static_cast<std::size_t>(channels)),
        rate_hz_(rate_hz),
        fft_(survey_block),
        window_(survey_block),
        power_(survey_block / 2 + 1, 0.0),
        pending_(survey_block * channels_, 0.0),
        bins_(survey_block / 2 + 1),
        one_(survey_block) {
    for (std::size_t k = 0; k < survey_block; ++k)
      window_[k] = 0.5 - 0.5 * std::cos(2.0 * std::numbers::pi * static_cast<double>(k) / static_cast<double>(survey_block));
  }

  void add(std::span<const double> interleaved) {
    for (const double v : interleaved) peak_ = std::max(peak_, std::abs(v));
    std::size_t at = 0;
    while (at < interleaved.size()) {
      const std::size_t take = std::min(interleaved.size() - at, pending_.size() - filled_);
      std::copy_n(interleaved.data() + at, take, pending_.data() + filled_);
      filled_ += take;
      at += take;
      if (filled_ == pending_.size()) flush();
    }
  }

  input_survey result() {
    // A last partial block is zero-padded (its power is counted with the rest).
    if (filled_ > 0) {
      std::fill(pending_.begin() + static_cast<std::ptrdiff_t>(filled_), pending_.end(), 0.0);
      flush();
    }
    input_survey s;
    s.sample_peak = peak_;
    s.rate_hz = rate_hz_;
    double total = 0.0;
    for (std::size_t k = 1; k < power_.size(); ++k) total += power_[k];
    if (!(total > 0.0)) return s;
    // The edge: the top of the first bin where the running sum reaches 99 %.
    double sum = 0.0;
    for (std::size_t k = 1; k < power_.size(); ++k) {
      sum += power_[k];
      if (sum >= 0.99 * total) {
        s.edge_hz = (static_cast<double>(k) + 0.5) * rate_hz_ / static_cast<double>(survey_block);
        break;
      }
    }
    return s;
  }

 private:
  void flush() {
    for (std::size_t c = 0; c < channels_; ++c) {
      for (std::size_t k = 0; k < survey_block; ++k) one_[k] = pending_[k * channels_ + c] * window_[k];
      fft_.forward(one_, bins_);
      for (std::size_t k = 0; k < bins_.size(); ++k) power_[k] += std::norm(bins_[k]);
    }
    filled_ = 0;
  }

  std::size_t channels_;
  double rate_hz_;
  dsp::real_fft fft_;
  std::vector<double> window_, power_, pending_;
  std::vector<std::complex<double>> bins_;
  std::vector<double> one_;
  std::size_t filled_{0};
  double peak_{0.0};
};

}  // namespace

input_survey survey_input(const std::filesystem::path& path, const std::atomic<bool>* stop) {
  dsp::sound_reader reader = dsp::sound_reader::open(path);
  const dsp::sound_info info = reader.info();
  surveyor s(info.channels, info.rate_hz);
  std::vector<double> block(survey_block * static_cast<std::size_t>(info.channels));
  for (;;) {
    if (stop && stop->load(std::memory_order_relaxed)) throw interrupted("interrupted; no output written");
    const std::size_t n = reader.read(block);
    if (n == 0) break;
    s.add(std::span<const double>(block).first(n * static_cast<std::size_t>(info.channels)));
  }
  return s.result();
}

input_survey survey_samples(std::span<const double> interleaved, int channels, double rate_hz) {
  if (channels < 1) throw internal_error("survey_samples: channels must be at least 1");
  surveyor s(channels, rate_hz);
  s.add(interleaved);
  return s.result();
}

oversampling_choice choose_oversampling(std::span<const stage_ref> stages, double drive_vpk, double edge_hz,
                                        double base_rate_hz, double target_dbc, const std::atomic<bool>* stop) {
  oversampling_choice ch;
  ch.target_dbc = target_dbc;
  ch.probe_vpk = drive_vpk;
  if (!(drive_vpk > 0.0) || !(edge_hz > 0.0) || stages.empty()) return ch;  // silence: 8x
  const double top_hz = std::min(20000.0, 0.45 * base_rate_hz);
  const double wanted_hz = std::clamp(edge_hz, 1000.0, top_hz);
  constexpr int cycles = 3;
  for (const int factor : {8, 16, 32, 64}) {
    const double rate_hz = base_rate_hz * factor;
    const int m = record_samples(wanted_hz, rate_hz, cycles);
    ch.probe_hz = rate_hz * cycles / m;
    steady_state_options opt;
    opt.cycles = cycles;
    oversampling_probe p{factor, -400.0};
    for (const stage_ref& st : stages) {
      if (stop && stop->load(std::memory_order_relaxed)) throw interrupted("interrupted; no output written");
      const steady_state_result ss = periodic_steady_state(*st.net, *st.op, rate_hz, drive_vpk, m, opt);
      const dsp::harmonic_analysis a = dsp::analyse_coherent(ss.output_v, rate_hz, cycles);
      p.alias_dbc = std::max(p.alias_dbc, a.alias_dbc);
    }
    ch.probes.push_back(p);
    ch.factor = factor;
    if (p.alias_dbc < target_dbc) return ch;
  }
  ch.target_met = false;
  return ch;
}

}  // namespace pinchoff::model
