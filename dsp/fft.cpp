#include "dsp/fft.hpp"

#include <kissfft.hh>

#include <algorithm>
#include <cmath>
#include <numbers>
#include <string>

#include "base/error.hpp"

namespace pinchoff::dsp {
namespace {

using cpx = std::complex<double>;

bool is_5_smooth(std::size_t n) {
  for (std::size_t p : {2, 3, 5})
    while (n % p == 0) n /= p;
  return n == 1;
}

// The smallest 5-smooth number at or above n (n >= 1).
std::size_t next_5_smooth(std::size_t n) {
  while (!is_5_smooth(n)) ++n;
  return n;
}

// forward()'s work buffers, one set a thread. A set up to kept_work_bytes stays between
// calls, so a loop of transforms of one length (a sweep's points) neither allocates nor
// touches fresh pages each call: freed and allocated again each call, a 20 Hz record's
// 0.5 MB of buffers made the allocator give the heap's top back to the system and fault it
// in again, as much system time as the sweep's own work. A larger set (a long recording's
// transform) is freed after its call.
constexpr std::size_t kept_work_bytes = std::size_t{4} << 20;

class work_lease {
 public:
  // Three buffers of at least n0, n1 and n2 values.
  work_lease(std::size_t n0, std::size_t n1, std::size_t n2) {
    std::vector<cpx>* b[3] = {&set_.a, &set_.b, &set_.c};
    const std::size_t n[3] = {n0, n1, n2};
    for (int i = 0; i < 3; ++i)
      if (b[i]->size() < n[i]) b[i]->resize(n[i]);
  }
  ~work_lease() {
    const std::size_t bytes = sizeof(cpx) * (set_.a.capacity() + set_.b.capacity() + set_.c.capacity());
    if (bytes > kept_work_bytes) set_ = {};
  }
  work_lease(const work_lease&) = delete;
  work_lease& operator=(const work_lease&) = delete;
  cpx* a() { return set_.a.data(); }
  cpx* b() { return set_.b.data(); }
  cpx* c() { return set_.c.data(); }

 private:
  struct buffers {
    std::vector<cpx> a, b, c;
  };
  static thread_local buffers set_;
};
thread_local work_lease::buffers work_lease::set_;

}  // namespace

std::size_t transform_length(std::size_t n) {
  const std::size_t c = n % 2 == 0 ? n / 2 : n;
  if (c == 0) return 0;
  return is_5_smooth(c) ? c : next_5_smooth(2 * c - 1);
}

std::size_t forward_work_bytes(std::size_t n) {
  const std::size_t z = sizeof(cpx);
  const std::size_t c = n % 2 == 0 ? n / 2 : n;
  const std::size_t l = transform_length(n);
  if (n <= 1 || l == c) return n % 2 == 0 ? 0 : 2 * z * n;
  return 2 * z * l + (n % 2 == 0 ? z * c : 2 * z * c);
}

std::size_t largest_prime_factor(std::size_t n) {
  std::size_t largest = 1;
  for (std::size_t p = 2; p * p <= n; ++p)
    while (n % p == 0) {
      n /= p;
      largest = p;
    }
  return n > 1 ? n : largest;
}

// c: the complex length (n/2 for even n, whose real samples are fed as interleaved pairs,
// n for odd n). Direct: c is 5-smooth and KissFFT runs it with its radix-2..5 butterflies
// (which keep no scratch state). Chirp: Bluestein's identity k t = (k^2 + t^2 - (k - t)^2) / 2
// turns the length-c DFT into a circular convolution with the chirp w[j] = exp(-i pi j^2 / c),
// done by transforms of the 5-smooth length L >= 2c - 1 (Bluestein, "A linear filtering
// approach to the computation of discrete Fourier transform", IEEE Trans. Audio
// Electroacoustics 18(4), 1970; Rabiner, Schafer & Rader, "The chirp z-transform
// algorithm", same issue).
struct real_fft::plan {
  std::size_t n, c, l;
  bool chirp;
  kissfft<double> fft;      // length c (direct) or L (chirp), forward
  std::vector<cpx> w;       // chirp: w[j], j < c
  std::vector<cpx> kernel;  // chirp: DFT_L of conj(w) wrapped circularly, divided by L
  std::vector<cpx> split;   // chirp, even n: exp(-2 pi i k / n), k <= c / 2

  explicit plan(std::size_t n_)
      : n(n_),
        c(n_ % 2 == 0 ? n_ / 2 : n_),
        l(dsp::transform_length(n_)),
        chirp(!is_5_smooth(c)),
        fft(l, false) {
    if (!chirp) return;
    // exp(-i pi j^2 / c) with j^2 reduced mod 2c in integers, so the angle is exact to
    // within rounding of pi q / c, |q| <= c (j < c <= 2^32 keeps j^2 in 64 bits).
    w.resize(c);
    const unsigned long long two_c = 2ULL * c;
    for (std::size_t j = 0; j < c; ++j) {
      const unsigned long long jj = static_cast<unsigned long long>(j);
      long long q = static_cast<long long>((jj * jj) % two_c);
      if (q > static_cast<long long>(c)) q -= static_cast<long long>(two_c);
      w[j] = std::polar(1.0, -std::numbers::pi * static_cast<double>(q) / static_cast<double>(c));
    }
    std::vector<cpx> h(l, cpx{0.0, 0.0});
    h[0] = std::conj(w[0]);
    for (std::size_t j = 1; j < c; ++j) h[j] = h[l - j] = std::conj(w[j]);
    kernel.resize(l);
    fft.transform(h.data(), kernel.data());
    const double inv_l = 1.0 / static_cast<double>(l);
    for (cpx& k : kernel) k *= inv_l;
    if (n % 2 == 0) {
      split.resize(c / 2 + 1);
      for (std::size_t k = 0; k < split.size(); ++k)
        split[k] = std::polar(1.0, -2.0 * std::numbers::pi * static_cast<double>(k) / static_cast<double>(n));
    }
  }

