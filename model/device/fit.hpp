#pragma once
// Fitting the square-law parameters of one JFET to bench readings.
//
// Two kinds of reading:
// - gate sweep: the gate-source voltage is set and the drain current read (vgs_v, id_a);
// - self-bias jig: a known source resistor, gate grounded, so vgs = -id rs (rs_ohm, id_a);
//   or with the source voltage read instead of the current (rs_ohm, vs_v): then
//   vgs = -vs and id = vs / rs, a gate-sweep reading.
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
  /// The VDS (magnitude) IDSS is reported at: the mean VDS of the readings when they give
  /// it, else 0 (IDSS is then the model's current extrapolated to VDS = 0, as idss_a is).
  double idss_vds_v{0.0};
  double idss_at_vds_a{}, idss_at_vds_se_a{};  ///< idss_a (1 + lambda idss_vds) and its error (NaN as idss_se_a)
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

/// The readings of a bench table (base::read_csv_file / parse_csv with bench_layout()):
/// columns vgs_v and id_a (gate sweep), rs_ohm and id_a (self-bias jig), or rs_ohm and vs_v
/// (self-bias jig read as its source voltage: a gate sweep with vgs = -vs, id = vs / rs);
/// optionally vds_v, and `part` naming the part of each row in a file of many parts.
/// Throws input_error, starting with the table's source, for a missing, doubled-up or
/// unknown column, an empty part name, or a zero rs_ohm beside vs_v.
struct bench_table {
  reading_kind kind{reading_kind::gate_sweep};
  bool source_voltage{false};  ///< read as rs_ohm and vs_v
  std::vector<bench_reading> readings;
};
bench_table readings_from_table(const base::csv_table& t);

/// One part's readings in a file of many: its name and where its rows are.
struct part_readings {
  std::string name;  ///< empty in a file without a `part` column
  int first_line{}, last_line{};
  bench_table table;
};
/// The readings split by the `part` column, in the order each part first appears (a
/// part's rows need not be together); one unnamed part when there is no such column.
std::vector<part_readings> parts_from_table(const base::csv_table& t);

/// How a bench or parts CSV is read: the text columns (part names, and the parts table's
/// error and flag columns, which may be empty) and each column's unit, so "3.965 mA" and
/// "100R" are read in their column's unit.
const base::csv_layout& bench_layout();

/// The most a CSV of bench readings may hold. A row is 10 to 40 bytes, so 16 MiB is several
/// hundred thousand readings: more than any bench session or curve-tracer export, and still
/// fitted in seconds (the fit is linear in rows).
inline constexpr base::text_file_kind bench_readings_file_kind{"CSV file of bench readings", std::size_t{16} << 20,
                                                               "a bench table is a few kilobytes"};

/// A part as the bench names it: IDSS at the VDS it was measured at (the parts table's row).
struct part_figures {
  std::string name;
  bool p_channel{false};
  double idss_a{}, vp_v{}, lambda_per_v{}, idss_vds_v{};
  double idss_se_a{}, vp_se_v{}, lambda_se_per_v{};  ///< NaN where not known
  int line{};                                          ///< first line of the part in its file
  /// The model's IDSS (its current extrapolated to VDS = 0): idss_a / (1 + lambda idss_vds).
  double model_idss_a() const noexcept { return idss_a / (1.0 + lambda_per_v * idss_vds_v); }
};
part_figures figures_of(const fit_result& f, std::string name, int line);

/// A parts table: a CSV with columns part, idss_a, vp_v and optionally lambda_per_v,
/// idss_vds_v (what the fit of a bag writes; its other columns are passed over). Throws
/// input_error naming the file and line for a missing column, a repeated part or a value
/// outside the JFET's ranges.
bool is_parts_table(const base::csv_table& t);
std::vector<part_figures> parts_from_parts_table(const base::csv_table& t);

/// A part of a bag whose readings cannot be fitted: which, where, and fit_square_law's reason.
struct unfit_part {
  std::string name;
  int first_line{}, last_line{};
  std::string reason;
};

/// One part's readings and their fit.
struct fitted_readings {
  part_readings readings;
  fit_result fit;
};

/// Every part of a table of bench readings fitted (fit_square_law), in the order the parts
/// first appear. A part that cannot be fitted is left out and listed in `unfit`, so one bad
/// part does not stop the bag. Throws input_error, starting with the table's source, when no
/// part can be fitted (a table of one part: its reason, naming the part when it is named;
/// several: each part and its reason).
struct bag_fit {
  std::vector<fitted_readings> parts;
  std::vector<unfit_part> unfit;
};
bag_fit fit_bag(const base::csv_table& t);

/// "part 'B' (lines 5-5)", or "" for a table without a part column.
std::string part_label(const std::string& name, int first_line, int last_line);

/// The parts of a CSV of either kind: a parts table as it is, or bench readings fitted part
/// by part (fit_bag). The parts that cannot be fitted go to `unfit` when it is given;
/// without it the first of them throws input_error naming the part (a caller that cannot
/// report what it leaves out must not leave it out silently).
std::vector<part_figures> read_parts(const base::csv_table& t, std::vector<unfit_part>* unfit = nullptr);

/// A [jfet] block to paste into a stage file.
std::string jfet_block(const fit_result& r);

}  // namespace pinchoff::model
