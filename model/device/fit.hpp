#pragma once
// Fitting the square-law parameters of one JFET to bench readings.
//
// Two kinds of reading:
// - gate sweep: the gate-source voltage is set and the drain current read (vgs_v, id_a);
// - self-bias jig: a known source resistor, gate grounded, so vgs = -id rs (rs_ohm, id_a).
// Both may carry the drain-source voltage of each reading (vds_v); lambda is fitted when
// it varies enough to tell, else held at 0. Readings are taken as in saturation.
//
// The fit is Levenberg-Marquardt (Levenberg 1944; Marquardt 1963) on relative residuals
// (model - reading) / reading, so a 1 % error weighs the same at every current; the start
// comes from the straight line sqrt(id) = sqrt(idss) (1 - vgs / vp), exact for exact data.
// Standard errors are from the covariance s^2 (J^T J)^-1, s^2 = SSR / (rows - parameters).
#include <string>
#include <vector>

#include "base/csv.hpp"

namespace pinchoff::model {

enum class reading_kind { gate_sweep, self_bias_jig };

struct bench_reading {
  double x{};                ///< vgs_v (gate sweep) or rs_ohm (jig)
  double id_a{};
  double vds_v{0.0};
  bool has_vds{false};
  int line{0};               ///< file line, for messages
};

struct fit_row {
  bench_reading reading;
  double vgs_v{};            ///< the gate-source voltage of the reading (computed for the jig)
  double id_model_a{};
  double residual_ratio{};   ///< (model - reading) / reading
  bool flagged{false};       ///< does not fit: the others predict it more than 4 of their standard deviations off
};

struct fit_result {
  bool p_channel{false};
  double idss_a{}, vp_v{}, lambda_per_v{};
  double idss_se_a{}, vp_se_v{}, lambda_se_per_v{};  ///< NaN with exactly as many readings as parameters
  bool lambda_fitted{false};
  int iterations{};
  double rms_residual_ratio{};
  std::vector<fit_row> rows;
};

/// Fits the readings (all of one kind); two readings determine IDSS and VP exactly (no
/// error estimate), three or more give standard errors. Throws input_error when there are
/// too few rows,
/// a current is not positive (or of mixed sign), or the readings cannot come from a
/// square-law part (the current does not fall as the gate goes more negative).
fit_result fit_square_law(reading_kind kind, const std::vector<bench_reading>& readings);

/// The readings of a bench table (base::read_csv_file / parse_csv): columns id_a, exactly one
/// of vgs_v (gate sweep) or rs_ohm (self-bias jig), and optionally vds_v. Throws input_error,
/// starting with the table's source, for a missing, doubled-up or unknown column.
struct bench_table {
  reading_kind kind{reading_kind::gate_sweep};
  std::vector<bench_reading> readings;
};
bench_table readings_from_table(const base::csv_table& t);

/// The most a CSV of bench readings may hold. A row is 10 to 40 bytes, so 16 MiB is several
/// hundred thousand readings: more than any bench session or curve-tracer export, and still
/// fitted in seconds (the fit is linear in rows).
inline constexpr base::text_file_kind bench_readings_file_kind{"CSV file of bench readings", std::size_t{16} << 20,
                                                               "a bench table is a few kilobytes"};

/// A [jfet] block to paste into a stage file.
std::string jfet_block(const fit_result& r);

}  // namespace pinchoff::model