  // Z[k] = sum_t a[t] exp(-2 pi i k t / c) for all k < c, by the chirp; `work` and `spec`
  // hold L values each.
  void chirp_dft(const cpx* a, cpx* work, cpx* spec, cpx* z) const {
    for (std::size_t t = 0; t < c; ++t) work[t] = a[t] * w[t];
    std::fill(work + c, work + l, cpx{0.0, 0.0});
    fft.transform(work, spec);
    // Inverse by conjugation: IDFT(Y) = conj(DFT(conj(Y))); the 1/L is in the kernel.
    for (std::size_t k = 0; k < l; ++k) spec[k] = std::conj(spec[k] * kernel[k]);
    fft.transform(spec, work);
    for (std::size_t k = 0; k < c; ++k) z[k] = std::conj(work[k]) * w[k];
  }
};

real_fft::real_fft(std::size_t n) : n_(n) {
  if (n == 0) throw input_error("FFT size must be at least 1 sample");
  plan_ = std::make_unique<plan>(n);
}

real_fft::~real_fft() = default;
real_fft::real_fft(const real_fft& other) : n_(other.n_), plan_(std::make_unique<plan>(*other.plan_)) {}
real_fft& real_fft::operator=(const real_fft& other) {
  if (this != &other) {
    plan_ = std::make_unique<plan>(*other.plan_);
    n_ = other.n_;
  }
  return *this;
}
real_fft::real_fft(real_fft&&) noexcept = default;
real_fft& real_fft::operator=(real_fft&&) noexcept = default;

std::size_t real_fft::largest_radix() const noexcept {
  if (!plan_) return 0;
  return largest_prime_factor(plan_->l);
}

std::size_t real_fft::transform_length() const noexcept { return plan_ ? plan_->l : 0; }

bool real_fft::uses_chirp() const noexcept { return plan_ && plan_->chirp; }

void real_fft::forward(std::span<const double> x, std::span<std::complex<double>> out) const {
  if (!plan_) throw internal_error("real_fft used after being moved from");
  if (x.size() != n_ || out.size() != bins())
    throw internal_error("real_fft of size " + std::to_string(n_) + " given " + std::to_string(x.size()) +
                         " samples and " + std::to_string(out.size()) + " output bins (expected " +
                         std::to_string(bins()) + ")");
  if (n_ == 1) {
    out[0] = x[0];
    return;
  }
  const plan& p = *plan_;
  if (!p.chirp) {
    if (n_ % 2 == 0) {
      // transform_real writes n/2 values; bin 0 packs DC (real part) and Nyquist (imaginary part).
      p.fft.transform_real(x.data(), out.data());
      const double dc = out[0].real();
      const double nyquist = out[0].imag();
      out[0] = {dc, 0.0};
      out[n_ / 2] = {nyquist, 0.0};
      return;
    }
    work_lease buf(n_, n_, 0);
    std::copy(x.begin(), x.end(), buf.a());
    p.fft.transform(buf.a(), buf.b());
    std::copy_n(buf.b(), out.size(), out.begin());
    return;
  }
  if (n_ % 2 != 0) {
    // c: the samples as complex values, read by the chirp before it writes the spectrum there.
    work_lease buf(p.l, p.l, p.c);
    std::copy(x.begin(), x.end(), buf.c());
    cpx* full = buf.c();
    p.chirp_dft(full, buf.a(), buf.b(), full);
    std::copy_n(full, out.size(), out.begin());
    out[0] = {full[0].real(), 0.0};  // the DC bin of a real sequence is real; drop the rounding
    return;
  }
  // Even n: z[t] = x[2t] + i x[2t+1]; with Z = DFT_c(z), the even and odd samples' spectra are
  // E[k] = (Z[k] + conj Z[c-k]) / 2 and O[k] = (Z[k] - conj Z[c-k]) / 2i, and
  // X[k] = E[k] + exp(-2 pi i k / n) O[k], X[c - k] = conj(E[k] - exp(-2 pi i k / n) O[k]).
  const std::size_t c = p.c;
  work_lease buf(p.l, p.l, c);
  cpx* z = buf.c();
  p.chirp_dft(reinterpret_cast<const cpx*>(x.data()), buf.a(), buf.b(), z);
  out[0] = {z[0].real() + z[0].imag(), 0.0};
  out[c] = {z[0].real() - z[0].imag(), 0.0};
  for (std::size_t k = 1; 2 * k <= c; ++k) {
    const cpx a = z[k], b = std::conj(z[c - k]);
    const cpx e = 0.5 * (a + b);
    const cpx o = cpx{0.0, -0.5} * (a - b);
    const cpx t = p.split[k] * o;
    out[k] = e + t;
    if (2 * k != c) out[c - k] = std::conj(e - t);
  }
}

std::vector<std::complex<double>> real_fft::forward(std::span<const double> x) const {
  std::vector<std::complex<double>> out(bins());
  forward(x, out);
  return out;
}

}  // namespace pinchoff::dsp
