#include "model/device/fit.hpp"

#include <algorithm>
#include <cmath>
#include <limits>
#include <sstream>
#include <utility>

#include <Eigen/Cholesky>
#include <Eigen/Core>
#include <Eigen/LU>

#include "base/error.hpp"
#include "base/units.hpp"
#include "model/device/parameter_ranges.hpp"

namespace pinchoff::model {
namespace {

// Self-bias with the gate at 0 V: id = k idss (1 + id rs / vp)^2 (vp < 0), the root with
// 1 + id rs / vp > 0 (Boylestad & Nashelsky ch. 7).
double jig_current(double idss, double vp, double rs) {
  const double a = rs / vp;  // < 0
  if (rs == 0.0) return idss;
  // idss a^2 id^2 + (2 idss a - 1) id + idss = 0
  const double qa = idss * a * a, qb = 2.0 * idss * a - 1.0, qc = idss;
  const double disc = std::sqrt(std::max(0.0, qb * qb - 4.0 * qa * qc));
  // The smaller root keeps 1 + a id > 0; written to avoid cancellation.
  return 2.0 * qc / (-qb + disc);
}

double model_current(reading_kind kind, const bench_reading& r, double idss, double vp, double lambda) {
  const double clm = 1.0 + lambda * (r.has_vds ? r.vds_v : 0.0);
  if (kind == reading_kind::self_bias_jig) return jig_current(idss * clm, vp, r.x);
  const double u = 1.0 - r.x / vp;
  return u > 0.0 ? idss * clm * u * u : 0.0;
}

// The Jacobian has three columns, the third zero when lambda is not fitted; the normal
// matrices are fixed 3x3 (identity-padded in the unused row and column), so the solves are
// Eigen's fixed-size ones rather than its dynamic-size factorisations: this file compiles in
// under half the time (19 to 8 CPU-s at -O3), for the same numbers to rounding.
using jacobian_t = Eigen::Matrix<double, Eigen::Dynamic, 3>;

struct core_fit {
  Eigen::Vector3d q;  // [ln idss, ln(-vp), lambda]
  Eigen::VectorXd r;  // relative residuals
  jacobian_t jm;      // Jacobian of r by the parameters (column 2 zero unless lambda is fitted)
  double cost{};
  int iterations{};
};

// J^T J for the fitted parameters, with 1 on the diagonal of an unfitted one.
Eigen::Matrix3d normal_matrix(const jacobian_t& jm, int np) {
  Eigen::Matrix3d jtj = Eigen::Matrix3d::Zero();
  for (int a = 0; a < 3; ++a)
    for (int b = a; b < 3; ++b) jtj(a, b) = jtj(b, a) = jm.col(a).dot(jm.col(b));
  for (int k = np; k < 3; ++k) jtj(k, k) = 1.0;
  return jtj;
}

// Levenberg-Marquardt on the mirrored (n-channel) readings with np parameters.
core_fit fit_core(reading_kind kind, const std::vector<bench_reading>& rd, int np) {
  const int m = static_cast<int>(rd.size());
  // Start: straight line sqrt(id) = c + s vgs with c = sqrt(idss), s = -sqrt(idss)/vp,
  // by least squares about the mean of vgs (the closed form of a straight-line fit).
  std::vector<double> xs(static_cast<std::size_t>(m)), ys(static_cast<std::size_t>(m));
  double x_mean = 0.0, y_mean = 0.0;
  for (int i = 0; i < m; ++i) {
    const std::size_t k = static_cast<std::size_t>(i);
    xs[k] = kind == reading_kind::gate_sweep ? rd[i].x : -rd[i].id_a * rd[i].x;
    ys[k] = std::sqrt(rd[i].id_a);
    x_mean += xs[k] / m;
    y_mean += ys[k] / m;
  }
  double sxx = 0.0, sxy = 0.0;
  for (std::size_t k = 0; k < xs.size(); ++k) {
    sxx += (xs[k] - x_mean) * (xs[k] - x_mean);
    sxy += (xs[k] - x_mean) * (ys[k] - y_mean);
  }
  const double slope = sxy / sxx;
  const Eigen::Vector2d line(y_mean - slope * x_mean, slope);
  if (!(line[0] > 0 && line[1] > 0))
    throw input_error(
        "these readings cannot come from a square-law part: the current does not fall as the gate goes more negative "
        "(check the columns and signs; a self-bias jig needs a larger current for a smaller source resistor)");
  // Parameters: q = [ln idss, ln(-vp), lambda].
  Eigen::Vector3d q(std::log(line[0] * line[0]), std::log(line[0] / line[1]), 0.0);

  auto residuals = [&](const Eigen::Vector3d& p, Eigen::VectorXd& r) {
    r.resize(m);
    for (int i = 0; i < m; ++i)
      r[i] = model_current(kind, rd[i], std::exp(p[0]), -std::exp(p[1]), np == 3 ? p[2] : 0.0) / rd[i].id_a - 1.0;
  };
  auto jacobian = [&](const Eigen::Vector3d& p, jacobian_t& jm) {
    jm.setZero(m, 3);
    Eigen::VectorXd rp, rm;
    for (int k = 0; k < np; ++k) {
      const double h = 1e-6 * std::max(1.0, std::fabs(p[k]));
      Eigen::Vector3d pp = p, pm = p;
      pp[k] += h;
      pm[k] -= h;
      residuals(pp, rp);
      residuals(pm, rm);
      jm.col(k) = (rp - rm) / (2.0 * h);
    }
  };

  Eigen::VectorXd r;
  jacobian_t jm;
  residuals(q, r);
  double cost = r.squaredNorm();
  double mu = 1e-3;
  int it = 0;
  for (; it < 200; ++it) {
    jacobian(q, jm);
    const Eigen::Matrix3d jtj = normal_matrix(jm, np);
    const Eigen::Vector3d g(jm.col(0).dot(r), jm.col(1).dot(r), jm.col(2).dot(r));
    bool improved = false;
    for (int tries = 0; tries < 30; ++tries) {
      Eigen::Matrix3d damped = jtj;
      for (int k = 0; k < np; ++k) damped(k, k) += mu * std::max(jtj(k, k), 1e-30);
      const Eigen::Vector3d step = damped.ldlt().solve(-g);
      Eigen::Vector3d trial = q;
      trial.head(np) += step.head(np);
      Eigen::VectorXd rt;
      residuals(trial, rt);
      const double ct = rt.squaredNorm();
      if (std::isfinite(ct) && ct <= cost) {
        const double change = cost - ct;
        q = trial;
        r = rt;
        cost = ct;
        mu = std::max(mu / 3.0, 1e-12);
        improved = true;
        if (change <= 1e-15 * std::max(cost, 1e-300) || step.norm() < 1e-14) it = 1000;
        break;
      }
      mu *= 4.0;
    }
    if (!improved || it >= 1000) break;
  }

  core_fit out;
  out.q = q;
  out.r = r;
  out.cost = cost;
  out.iterations = std::min(it, 200);
  jacobian(q, out.jm);
  return out;
}

}  // namespace

fit_result fit_square_law(reading_kind kind, const std::vector<bench_reading>& in) {
  if (in.empty()) throw input_error("no readings to fit");
  fit_result res;
  // Sign: all currents positive (n-channel) or all negative (p-channel, fitted as its mirror).
  const bool all_pos = std::all_of(in.begin(), in.end(), [](const bench_reading& r) { return r.id_a > 0; });
  const bool all_neg = std::all_of(in.begin(), in.end(), [](const bench_reading& r) { return r.id_a < 0; });
  if (!all_pos && !all_neg) {
    for (const bench_reading& r : in)
      if (!(r.id_a != 0.0) || (r.id_a > 0) != (in.front().id_a > 0))
        throw input_error("line " + std::to_string(r.line) + ": id_a " + base::format_si(r.id_a, "A") +
                          (r.id_a == 0.0 ? " is zero: a reading in cutoff says nothing about IDSS and VP; leave it out"
                                         : " has the opposite sign to the first reading (all readings must be of one part polarity)"));
  }
  res.p_channel = all_neg;
  std::vector<bench_reading> rd = in;
  if (res.p_channel)
    for (bench_reading& r : rd) {
      r.id_a = -r.id_a;
      if (kind == reading_kind::gate_sweep) r.x = -r.x;
      r.vds_v = -r.vds_v;
    }
  if (kind == reading_kind::self_bias_jig)
    for (const bench_reading& r : rd)
      if (r.x < 0) throw input_error("line " + std::to_string(r.line) + ": rs_ohm must not be negative");

  // Whether lambda can be told from the data: vds given on every row and varying.
  bool vds_all = std::all_of(rd.begin(), rd.end(), [](const bench_reading& r) { return r.has_vds; });
  double vmin = 1e300, vmax = -1e300;
  for (const bench_reading& r : rd) {
    vmin = std::min(vmin, r.vds_v);
    vmax = std::max(vmax, r.vds_v);
  }
  res.lambda_fitted = vds_all && (vmax - vmin) > 1.0 && rd.size() >= 4;
  const int np = res.lambda_fitted ? 3 : 2;
  const int m = static_cast<int>(rd.size());
  if (m < np)
    throw input_error("too few readings to fit: " + std::to_string(m) + " given, at least " + std::to_string(np) +
                      " needed for " + std::to_string(np) + " parameters (and one more for their errors)");
  {
    double xmin = rd.front().x, xmax = rd.front().x;
    for (const bench_reading& r : rd) {
      xmin = std::min(xmin, r.x);
      xmax = std::max(xmax, r.x);
    }
    if (!(xmax > xmin))
      throw input_error(std::string("every reading has the same ") + (kind == reading_kind::gate_sweep ? "vgs_v" : "rs_ohm") +
                        ": at least two different settings are needed to tell IDSS from VP");
  }

  const core_fit cf = fit_core(kind, rd, np);
  const Eigen::Vector3d q = cf.q;
  const Eigen::VectorXd& r = cf.r;
  const double cost = cf.cost;
  res.iterations = cf.iterations;
  res.idss_a = std::exp(q[0]);
  res.vp_v = -std::exp(q[1]);
  res.lambda_per_v = np == 3 ? q[2] : 0.0;
  const double dof = m - np;
  // IDSS at the readings' own VDS (their mean, in the n-channel frame), where the bench
  // measured it; with lambda not fitted it equals the model's IDSS.
  if (vds_all) {
    double sum = 0.0;
    for (const bench_reading& r : rd) sum += r.vds_v;
    res.idss_vds_v = std::max(0.0, sum / m);
  }
  res.idss_at_vds_a = res.idss_a * (1.0 + res.lambda_per_v * res.idss_vds_v);
  if (dof > 0) {
    const double s2 = cost / dof;
    const Eigen::Matrix3d cov = normal_matrix(cf.jm, np).inverse() * s2;
    res.idss_se_a = res.idss_a * std::sqrt(std::max(0.0, cov(0, 0)));
    res.vp_se_v = std::fabs(res.vp_v) * std::sqrt(std::max(0.0, cov(1, 1)));
    res.lambda_se_per_v = np == 3 ? std::sqrt(std::max(0.0, cov(2, 2))) : 0.0;
    // Propagated through the covariance: d/d ln idss = idss_at, d/d lambda = idss vds.
    double var = res.idss_at_vds_a * res.idss_at_vds_a * cov(0, 0);
    if (np == 3) {
      const double gl = res.idss_a * res.idss_vds_v;
      var += 2.0 * res.idss_at_vds_a * gl * cov(0, 2) + gl * gl * cov(2, 2);
    }
    res.idss_at_vds_se_a = std::sqrt(std::max(0.0, var));
  } else {
    // As many readings as parameters: the part is determined exactly, with no scatter
    // left to estimate errors from.
    res.idss_se_a = res.vp_se_v = res.lambda_se_per_v = res.idss_at_vds_se_a = std::numeric_limits<double>::quiet_NaN();
  }
  res.rms_residual_ratio = std::sqrt(cost / m);
  // Readings whose current hardly falls with the gate voltage are matched best by a part
  // that never pinches off: the fit runs VP off to infinity (or IDSS to zero), and the
  // covariance is singular. Such readings do not determine the parameters; say so rather
  // than report an infinite or NaN figure.
  const std::pair<double, const char*> figures[] = {
      {res.idss_a, "IDSS"},           {res.vp_v, "VP"},           {res.lambda_per_v, "lambda"},
      {res.idss_se_a, "IDSS's error"}, {res.vp_se_v, "VP's error"}, {res.lambda_se_per_v, "lambda's error"}};
  for (const auto& [value, name] : figures) {
    // With as many readings as parameters the errors are NaN by design (no scatter left).
    const bool is_error = name == figures[3].second || name == figures[4].second || name == figures[5].second;
    if (is_error && dof == 0) continue;
    if (!std::isfinite(value) || (value == 0.0 && (name == figures[0].second || name == figures[1].second)))
      throw input_error(std::string("these readings do not determine IDSS and VP: the best fit sends ") + name + " to " +
                        base::format_number(value) +
                        " (the current hardly falls as the gate goes more negative; take readings from VGS = 0 "
                        "down to near cut-off, and check the columns and signs)");
  }

  // A row "does not fit" when, refitted without it, the others predict it more than four
  // of their own standard deviations away (a deleted-residual test, Cook & Weisberg,
  // Residuals and Influence in Regression, 1982); the row then cannot pull the fit or
  // inflate the scatter it is judged by. Needs at least three spare degrees of freedom.
  // The refit without row i is not run: linearised at the fit (the tangent-plane
  // approximation Cook & Weisberg use for nonlinear least squares), the deleted fit's
  // residual at row i is r_i / (1 - h_i) and its scatter
  // s_(i)^2 = (SSR - r_i^2 / (1 - h_i)) / (m - 1 - p), with h_i = J_i (J^T J)^-1 J_i^T the
  // row's leverage (ch. 2, the deletion identities). So the test costs one pass over the
  // rows, not one fit per row, which made the fit quadratic in rows.
  std::vector<bool> flagged(static_cast<std::size_t>(m), false);
  if (dof >= 3) {
    const Eigen::Matrix3d jtj_inv = normal_matrix(cf.jm, np).inverse();
    for (int i = 0; i < m; ++i) {
      const double h = cf.jm.row(i) * jtj_inv * cf.jm.row(i).transpose();
      const double keep = 1.0 - h;
      if (!(keep > 1e-9)) continue;  // the row alone fixes a parameter: nothing to judge it by
      const double pred = r[i] / keep;
      const double s2_loo = (cost - r[i] * r[i] / keep) / (m - 1 - np);
      const double s_loo = std::sqrt(std::max(0.0, s2_loo));
      flagged[static_cast<std::size_t>(i)] = std::fabs(pred) > 4.0 * s_loo && std::fabs(pred) > 1e-6;
    }
  }
  for (int i = 0; i < m; ++i) {
    fit_row row;
    row.reading = in[i];
    const double id_model = model_current(kind, rd[i], res.idss_a, res.vp_v, res.lambda_per_v);
    const double vgs = kind == reading_kind::gate_sweep ? rd[i].x : -id_model * rd[i].x;
    row.vgs_v = res.p_channel ? -vgs : vgs;
    row.id_model_a = res.p_channel ? -id_model : id_model;
    row.residual_ratio = r[i];
    row.flagged = flagged[static_cast<std::size_t>(i)];
    res.rows.push_back(row);
  }
  if (res.p_channel) res.vp_v = -res.vp_v;
  return res;
}

std::string jfet_block(const fit_result& r) {
  // Values in the stage-file notation ("5.170m"), the error as a comment.
  auto value = [](double v) {
    std::string t = base::format_si(v, "", 4);
    t.erase(std::remove(t.begin(), t.end(), ' '), t.end());
    return t;
  };
  std::ostringstream os;
  os << "[jfet]\n";
  if (r.p_channel) os << "polarity = \"p\"\n";
  const bool exact = std::isnan(r.idss_se_a);
  os << "idss = \"" << value(r.idss_at_vds_a) << "\"    # "
     << (exact ? std::string("from two readings, no error estimate") : "± " + base::format_si(r.idss_at_vds_se_a, "A", 2)) << "\n";
  if (r.idss_vds_v > 0.0) os << "idss_vds = " << base::format_number(r.idss_vds_v, 3) << "    # V: the readings' mean VDS\n";
  os << "vp = " << base::format_number(r.vp_v, 4) << "    # "
     << (exact ? std::string("from two readings, no error estimate") : "± " + base::format_si(r.vp_se_v, "V", 2)) << "\n";
  if (r.lambda_fitted)
    os << "lambda = " << base::format_number(r.lambda_per_v, 3) << "    # ± " << base::format_number(r.lambda_se_per_v, 2) << " /V\n";
  return os.str();
}

namespace {

bench_table readings_of_rows(const base::csv_table& t, const std::vector<std::size_t>& rows) {
  const int c_vgs = t.column("vgs_v"), c_rs = t.column("rs_ohm"), c_id = t.column("id_a"), c_vds = t.column("vds_v"),
            c_vs = t.column("vs_v");
  if ((c_id < 0) == (c_vs < 0) || (c_vs >= 0 && c_rs < 0)) {
    if (c_id >= 0 && c_vs >= 0)
      throw input_error(t.source + ": give the current as 'id_a' or the source voltage as 'vs_v' (with 'rs_ohm'), not both");
    if (c_vs >= 0) throw input_error(t.source + ": column 'vs_v' (the source voltage of a self-bias jig) needs 'rs_ohm' beside it");
    throw input_error(t.source + ": missing column 'id_a' (the drain current, A; or 'vs_v', a self-bias jig's source voltage)");
  }
  if ((c_vgs < 0) == (c_rs < 0))
    throw input_error(t.source + ": give exactly one of the columns 'vgs_v' (gate sweep) or 'rs_ohm' (self-bias jig)");
  for (const std::string& c : t.columns)
    if (c != "vgs_v" && c != "rs_ohm" && c != "id_a" && c != "vds_v" && c != "vs_v" && c != "part")
      throw input_error(t.source + ": unknown column '" + c + "' (expected part, vgs_v or rs_ohm, id_a or vs_v, vds_v)");
  bench_table b;
  b.kind = c_vgs >= 0 || c_vs >= 0 ? reading_kind::gate_sweep : reading_kind::self_bias_jig;
  b.source_voltage = c_vs >= 0;
  for (const std::size_t k : rows) {
    const std::vector<double>& row = t.rows[k];
    bench_reading r;
    r.line = t.line_of_row[k];
    if (b.source_voltage) {
      // The meter reads the source: vgs = -vs with the gate at 0 V, id = vs / rs.
      const double rs = row[static_cast<std::size_t>(c_rs)], vs = row[static_cast<std::size_t>(c_vs)];
      if (!(rs > 0))
        throw input_error(t.source + ":" + std::to_string(r.line) + ": rs_ohm must be above 0 beside vs_v (the current is vs_v / rs_ohm)");
      r.x = -vs;
      r.id_a = vs / rs;
    } else {
      r.x = row[static_cast<std::size_t>(c_vgs >= 0 ? c_vgs : c_rs)];
      r.id_a = row[static_cast<std::size_t>(c_id)];
    }
    if (c_vds >= 0) {
      r.vds_v = row[static_cast<std::size_t>(c_vds)];
      r.has_vds = true;
    }
    b.readings.push_back(r);
  }
  return b;
}

}  // namespace

bench_table readings_from_table(const base::csv_table& t) {
  std::vector<std::size_t> all(t.rows.size());
  for (std::size_t k = 0; k < all.size(); ++k) all[k] = k;
  return readings_of_rows(t, all);
}

std::vector<part_readings> parts_from_table(const base::csv_table& t) {
  const int c_part = t.column("part");
  if (c_part < 0) {
    part_readings p;
    p.table = readings_from_table(t);
    if (!t.line_of_row.empty()) {
      p.first_line = t.line_of_row.front();
      p.last_line = t.line_of_row.back();
    }
    return {p};
  }
  std::vector<std::string> names;
  std::vector<std::vector<std::size_t>> rows;
  for (std::size_t k = 0; k < t.rows.size(); ++k) {
    const std::string& name = t.text_rows[k][static_cast<std::size_t>(c_part)];
    if (name.empty())
      throw input_error(t.source + ":" + std::to_string(t.line_of_row[k]) + ": the 'part' cell is empty (name the part each row is of)");
    const std::size_t at = static_cast<std::size_t>(std::find(names.begin(), names.end(), name) - names.begin());
    if (at == names.size()) {
      names.push_back(name);
      rows.emplace_back();
    }
    rows[at].push_back(k);
  }
  std::vector<part_readings> out;
  for (std::size_t p = 0; p < names.size(); ++p) {
    part_readings pr;
    pr.name = names[p];
    pr.table = readings_of_rows(t, rows[p]);
    pr.first_line = t.line_of_row[rows[p].front()];
    pr.last_line = t.line_of_row[rows[p].back()];
    out.push_back(std::move(pr));
  }
  if (out.empty()) out.push_back(part_readings{"", 0, 0, readings_from_table(t)});
  return out;
}

const base::csv_layout& bench_layout() {
  using base::unit;
  static const base::csv_layout layout{
      {"part", "flagged_lines", "idss_se_a", "vp_se_v", "lambda_se_per_v"},
      {{"vgs_v", unit::volt}, {"vs_v", unit::volt}, {"vds_v", unit::volt}, {"id_a", unit::ampere}, {"rs_ohm", unit::ohm},
       {"idss_a", unit::ampere}, {"vp_v", unit::volt}, {"lambda_per_v", unit::per_volt}, {"idss_vds_v", unit::volt}}};
  return layout;
}

part_figures figures_of(const fit_result& f, std::string name, int line) {
  part_figures p;
  p.name = std::move(name);
  p.p_channel = f.p_channel;
  p.idss_a = f.idss_at_vds_a;
  p.vp_v = f.vp_v;
  p.lambda_per_v = f.lambda_per_v;
  p.idss_vds_v = f.idss_vds_v;
  p.idss_se_a = f.idss_at_vds_se_a;
  p.vp_se_v = f.vp_se_v;
  p.lambda_se_per_v = f.lambda_fitted ? f.lambda_se_per_v : std::numeric_limits<double>::quiet_NaN();
  p.line = line;
  return p;
}

bool is_parts_table(const base::csv_table& t) { return t.column("idss_a") >= 0 || t.column("vp_v") >= 0; }

std::vector<part_figures> parts_from_parts_table(const base::csv_table& t) {
  const int c_part = t.column("part"), c_idss = t.column("idss_a"), c_vp = t.column("vp_v"),
            c_lambda = t.column("lambda_per_v"), c_vds = t.column("idss_vds_v");
  if (c_part < 0 || c_idss < 0 || c_vp < 0)
    throw input_error(t.source + ": a parts table needs the columns 'part', 'idss_a' and 'vp_v' (as the fit of a bag writes it)");
  static const std::vector<std::string> known{"part", "idss_a", "vp_v", "lambda_per_v", "idss_vds_v", "idss_se_a",
                                              "vp_se_v", "lambda_se_per_v", "readings", "rms_misfit_percent", "flagged_lines"};
  for (const std::string& c : t.columns)
    if (std::find(known.begin(), known.end(), c) == known.end())
      throw input_error(t.source + ": unknown column '" + c + "' in a parts table (expected part, idss_a, vp_v, lambda_per_v, idss_vds_v)");
  std::vector<part_figures> out;
  for (std::size_t k = 0; k < t.rows.size(); ++k) {
    const std::vector<double>& row = t.rows[k];
    const std::string where = t.source + ":" + std::to_string(t.line_of_row[k]) + ": ";
    part_figures p;
    p.name = t.text_rows[k][static_cast<std::size_t>(c_part)];
    p.line = t.line_of_row[k];
    if (p.name.empty()) throw input_error(where + "the 'part' cell is empty (name the part each row is of)");
    for (const part_figures& q : out)
      if (q.name == p.name)
        throw input_error(where + "part '" + p.name + "' is listed twice (first on line " + std::to_string(q.line) + ")");
    const double idss = row[static_cast<std::size_t>(c_idss)], vp = row[static_cast<std::size_t>(c_vp)];
    p.lambda_per_v = c_lambda >= 0 ? row[static_cast<std::size_t>(c_lambda)] : 0.0;
    p.idss_vds_v = c_vds >= 0 ? std::fabs(row[static_cast<std::size_t>(c_vds)]) : 0.0;
    // Bench signs: a p-channel part has a negative current and a positive VP.
    if (!(vp != 0.0) || (idss > 0) != (vp < 0))
      throw input_error(where + "idss_a and vp_v must have opposite signs (n-channel: idss_a > 0, vp_v < 0; p-channel: the reverse)");
    p.p_channel = vp > 0;
    p.idss_a = std::fabs(idss);
    p.vp_v = vp;
    const std::pair<const char*, std::string> checks[] = {
        {"idss_a", base::bounds_refusal("idss_a", p.idss_a, ranges::idss, base::unit::ampere)},
        {"vp_v", base::bounds_refusal("vp_v", std::fabs(vp), ranges::vp, base::unit::volt)},
        {"lambda_per_v", base::bounds_refusal("lambda_per_v", p.lambda_per_v, ranges::lambda, base::unit::per_volt)},
        {"idss_vds_v", base::bounds_refusal("idss_vds_v", p.idss_vds_v, ranges::idss_vds, base::unit::volt)}};
    for (const auto& [name, refusal] : checks)
      if (!refusal.empty()) throw input_error(where + refusal);
    p.idss_se_a = p.vp_se_v = p.lambda_se_per_v = std::numeric_limits<double>::quiet_NaN();
    out.push_back(std::move(p));
  }
  if (out.empty()) throw input_error(t.source + ": the parts table lists no parts");
  return out;
}

std::string part_label(const std::string& name, int first_line, int last_line) {
  if (name.empty()) return {};
  return "part '" + name + "' (lines " + std::to_string(first_line) + "-" + std::to_string(last_line) + ")";
}

bag_fit fit_bag(const base::csv_table& t) {
  bag_fit bag;
  for (part_readings& pr : parts_from_table(t)) {
    try {
      fit_result f = fit_square_law(pr.table.kind, pr.table.readings);
      bag.parts.push_back({std::move(pr), std::move(f)});
    } catch (const input_error& e) {
      bag.unfit.push_back({pr.name, pr.first_line, pr.last_line, e.what()});
    }
  }
  if (bag.parts.empty() && !bag.unfit.empty()) {
    if (bag.unfit.size() == 1) {
      const unfit_part& u = bag.unfit.front();
      const std::string label = part_label(u.name, u.first_line, u.last_line);
      throw input_error(t.source + ": " + (label.empty() ? std::string() : label + ": ") + u.reason);
    }
    std::string all;
    for (const unfit_part& u : bag.unfit) all += "; " + part_label(u.name, u.first_line, u.last_line) + ": " + u.reason;
    throw input_error(t.source + ": no part could be fitted" + all);
  }
  return bag;
}

std::vector<part_figures> read_parts(const base::csv_table& t, std::vector<unfit_part>* unfit) {
  if (is_parts_table(t)) return parts_from_parts_table(t);
  bag_fit bag = fit_bag(t);
  if (!bag.unfit.empty() && unfit == nullptr) {
    const unfit_part& u = bag.unfit.front();
    throw input_error(t.source + ": " + part_label(u.name, u.first_line, u.last_line) + ": " + u.reason);
  }
  if (unfit != nullptr) *unfit = bag.unfit;
  std::vector<part_figures> out;
  for (const fitted_readings& p : bag.parts) out.push_back(figures_of(p.fit, p.readings.name, p.readings.first_line));
  return out;
}

}  // namespace pinchoff::model
