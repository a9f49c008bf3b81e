#pragma once
// Sound files in tests: write a signal as a file the program reads, read a whole file back
// (interleaved samples), the way the render tests and others need them.
#include <cstddef>
#include <filesystem>
#include <span>
#include <vector>

#include "dsp/io/sound_file.hpp"

namespace pinchoff::testing {

/// Writes interleaved samples `x` (frames x channels) to `p` and commits the file.
inline void write_sound(const std::filesystem::path& p, const std::vector<double>& x, double rate_hz = 48000.0, int channels = 1,
                        dsp::sample_format format = dsp::sample_format::wav_float) {
  dsp::write_settings s;
  s.rate_hz = rate_hz;
  s.channels = channels;
  s.format = format;
  dsp::sound_writer w = dsp::sound_writer::create(p, s);
  w.write(x);
  w.commit();
}

struct sound {
  dsp::sound_info info;
  std::vector<double> x;  ///< interleaved
};

/// The whole of `p`: its header and every sample, interleaved.
inline sound read_sound(const std::filesystem::path& p) {
  dsp::sound_reader r = dsp::sound_reader::open(p);
  sound a{r.info(), std::vector<double>(static_cast<std::size_t>(r.info().frames * r.info().channels))};
  std::size_t at = 0;
  while (at < a.x.size()) {
    const std::size_t got = r.read(std::span<double>(a.x).subspan(at));
    if (got == 0) break;
    at += got * static_cast<std::size_t>(r.info().channels);
  }
  return a;
}

}  // namespace pinchoff::testing
