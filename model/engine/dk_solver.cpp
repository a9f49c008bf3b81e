#include "model/engine/dk_solver.hpp"

#include <utility>

#include "model/engine/dk_steps.hpp"

#if defined(__x86_64__) && (defined(__GNUC__) || defined(__clang__))
#include <immintrin.h>
#define PINCHOFF_TRACK_WIDE 1
#else
#define PINCHOFF_TRACK_WIDE 0
#endif

namespace pinchoff::model {
namespace {

// phi = A + cj md, then out = phi s, column by column over `rows` rows (a multiple of 4,
// the padding rows zero in a and cj, so zero in phi and out): each column of out is a sum
// of phi's columns weighted by s's entries, added in the same order in both kernel sets.
void factor_portable(const double* __restrict a, const double* __restrict cj, const double* __restrict md,
                     const double* __restrict s, int ns, int r, int rows, double* __restrict phi,
                     double* __restrict out) noexcept {
  for (int c = 0; c < ns; ++c) {
    double* __restrict pc = phi + static_cast<std::ptrdiff_t>(c) * rows;
    const double* __restrict ac = a + static_cast<std::ptrdiff_t>(c) * rows;
    for (int i = 0; i < rows; ++i) pc[i] = ac[i];
    for (int q = 0; q < r; ++q) {
      const double m = md[q + static_cast<std::ptrdiff_t>(c) * r];
      const double* __restrict cq = cj + static_cast<std::ptrdiff_t>(q) * rows;
      for (int i = 0; i < rows; ++i) pc[i] += cq[i] * m;
    }
  }
  for (int j = 0; j < ns; ++j) {
    double* __restrict oj = out + static_cast<std::ptrdiff_t>(j) * rows;
    for (int i = 0; i < rows; ++i) oj[i] = 0.0;
    for (int c = 0; c < ns; ++c) {
      const double sc = s[c + static_cast<std::ptrdiff_t>(j) * ns];
      const double* __restrict pc = phi + static_cast<std::ptrdiff_t>(c) * rows;
      for (int i = 0; i < rows; ++i) oj[i] += pc[i] * sc;
    }
  }
}

#if PINCHOFF_TRACK_WIDE
// The same with P packets of 4 rows held in registers.
template <int P>
__attribute__((target("avx2,fma"))) void factor_block(const double* __restrict a, const double* __restrict cj,
                                                      const double* __restrict md, const double* __restrict s, int ns,
                                                      int r, double* __restrict phi, double* __restrict out) noexcept {
  constexpr int rows = 4 * P;
  __m256d acc[P];
  for (int c = 0; c < ns; ++c) {
    for (int k = 0; k < P; ++k) acc[k] = _mm256_loadu_pd(a + c * rows + 4 * k);
    for (int q = 0; q < r; ++q) {
      const __m256d m = _mm256_broadcast_sd(md + q + c * r);
      for (int k = 0; k < P; ++k) acc[k] = _mm256_fmadd_pd(_mm256_loadu_pd(cj + q * rows + 4 * k), m, acc[k]);
    }
    for (int k = 0; k < P; ++k) _mm256_storeu_pd(phi + c * rows + 4 * k, acc[k]);
  }
  for (int j = 0; j < ns; ++j) {
    for (int k = 0; k < P; ++k) acc[k] = _mm256_setzero_pd();
    for (int c = 0; c < ns; ++c) {
      const __m256d sc = _mm256_broadcast_sd(s + c + j * ns);
      for (int k = 0; k < P; ++k) acc[k] = _mm256_fmadd_pd(_mm256_loadu_pd(phi + c * rows + 4 * k), sc, acc[k]);
    }
    for (int k = 0; k < P; ++k) _mm256_storeu_pd(out + j * rows + 4 * k, acc[k]);
  }
}

// Up to 12 packets (48 states) in registers; more on the portable loop.
bool factor_wide(const double* a, const double* cj, const double* md, const double* s, int ns, int r, int rows,
                 double* phi, double* out) noexcept {
  switch (rows / 4) {
    case 1: factor_block<1>(a, cj, md, s, ns, r, phi, out); return true;
    case 2: factor_block<2>(a, cj, md, s, ns, r, phi, out); return true;
    case 3: factor_block<3>(a, cj, md, s, ns, r, phi, out); return true;
    case 4: factor_block<4>(a, cj, md, s, ns, r, phi, out); return true;
    case 5: factor_block<5>(a, cj, md, s, ns, r, phi, out); return true;
    case 6: factor_block<6>(a, cj, md, s, ns, r, phi, out); return true;
    case 7: factor_block<7>(a, cj, md, s, ns, r, phi, out); return true;
    case 8: factor_block<8>(a, cj, md, s, ns, r, phi, out); return true;
    case 9: factor_block<9>(a, cj, md, s, ns, r, phi, out); return true;
    case 10: factor_block<10>(a, cj, md, s, ns, r, phi, out); return true;
    case 11: factor_block<11>(a, cj, md, s, ns, r, phi, out); return true;
    case 12: factor_block<12>(a, cj, md, s, ns, r, phi, out); return true;
    default: return false;
  }
}
#else
bool factor_wide(const double*, const double*, const double*, const double*, int, int, int, double*, double*) noexcept {
  return false;
}
#endif

}  // namespace

dk_solver_base::dk_solver_base(dk_matrices m, const dk_options& opt, const network& net)
    : m_(std::move(m)), opt_(opt), sign_(net.sign), supply_v_(net.supply_v) {
  detail::check_options(opt_);
  const Eigen::Index ns = m_.states;
  track_rows_ = (ns + 3) / 4 * 4;
  track_a_.setZero(track_rows_, ns);
  track_a_.topRows(ns) = m_.a;
  track_cj_.setZero(track_rows_, 2 * m_.devices);
  track_md_.setZero(2 * m_.devices, ns);
  phi_.setZero(track_rows_, ns);
  tmp_.setZero(track_rows_, ns);
  track_wide_ = opt_.wide_kernels && detail::wide_kernels_available();
}

void dk_solver_base::monodromy_step(Eigen::MatrixXd& sensitivity) noexcept {
  const int ns = static_cast<int>(m_.states), r = static_cast<int>(track_md_.rows()),
            rows = static_cast<int>(track_rows_);
  if (ns == 0) return;
  if (!track_wide_ || !factor_wide(track_a_.data(), track_cj_.data(), track_md_.data(), sensitivity.data(), ns, r, rows,
                                   phi_.data(), tmp_.data()))
    factor_portable(track_a_.data(), track_cj_.data(), track_md_.data(), sensitivity.data(), ns, r, rows, phi_.data(),
                    tmp_.data());
  sensitivity = tmp_.topRows(ns);
}

}  // namespace pinchoff::model
