// Tests of the real-input FFT against an independent oracle: a naive DFT summed in long
// double (the oracle KissFFT's own testcpp.cc uses), and closed-form single-bin signals.
#include <doctest/doctest.h>

#include <cmath>
#include <complex>
#include <algorithm>
#include <cstdint>
#include <limits>
#include <numbers>
#include <random>
#include <thread>
#include <vector>

#include "base/error.hpp"
#include "dsp/fft.hpp"
#include "support/sanitized.hpp"

namespace test_fft {

using pinchoff::dsp::real_fft;

namespace {

// X[k] = sum x[t] exp(-2 pi i k t / n) in long double. The phase index k*t is reduced mod n
// in integers, so the only rounding is in the table of n roots and the sums.
std::vector<std::complex<long double>> naive_dft(const std::vector<double>& x) {
  const std::size_t n = x.size();
  std::vector<std::complex<long double>> root(n);
  const long double two_pi = 2.0L * std::numbers::pi_v<long double>;
  for (std::size_t j = 0; j < n; ++j) {
    const long double a = -two_pi * static_cast<long double>(j) / static_cast<long double>(n);
    root[j] = {std::cos(a), std::sin(a)};
  }
  std::vector<std::complex<long double>> out(n / 2 + 1);
  for (std::size_t k = 0; k < out.size(); ++k) {
    std::complex<long double> s = 0;
    std::size_t phase = 0;
    for (std::size_t t = 0; t < n; ++t) {
      s += static_cast<long double>(x[t]) * root[phase];
      phase += k;
      if (phase >= n) phase -= n;
    }
    out[k] = s;
  }
  return out;
}

std::vector<double> noise(std::size_t n, std::uint64_t seed) {
  std::mt19937_64 rng(seed);
  std::uniform_real_distribution<double> u(-1.0, 1.0);
  std::vector<double> x(n);
  for (double& v : x) v = u(rng);
  return x;
}

}  // namespace

TEST_CASE("real_fft matches a naive long-double DFT to eps*log2(n) for smooth and awkward sizes") {
  // Norm-wise bound for a Cooley-Tukey FFT: ||X^ - X|| / ||X|| <= log2(n) * eta, with
  // eta = mu + gamma_4 (sqrt 2 + mu), mu the twiddle error (Higham 2002, Thm 24.2; from memory).
  // With u = eps/2, mu <= eps and gamma_4 ~ 4u: eta <= 4 eps. One level is added for the
  // real-input post-processing. A length whose complex part has a prime factor above 5 goes
  // through the chirp: three transforms of length L in sequence (the kernel's, the forward
  // and the inverse), so 3 log2(L) levels, plus one for each of the three chirp products.
  struct row {
    const char* source;
    std::size_t n;
  };
  const row rows[] = {
      {"naive DFT, n = 1 (identity)", 1},
      {"naive DFT, n = 2", 2},
      {"naive DFT, n = 3 (odd, complex path)", 3},
      {"naive DFT, n = 5", 5},
      {"naive DFT, n = 16 (power of two)", 16},
      {"naive DFT, n = 384 (1 kHz period at 384 kHz)", 384},
      {"naive DFT, n = 1152 = 384 * 3", 1152},
      {"naive DFT, n = 1920 = 384 * 5", 1920},
      {"naive DFT, n = 2688 = 384 * 7 (chirp)", 2688},
      {"naive DFT, n = 4224 = 384 * 11 (chirp)", 4224},
      {"naive DFT, n = 4096", 4096},
      {"naive DFT, n = 1001 = 7 * 11 * 13 (odd, chirp)", 1001},
      {"naive DFT, n = 1153 (prime: 3 cycles of 999.13 Hz at 384 kHz)", 1153},
      {"naive DFT, n = 2 * 1151 (even, half length prime)", 2302},
      {"naive DFT, n = 4 * 1009 (even, half length 2 * prime)", 4036},
      {"naive DFT, n = 7 (odd prime, chirp of length 15)", 7},
      {"naive DFT, n = 14 (even, half length 7)", 14},
      {"naive DFT, n = 4999 (prime)", 4999},
  };
  const double eps = std::numeric_limits<double>::epsilon();
  for (const row& r : rows) {
    INFO(std::string(r.source));
    const std::vector<double> x = noise(r.n, 1000 + r.n);
    const real_fft fft(r.n);
    REQUIRE(fft.bins() == r.n / 2 + 1);
    CHECK(fft.largest_radix() <= 5);
    const auto got = fft.forward(x);
    const auto ref = naive_dft(x);
    long double err2 = 0, ref2 = 0;
    for (std::size_t k = 0; k < ref.size(); ++k) {
      err2 += std::norm(std::complex<long double>(got[k]) - ref[k]);
      ref2 += std::norm(ref[k]);
    }
    const double rel = static_cast<double>(std::sqrt(err2 / ref2));
    const double levels = fft.uses_chirp() ? 3.0 * std::log2(static_cast<double>(fft.transform_length())) + 3.0 + 1.0
                                           : std::log2(static_cast<double>(r.n)) + 1.0;
    const double bound = 4.0 * eps * levels;
    CAPTURE(fft.uses_chirp());
    CAPTURE(rel);
    CAPTURE(bound);
    CHECK(rel <= bound);
  }
}

TEST_CASE("real_fft plans every length with radix 2..5 stages only, through the chirp when needed") {
  // The property that makes every length O(n log n): no generic radix-p butterfly (O(p) a
  // point) is ever run. Every n up to 6000, then lengths near the sweep's largest records.
  // Under the sanitizers (tests/support/sanitized.hpp) every n up to 2000: the plan of each is
  // built the same way (direct and chirp, odd and even, every radix), and the 25 % bound is
  // tightest there, where 5-smooth numbers lie furthest apart.
  const std::size_t every_n_up_to = pinchoff::testing::full_or_sanitized<std::size_t>(6000, 2000);
  for (std::size_t n = 1; n <= every_n_up_to; ++n) {
    const real_fft fft(n);
    CAPTURE(n);
    REQUIRE(fft.largest_radix() <= 5);
    const std::size_t c = n % 2 == 0 ? n / 2 : n;
    // closed form of the rule in fft.hpp: direct on c when c is 5-smooth, else a chirp of L >= 2c - 1
    REQUIRE(fft.uses_chirp() == (pinchoff::dsp::largest_prime_factor(c) > 5));
    if (fft.uses_chirp()) {
      REQUIRE(fft.transform_length() >= 2 * c - 1);
      // not wastefully long: the next 5-smooth number is within 25 % above 2c - 1 here
      REQUIRE(fft.transform_length() <= (5 * (2 * c - 1)) / 4 + 1);
    } else {
      REQUIRE(fft.transform_length() == c);
    }
  }
  for (std::size_t n : {57601u, 1152001u, 2097143u, 2097152u}) {
    const real_fft fft(n);
    CAPTURE(n);
    CHECK(fft.largest_radix() <= 5);
  }
  // largest_prime_factor against hand factorisations (closed form)
  CHECK(pinchoff::dsp::largest_prime_factor(1) == 1);
  CHECK(pinchoff::dsp::largest_prime_factor(1152) == 3);
  CHECK(pinchoff::dsp::largest_prime_factor(28097) == 28097);  // prime: 3 cycles of 41 Hz at 384 kHz
  CHECK(pinchoff::dsp::largest_prime_factor(1001) == 13);
  CHECK(pinchoff::dsp::largest_prime_factor(2 * 1151) == 1151);
}

TEST_CASE("real_fft of a long prime length reads a sine on its bin and nothing elsewhere") {
  // closed form: A sin(2 pi k t / n) gives -i A n / 2 on bin k and 0 on every other bin.
  // n = 57601 is the 20 Hz record at 384 kHz before any snap (prime); 28097 is 41 Hz's.
  for (std::size_t n : {28097u, 57601u, 2u * 28097u}) {
    const std::size_t k = 3;
    const double a = 0.7;
    std::vector<double> x(n);
    for (std::size_t t = 0; t < n; ++t)
      x[t] = a * std::sin(2.0 * std::numbers::pi * static_cast<double>((k * t) % n) / static_cast<double>(n));
    const real_fft fft(n);
    const auto X = fft.forward(x);
    const double nd = static_cast<double>(n);
    CAPTURE(n);
    CHECK(std::abs(X[k] - std::complex<double>(0.0, -a * nd / 2)) <= 1e-11 * a * nd / 2);
    // Every other bin: rounding only. The norm-wise chirp bound above, 4 eps (3 log2 L + 4),
    // times ||X|| = A n / 2, bounds each bin.
    const double levels = 3.0 * std::log2(static_cast<double>(fft.transform_length())) + 4.0;
    const double floor = 4.0 * std::numeric_limits<double>::epsilon() * levels * a * nd / 2;
    double worst = 0;
    for (std::size_t b = 0; b < X.size(); ++b)
      if (b != k) worst = std::max(worst, std::abs(X[b]));
    CAPTURE(worst);
    CHECK(worst <= floor);
  }
}

TEST_CASE("real_fft is unscaled: a sine of peak A on bin k reads A n / 2, DC reads n * mean") {
  // Closed forms of the DFT definition in fft.hpp.
  struct row {
    const char* source;
    std::size_t n, k;
    double amplitude, offset;
  };
  const row rows[] = {
      {"closed form: sum of A sin over whole cycles", 384, 1, 0.5, 0.0},
      {"closed form: sum of A sin over whole cycles", 3840, 37, 2.0, 0.25},
      {"closed form: sum of A sin over whole cycles, odd n", 999, 100, 1.0, -1.0},
  };
  for (const row& r : rows) {
    INFO(std::string(r.source));
    CAPTURE(r.n);
    std::vector<double> x(r.n);
    for (std::size_t t = 0; t < r.n; ++t)
      x[t] = r.offset + r.amplitude * std::sin(2.0 * std::numbers::pi * static_cast<double>(r.k * t) /
                                               static_cast<double>(r.n));
    const auto X = real_fft(r.n).forward(x);
    const double n = static_cast<double>(r.n);
    CHECK(std::abs(X[r.k]) == doctest::Approx(r.amplitude * n / 2).epsilon(1e-12));
    // A sine is -i A n/2 on its bin: its phase is -90 degrees.
    CHECK(std::arg(X[r.k]) == doctest::Approx(-std::numbers::pi / 2).epsilon(1e-10));
    // Absolute tolerance: rounding of n terms of size ~A, relative 1e-12 of the bin's scale.
    CHECK(std::abs(X[0].real() - r.offset * n) <= 1e-12 * (std::abs(r.offset) + r.amplitude) * n);
    CHECK(std::abs(X[0].imag()) == 0.0);
  }
}

TEST_CASE("real_fft puts a cosine at Nyquist on the last bin with |X| = A n") {
  // closed form: x[t] = A cos(pi t) = A (-1)^t sums to A n on bin n/2.
  const std::size_t n = 768;
  std::vector<double> x(n);
  for (std::size_t t = 0; t < n; ++t) x[t] = (t % 2 == 0) ? 0.75 : -0.75;
  const auto X = real_fft(n).forward(x);
  CHECK(X[n / 2].real() == doctest::Approx(0.75 * n).epsilon(1e-13));
  CHECK(X[n / 2].imag() == 0.0);
  CHECK(std::abs(X[0]) <= 1e-12 * 0.75 * n);  // alternating terms cancel exactly in pairs
}

TEST_CASE("real_fft reuses a thread's work buffers without carrying anything from one call to the next") {
  // The work buffers are the calling thread's and kept between calls (fft.hpp): a call on a
  // thread whose buffers hold an earlier transform, of this length or another, must give
  // bitwise the bins a new thread gives, whose buffers start empty. Lengths: a prime odd
  // one (4801, the 20 Hz record) and an even one through the chirp (2 * 1153), a direct odd
  // one (2025 = 3^4 5^2), and one whose buffers exceed what a thread keeps (60013, prime).
  const std::size_t lengths[] = {4801, 2 * 1153, 2025, 60013, 4801};
  std::vector<std::vector<std::complex<double>>> fresh;
  for (std::size_t n : lengths) {
    std::vector<std::complex<double>> bins;
    std::thread([&] { bins = real_fft(n).forward(noise(n, n)); }).join();
    fresh.push_back(std::move(bins));
  }
  std::vector<std::vector<std::complex<double>>> reused;
  std::thread([&] {
    for (std::size_t n : lengths) {
      real_fft(n).forward(noise(n, n + 1));  // leaves other samples' values in the buffers
      reused.push_back(real_fft(n).forward(noise(n, n)));
    }
  }).join();
  for (std::size_t i = 0; i < fresh.size(); ++i) {
    CAPTURE(lengths[i]);
    CHECK(reused[i] == fresh[i]);
  }
}

TEST_CASE("real_fft copies plan independently and refuses wrong sizes") {
  real_fft a(384);
  const real_fft b = a;
  const std::vector<double> x = noise(384, 7);
  const auto xa = a.forward(x);
  const auto xb = b.forward(x);
  CHECK(xa == xb);  // same plan, same arithmetic: bitwise equal

  CHECK_THROWS_AS(real_fft(0), pinchoff::input_error);
  std::vector<double> short_x(383);
  CHECK_THROWS_AS(a.forward(short_x), pinchoff::internal_error);
  std::vector<std::complex<double>> out(10);
  CHECK_THROWS_AS(a.forward(x, out), pinchoff::internal_error);
}

}  // namespace test_fft
