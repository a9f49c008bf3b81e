// The noise analysis against the time domain: the source resistance's thermal noise, drawn
// as white Gaussian samples and run through the DK engine as the generator's voltage, gives
// at the load the spectrum `noise` predicts for that part, within the estimate's statistical
// error. (The engine has one input, the generator, so the source's own resistance is the
// noise source it can carry: it lies in series with the generator.)
#include <cmath>
#include <complex>
#include <numbers>
#include <random>
#include <string>
#include <vector>

#include <doctest/doctest.h>

#include "dsp/fft.hpp"
#include "model/analysis/noise.hpp"
#include "model/circuit/network.hpp"
#include "model/circuit/operating_point.hpp"
#include "model/engine/dk_engine.hpp"
#include "support/stages.hpp"

namespace test_noise_time_domain {

using namespace pinchoff;
using namespace pinchoff::model;

namespace {
constexpr double k_boltzmann = 1.380649e-23;  // J/K, SI 2019 (exact)
}  // namespace

TEST_CASE("the source resistance's noise run through the engine gives the predicted output spectrum") {
  // A common-source stage driven from 10 kΩ, with a treble cut across its drain resistor
  // (10 nF on 4.7 kΩ, a corner near 3.4 kHz) so the spectrum has a shape to follow. The
  // engine runs at 384 kHz (8 x 48 kHz, as `render` does); its trapezoidal rule shows the
  // analogue response at (fs/pi) tan(pi f/fs) at frequency f (the bilinear transform's
  // warping, Oppenheim & Schafer, Discrete-Time Signal Processing, sec. 7.2), 0.9 % above f
  // at 20 kHz, so the prediction is read there. The generator carries white Gaussian noise of
  // one-sided density 4 k T R (Johnson 1928, Nyquist 1928), scaled by 100 in amplitude so the
  // engine's own tolerance (1e-9 V) lies far below it while the stage stays linear (0.6 mV
  // rms at the gate); the output spectrum is scaled back by 100^2.
  // Estimate: Welch's method (IEEE Trans. Audio Electroacoust. 15(2), 1967), Hann windows
  // of 32768 samples with no overlap, 200 segments: each bin's relative standard error is
  // 1/sqrt(200). The bins within +-10 % of each check frequency are averaged; a Hann
  // window's neighbouring bins are correlated (its equivalent noise bandwidth is 1.5 bins,
  // Harris, Proc. IEEE 66(1), 1978), so m of them count as m/1.5 independent ones, and the
  // test allows four standard errors: 4 sqrt(1.5 / (200 m)).
  const std::string text =
      "[supply]\nvolts = 12\n[signal]\nimpedance = \"10k\"\n[jfet]\nidss = \"4m\"\nvp = -2\nis = 0\n[gate]\n"
      "coupling_cap = \"100n\"\nresistor = \"1M\"\n[drain]\nresistor = \"4.7k\"\nshunt_cap = \"10n\"\n[source]\n"
      "resistor = \"1.5k\"\n[output]\ncoupling_cap = \"1u\"\nload = \"100k\"\n";
  const network net = build_network(test::stage_from(text));
  const operating_point op = solve_operating_point(net);
  const std::vector<noise_source> sources = noise_sources(net, op);
  int source = -1;
  for (std::size_t k = 0; k < sources.size(); ++k)
    if (sources[k].of_source) source = static_cast<int>(k);
  REQUIRE(source >= 0);

  const double fs = 384000.0, r = 10e3, scale = 100.0;
  const double t = noise_temperature_k(net);
  const double sigma = scale * std::sqrt(4.0 * k_boltzmann * t * r * fs / 2.0);
  const std::size_t n = 32768;
  const int segments = 200;
  dk_engine eng(net, op, fs);
  std::mt19937_64 rng(20261203);
  std::normal_distribution<double> gauss(0.0, sigma);
  // Settle the coupling capacitors' start-up first (a second).
  for (int i = 0; i < 384000; ++i) (void)eng.process(gauss(rng));
  const dsp::real_fft fft(n);
  std::vector<double> window(n), seg(n), psd(fft.bins(), 0.0);
  double w2 = 0.0;
  for (std::size_t i = 0; i < n; ++i) {
    window[i] = 0.5 - 0.5 * std::cos(2.0 * std::numbers::pi * static_cast<double>(i) / static_cast<double>(n));
    w2 += window[i] * window[i];
  }
  for (int s = 0; s < segments; ++s) {
    for (std::size_t i = 0; i < n; ++i) seg[i] = (eng.process(gauss(rng)) - eng.dc_output_v()) * window[i];
    const std::vector<std::complex<double>> x = fft.forward(seg);
    for (std::size_t b = 0; b < x.size(); ++b) psd[b] += 2.0 * std::norm(x[b]) / (fs * w2) / segments;
  }
  CHECK(eng.stats().failed == 0);

  for (const double f : {1000.0, 3000.0, 10000.0, 20000.0}) {
    double measured = 0.0, predicted = 0.0;
    int bins = 0;
    for (std::size_t b = 1; b < psd.size(); ++b) {
      const double fb = static_cast<double>(b) * fs / static_cast<double>(n);
      if (fb < 0.9 * f || fb > 1.1 * f) continue;
      measured += psd[b] / (scale * scale);
      const double warped = fs / std::numbers::pi * std::tan(std::numbers::pi * fb / fs);
      predicted += noise_at(net, op, sources, warped).source_v2_hz[static_cast<std::size_t>(source)];
      ++bins;
    }
    CAPTURE(f);
    CAPTURE(bins);
    CAPTURE(measured / bins);
    CAPTURE(predicted / bins);
    REQUIRE(bins >= 5);
    const double four_sigma = 4.0 * std::sqrt(1.5 / (segments * bins));
    CAPTURE(four_sigma);
    // Relative: doctest::Approx adds its scale of 1 to the magnitudes, which for densities
    // near 1e-16 V^2/Hz would accept any value.
    CHECK(std::fabs(measured / predicted - 1.0) <= four_sigma);
  }
}

}  // namespace test_noise_time_domain
