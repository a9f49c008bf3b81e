#pragma once
// SVG plots shared by every command: line plots (one panel, or two stacked panels sharing
// the x axis, e.g. magnitude over phase) and grouped-bar charts (categories x groups, e.g.
// harmonic levels of several designs).
//
// Coordinates are data units; sizes are SVG user units (1 unit = 1 px at 96 dpi), and the
// SVG's width and height attributes are width_px and height_px. Points that are NaN or
// infinite, and points <= 0 on a log axis, are skipped: the line breaks there. Data
// outside a fixed axis range is clipped to the plot area.
// Axis ranges left unset come from the data: linear axes widen to the nearest nice ticks
// (steps 1, 2 or 5 times a power of ten; Heckbert, "Nice numbers for graph labels",
// Graphics Gems, 1990), log axes to the enclosing 1-2-5 values.
// Text is escaped for XML; everything else is the module's own fixed look.
#include <filesystem>
#include <optional>
#include <span>
#include <string>
#include <string_view>
#include <vector>

namespace pinchoff::base {
class output_set;
}

namespace pinchoff::cli {

enum class axis_scale { linear, log10 };

struct axis {
  std::string title;                   ///< with its unit: "frequency (Hz)"
  axis_scale scale{axis_scale::linear};
  std::optional<double> min, max;      ///< fixed range; for log10 both > 0
  bool si_labels{true};                ///< 1k, 10k, 1M instead of 1000, 10000, 1000000
};

struct series {
  std::string name;                    ///< legend entry; equal names share one colour
  std::vector<double> x, y;            ///< same length
  bool markers{false};                 ///< draw a small marker at each point
};

struct panel {
  axis y;
  std::vector<series> lines;
};

/// A labelled vertical line across every panel (a -3 dB corner, a test frequency).
struct marker_line {
  double x{};
  std::string label;
};

struct line_plot {
  std::string title;
  axis x;
  panel top;
  std::optional<panel> bottom;         ///< stacked below, sharing x
  std::vector<marker_line> markers;
  int width_px{860};
  int height_px{0};                    ///< 0: 520 for one panel, 700 for two
};

struct bar_chart {
  std::string title;
  std::string x_title;                        ///< optional, e.g. "harmonic"
  std::string y_title{"level (dBc)"};
  std::vector<std::string> categories;        ///< along x, e.g. "H2".."H5"
  std::vector<std::string> groups;            ///< one colour each, e.g. design names
  std::vector<std::vector<double>> values;    ///< values[group][category]; NaN: no bar
  double floor{-120.0};                       ///< bars rise from here; lower values clamp to it
  /// Values below this are no figure (a simulation's numerical floor): no bar and no value,
  /// only `mark_label` written upwards from the foot of the bar's place, in its group's colour.
  std::optional<double> mark_below;
  std::string mark_label;
  std::optional<double> top;                  ///< default: nice ceiling of the data, at least 0
  /// Labelled vertical lines (a requirement's limits), x in categories: 0 is the left edge of
  /// the first, categories.size() the right edge of the last; outside, drawn at the edge.
  std::vector<marker_line> markers;
  int width_px{860};
  int height_px{480};
};

/// One axis tick: its value, its label (empty for unlabelled minor ticks) and its rank.
struct tick {
  double value{};
  std::string label;
  bool is_major{false};
};

/// Ticks covering [lo, hi]. Linear: 4-8 nice steps, all major. Log10: decades major and
/// labelled; 2 and 5 of each decade as minor ticks, labelled when the range spans fewer than
/// four decades; over more than six decades the minor ticks are dropped.
std::vector<tick> make_ticks(double lo, double hi, axis_scale scale, bool si_labels = true);

/// The SVG document. Throws input_error when series lengths differ, a bar table does not
/// match its categories and groups, or a fixed log range is not positive.
std::string render_svg(const line_plot& plot);
std::string render_svg(const bar_chart& chart);

/// Writes `svg` for `path` through the program's one writer (base/output_file.hpp): into a
/// temporary in the plot's folder, added to `outputs`, which the command's caller commits
/// with every other output once nothing can fail (cli/app.hpp); an existing plot of that
/// name is then replaced. That the plot is not one of the command's inputs is checked
/// before the command runs (command::files). Throws io_error naming `path` when the folder
/// is missing or the write fails (a full disk).
void add_svg_output(base::output_set& outputs, const std::filesystem::path& path, std::string_view svg);

}  // namespace pinchoff::cli
