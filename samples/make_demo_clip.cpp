// Writes the demo clip: the plucked-string bass phrase of pluck_phrase.hpp, 48 kHz mono,
// WAV 24-bit, without dither (so that reading it back returns the synthesised samples
// within half a 24-bit step, which tests/dsp/test_demo_sample.cpp checks).
//
//   pinchoff_make_sample OUT.wav [--force]
//
// Exit status: 0 written, 2 bad arguments or the file cannot be written, 1 other failure.
#include <algorithm>
#include <cmath>
#include <exception>
#include <iostream>
#include <string>
#include <vector>

#include "base/error.hpp"
#include "dsp/io/sound_file.hpp"
#include "samples/pluck_phrase.hpp"

namespace {

int usage(std::ostream& os, int status) {
  os << "usage: pinchoff_make_sample OUT.wav [--force]\n"
               "Writes the plucked-string demo phrase (48 kHz, mono, WAV 24-bit).\n"
               "--force replaces an existing OUT.wav.\n";
  return status;
}

}  // namespace

int main(int argc, char** argv) {
  using namespace pinchoff;
  std::vector<std::string> args(argv + 1, argv + argc);
  std::string out;
  bool force = false;
  for (const std::string& a : args) {
    if (a == "--force")
      force = true;
    else if (a == "-h" || a == "--help")
      return usage(std::cout, 0);
    else if (!a.empty() && a[0] == '-')
      return usage(std::cerr, 2);
    else if (out.empty())
      out = a;
    else
      return usage(std::cerr, 2);
  }
  if (out.empty()) return usage(std::cerr, 2);

  try {
    const std::vector<double> x = samples::pluck_phrase(samples::phrase_rate_hz);

    dsp::write_settings ws;
    ws.rate_hz = samples::phrase_rate_hz;
    ws.channels = 1;
    ws.format = dsp::sample_format::wav24;
    ws.tpdf_dither = false;
    ws.overwrite = force;
    dsp::sound_writer w = dsp::sound_writer::create(out, ws);
    w.write(x);
    w.commit();

    double peak = 0.0, power = 0.0;
    for (double v : x) {
      peak = std::max(peak, std::abs(v));
      power += v * v;
    }
    const double rms = std::sqrt(power / static_cast<double>(x.size()));
    std::cout << "wrote " << out << ": " << w.frames_written() << " frames, "
              << static_cast<double>(w.frames_written()) / ws.rate_hz << " s at " << ws.rate_hz << " Hz, mono, WAV 24-bit\n"
              << "sample peak " << 20.0 * std::log10(peak) << " dBFS, rms " << 20.0 * std::log10(rms)
              << " dBFS, clipped samples " << w.clipped_samples() << "\n";
    return 0;
  } catch (const input_error& e) {
    std::cerr << "pinchoff_make_sample: " << e.what() << "\n";
    return 2;
  } catch (const std::exception& e) {
    std::cerr << "pinchoff_make_sample: " << e.what() << "\n";
    return 1;
  }
}
