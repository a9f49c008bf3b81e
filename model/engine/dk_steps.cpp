#include "model/engine/dk_steps.hpp"

#include <algorithm>
#include <cmath>

#include "base/error.hpp"
#include "model/device/jfet.hpp"

namespace pinchoff::model::detail {
namespace {

double max_abs(const Eigen::Ref<const Eigen::VectorXd>& v) noexcept {
  double m = 0.0;
  for (Eigen::Index k = 0; k < v.size(); ++k) m = std::max(m, std::fabs(v[k]));
  return m;
}

}  // namespace

bool wide_kernels_available() noexcept {
#if defined(__x86_64__) && (defined(__GNUC__) || defined(__clang__))
  __builtin_cpu_init();
  return __builtin_cpu_supports("avx2") && __builtin_cpu_supports("fma");
#else
  return false;
#endif
}

void check_options(const dk_options& opt) {
  if (opt.max_iterations < 1 || opt.max_iterations > 1000)
    throw internal_error("dk_options: max_iterations must be 1..1000");
  if (!(opt.tol_v > 0.0)) throw internal_error("dk_options: tol_v must be above 0 V");
  if (opt.max_substep_levels < 0 || opt.max_substep_levels > 16)
    throw internal_error("dk_options: max_substep_levels must be 0..16");
  if (opt.predictor_order < 0 || opt.predictor_order > 3)
    throw internal_error("dk_options: predictor_order must be 0..3");
}

std::array<double, 3> warm_start_weights(int order) noexcept {
  static constexpr double ab[4][3] = {{0, 0, 0}, {1, 0, 0}, {1.5, -0.5, 0}, {23.0 / 12, -16.0 / 12, 5.0 / 12}};
  const int o = std::clamp(order, 0, 3);
  return {ab[o][0], ab[o][1], ab[o][2]};
}

void refine_dc_ports(const dk_matrices& m, std::span<const device_consts> devs, double supply_v,
                     const Eigen::VectorXd& q, Eigen::VectorXd& v) {
  const int k = static_cast<int>(devs.size()), np = 2 * k, ni = 3 * k;
  const Eigen::Vector2d u(supply_v, 0.0);
  const Eigen::VectorXd p = m.d * q + m.e * u;
  Eigen::VectorXd vp = v;
  Eigen::VectorXd i(ni);
  Eigen::MatrixXd jf = Eigen::MatrixXd::Zero(ni, np);
  bool ok = false;
  for (int it = 0; it < 20; ++it) {
    for (int j = 0; j < k; ++j) {
      const port_currents c = evaluate_ports(devs[static_cast<std::size_t>(j)], vp[2 * j], vp[2 * j + 1]);
      i.segment<3>(3 * j) << c.igs_a, c.igd_a, c.id_a;
      // JFET j's 3x2 block of the block-diagonal Jf: rows igs, igd, id; columns vgs, vds.
      jf.block<3, 2>(3 * j, 2 * j) << c.ggs_s, 0.0, c.ggd_s, -c.ggd_s, c.gm_s, c.gds_s;
    }
    const Eigen::VectorXd res = p + m.f * i - vp;
    const Eigen::MatrixXd jac = m.f * jf - Eigen::MatrixXd::Identity(np, np);
    const Eigen::FullPivLU<Eigen::MatrixXd> lu(jac);
    if (!lu.isInvertible()) break;
    const Eigen::VectorXd delta = lu.solve(-res);
    if (!delta.allFinite()) break;
    vp += delta;
    if (max_abs(delta) <= 1e-15 * (1.0 + max_abs(vp))) {
      ok = true;
      break;
    }
  }
  if (ok && max_abs(vp - v) <= 1e-6) v = vp;
}

double junction_step_scale(const device_consts& d, double v0, double v1, double d0, double d1) noexcept {
  const double gs_old = v0, gd_old = v0 - v1;
  const double gs_new = gs_old + d0, gd_new = gd_old + d0 - d1;
  if (!(gs_new > d.vcrit_v || gd_new > d.vcrit_v)) return 1.0;
  double alpha = 1.0;
  const double ls = limit_junction(gs_new, gs_old, d.nvt_v, d.vcrit_v);
  if (ls != gs_new) alpha = std::min(alpha, std::max(1e-3, (ls - gs_old) / (gs_new - gs_old)));
  const double ld = limit_junction(gd_new, gd_old, d.nvt_v, d.vcrit_v);
  if (ld != gd_new) alpha = std::min(alpha, std::max(1e-3, (ld - gd_old) / (gd_new - gd_old)));
  return alpha;
}

}  // namespace pinchoff::model::detail
