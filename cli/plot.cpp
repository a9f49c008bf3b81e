#include "cli/plot.hpp"

#include <algorithm>
#include <cerrno>
#include <cmath>
#include <cstdio>
#include <cstring>
#include <limits>
#include <map>

#include "base/error.hpp"
#include "base/output_file.hpp"

namespace pinchoff::cli {
namespace {

// The module's look: warm paper page, white plot field, a muted palette that stays apart in
// print and for the common colour-vision deficiencies (no red/green pair next to each other).
constexpr const char* font_family = "DejaVu Sans, Liberation Sans, Arial, sans-serif";
constexpr const char* page_fill = "#f7f5f0";
constexpr const char* field_fill = "#ffffff";
constexpr const char* frame_stroke = "#6b655c";
constexpr const char* grid_major = "#ddd8cc";
constexpr const char* grid_minor = "#efece5";
constexpr const char* text_main = "#2e2a25";
constexpr const char* text_soft = "#5c564d";
constexpr const char* marker_stroke = "#a0522d";
constexpr const char* palette[] = {"#1f6f8b", "#d1762a", "#6a4c93", "#4f8a3a", "#b23a48", "#2d3e50", "#8c6d31"};
constexpr std::size_t palette_size = sizeof(palette) / sizeof(palette[0]);

constexpr double margin_left = 76, margin_right = 28, title_band = 40, legend_row = 20, margin_bottom = 58;

struct span_px {
  double lo, hi;
};

std::string num(double v) {
  char buf[32];
  std::snprintf(buf, sizeof buf, "%.2f", v);
  return buf;
}

std::string escape(std::string_view s) {
  std::string out;
  for (char c : s) {
    switch (c) {
      case '&': out += "&amp;"; break;
      case '<': out += "&lt;"; break;
      case '>': out += "&gt;"; break;
      case '"': out += "&quot;"; break;
      default: out += c;
    }
  }
  return out;
}

// A width estimate for laying out legend entries: DejaVu Sans averages ~0.6 em a glyph.
double text_width(std::string_view s, double font_px) { return 0.6 * font_px * static_cast<double>(s.size()); }

// Heckbert 1990: the "nice" number nearest x, 1, 2 or 5 times a power of ten.
double nice_number(double x) {
  const double e = std::floor(std::log10(x));
  const double f = x / std::pow(10.0, e);
  const double nf = f < 1.5 ? 1 : f < 3 ? 2 : f < 7 ? 5 : 10;
  return nf * std::pow(10.0, e);
}

// About five intervals over the range. Heckbert first rounds the range itself to a nice
// number; that makes 0..120 step by 50, so the range is used as it is.
double linear_step(double lo, double hi) { return nice_number((hi - lo) / 5.0); }

std::string trim_zeros(std::string s) {
  if (s.find('.') == std::string::npos) return s;
  while (!s.empty() && s.back() == '0') s.pop_back();
  if (!s.empty() && s.back() == '.') s.pop_back();
  return s;
}

std::string label_for(double v, int decimals, bool si) {
  if (std::abs(v) < 1e-12) v = 0.0;  // no "-0"
  const char* suffix = "";
  double scaled = v;
  if (si) {
    const double a = std::abs(v);
    if (a >= 1e9) { scaled = v / 1e9; suffix = "G"; }
    else if (a >= 1e6) { scaled = v / 1e6; suffix = "M"; }
    else if (a >= 1e3) { scaled = v / 1e3; suffix = "k"; }
  }
  char buf[48];
  if (*suffix) {
    std::snprintf(buf, sizeof buf, "%.3f", scaled);
    return trim_zeros(buf) + suffix;
  }
  if (std::abs(v) > 0 && std::abs(v) < 1e-4) {
    std::snprintf(buf, sizeof buf, "%.0e", v);
    return buf;
  }
  std::snprintf(buf, sizeof buf, "%.*f", std::max(0, decimals), v);
  return buf;
}

bool usable(double v, axis_scale s) { return std::isfinite(v) && (s == axis_scale::linear || v > 0.0); }

// 1-2-5 value at or below (down) / at or above (up) v > 0.
double snap_125(double v, bool up) {
  const double e = std::floor(std::log10(v));
  const double p = std::pow(10.0, e);
  const double steps[] = {1, 2, 5, 10};
  if (up) {
    for (double s : steps)
      if (s * p >= v * (1 - 1e-12)) return s * p;
    return 10 * p;
  }
  for (int i = 3; i >= 0; --i)
    if (steps[i] * p <= v * (1 + 1e-12)) return steps[i] * p;
  return p;
}

// The range an axis shows: fixed where given, else from the data, widened to nice values.
span_px axis_range(const axis& a, const std::vector<double>& data, std::string_view which) {
  if (a.scale == axis_scale::log10 && ((a.min && !(*a.min > 0)) || (a.max && !(*a.max > 0))))
    throw input_error("the " + std::string(which) + " axis is logarithmic but its fixed range is not positive");
  double lo = std::numeric_limits<double>::infinity(), hi = -lo;
  for (double v : data)
    if (usable(v, a.scale)) {
      lo = std::min(lo, v);
      hi = std::max(hi, v);
    }
  if (a.min) lo = *a.min;
  if (a.max) hi = *a.max;
  if (!std::isfinite(lo) || !std::isfinite(hi)) {  // no data at all
    lo = a.scale == axis_scale::log10 ? 1.0 : 0.0;
    hi = a.scale == axis_scale::log10 ? 10.0 : 1.0;
  }
  if (hi < lo) std::swap(lo, hi);
  if (a.scale == axis_scale::log10) {
    if (!a.min) lo = snap_125(lo, false);
    if (!a.max) hi = snap_125(hi, true);
    if (hi <= lo) hi = snap_125(lo * 1.01, true);
    return {lo, hi};
  }
  if (hi == lo) {
    const double pad = lo == 0.0 ? 1.0 : 0.1 * std::abs(lo);
    if (!a.min) lo -= pad;
    if (!a.max) hi += pad;
  }
  const double step = linear_step(lo, hi);
  if (!a.min) lo = std::floor(lo / step + 1e-9) * step;
  if (!a.max) hi = std::ceil(hi / step - 1e-9) * step;
  return {lo, hi};
}

// Maps data values to pixels along one axis.
struct scale_map {
  axis_scale scale;
  double lo, hi;        // data
  double p0, p1;        // pixels for lo and hi
  double operator()(double v) const {
    const double t = scale == axis_scale::log10 ? (std::log10(v) - std::log10(lo)) / (std::log10(hi) - std::log10(lo))
                                                : (v - lo) / (hi - lo);
    return p0 + t * (p1 - p0);
  }
};

struct svg_writer {
  std::string s;
  void open(int w, int h) {
    s += "<?xml version=\"1.0\" encoding=\"UTF-8\"?>\n";
    s += "<svg xmlns=\"http://www.w3.org/2000/svg\" width=\"" + std::to_string(w) + "\" height=\"" +
         std::to_string(h) + "\" viewBox=\"0 0 " + std::to_string(w) + " " + std::to_string(h) +
         "\" font-family=\"" + font_family + "\">\n";
    rect(0, 0, w, h, page_fill, "none");
  }
  void close() { s += "</svg>\n"; }
  void rect(double x, double y, double w, double h, const char* fill, const char* stroke, double sw = 1.0) {
    s += "<rect x=\"" + num(x) + "\" y=\"" + num(y) + "\" width=\"" + num(w) + "\" height=\"" + num(h) +
         "\" fill=\"" + fill + "\" stroke=\"" + stroke + "\" stroke-width=\"" + num(sw) + "\"/>\n";
  }
  void line(double x0, double y0, double x1, double y1, const char* stroke, double sw, const char* extra = "") {
    s += "<line x1=\"" + num(x0) + "\" y1=\"" + num(y0) + "\" x2=\"" + num(x1) + "\" y2=\"" + num(y1) +
         "\" stroke=\"" + stroke + "\" stroke-width=\"" + num(sw) + "\"" + extra + "/>\n";
  }
  void text(double x, double y, std::string_view t, double size, const char* fill, const char* anchor = "start",
            const char* extra = "") {
    s += "<text x=\"" + num(x) + "\" y=\"" + num(y) + "\" font-size=\"" + num(size) + "\" fill=\"" + fill +
         "\" text-anchor=\"" + anchor + "\"" + extra + ">" + escape(t) + "</text>\n";
  }
};

// Legend entries laid out in rows above the plot field; returns the number of rows.
struct legend_entry {
  std::string name;
  const char* colour;
  bool markers;
  bool is_bar;
};

std::vector<std::vector<legend_entry>> legend_rows(const std::vector<legend_entry>& entries, double width) {
  std::vector<std::vector<legend_entry>> rows;
  double used = width + 1;
  for (const legend_entry& e : entries) {
    const double w = 30 + text_width(e.name, 12.5) + 22;
    if (used + w > width) {
      rows.emplace_back();
      used = 0;
    }
    rows.back().push_back(e);
    used += w;
  }
  return rows;
}

void draw_marker(svg_writer& out, double x, double y, const char* colour) {
  out.s += "<circle cx=\"" + num(x) + "\" cy=\"" + num(y) + "\" r=\"2.8\" fill=\"" + field_fill + "\" stroke=\"" +
           colour + "\" stroke-width=\"1.4\"/>\n";
}

void draw_legend(svg_writer& out, const std::vector<std::vector<legend_entry>>& rows, double x0, double y0) {
  double y = y0;
  for (const auto& row : rows) {
    double x = x0;
    for (const legend_entry& e : row) {
      if (e.is_bar) {
        out.rect(x + 4, y - 9, 14, 10, e.colour, "none");
      } else {
        out.line(x, y - 4, x + 22, y - 4, e.colour, 2.2);
        if (e.markers) draw_marker(out, x + 11, y - 4, e.colour);
      }
      out.text(x + 30, y, e.name, 12.5, text_main);
      x += 30 + text_width(e.name, 12.5) + 22;
    }
    y += legend_row;
  }
}

void draw_title(svg_writer& out, std::string_view title) {
  if (!title.empty()) out.text(margin_left, 27, title, 17, text_main, "start", " font-weight=\"600\"");
}

// Grid lines and tick labels of one axis over a plot field.
void draw_x_grid(svg_writer& out, const std::vector<tick>& ticks, const scale_map& m, double top, double bottom,
                 bool with_labels) {
  for (const tick& t : ticks) {
    const double x = m(t.value);
    out.line(x, top, x, bottom, t.is_major ? grid_major : grid_minor, 1.0);
    out.line(x, bottom, x, bottom + (t.is_major ? 5 : 3), frame_stroke, 1.0);
    if (with_labels && !t.label.empty())
      out.text(x, bottom + 18, t.label, t.is_major ? 11.5 : 10.5, t.is_major ? text_main : text_soft, "middle");
  }
}

void draw_y_grid(svg_writer& out, const std::vector<tick>& ticks, const scale_map& m, double left, double right) {
  for (const tick& t : ticks) {
    const double y = m(t.value);
    out.line(left, y, right, y, t.is_major ? grid_major : grid_minor, 1.0);
    out.line(left - (t.is_major ? 5 : 3), y, left, y, frame_stroke, 1.0);
    if (!t.label.empty())
      out.text(left - 8, y + 4, t.label, t.is_major ? 11.5 : 10.5, t.is_major ? text_main : text_soft, "end");
  }
}

void draw_y_title(svg_writer& out, std::string_view title, double top, double bottom) {
  const double cy = (top + bottom) / 2;
  out.text(20, cy, title, 13, text_main, "middle",
           (" transform=\"rotate(-90 20 " + num(cy) + ")\"").c_str());
}

}  // namespace

std::vector<tick> make_ticks(double lo, double hi, axis_scale scale, bool si_labels) {
  std::vector<tick> ticks;
  if (!(hi > lo) || !std::isfinite(lo) || !std::isfinite(hi)) return ticks;
  if (scale == axis_scale::linear) {
    const double step = linear_step(lo, hi);
    const int decimals = static_cast<int>(-std::floor(std::log10(step) + 1e-9));
    for (double k = std::ceil(lo / step - 1e-9); k * step <= hi + 1e-9 * step; k += 1.0)
      ticks.push_back({k * step, label_for(k * step, decimals, si_labels), true});
    return ticks;
  }
  if (!(lo > 0)) return ticks;
  const double decades = std::log10(hi / lo);
  const bool with_minor = decades <= 6.0;
  const bool label_minor = decades < 4.0;
  for (int e = static_cast<int>(std::floor(std::log10(lo))); e <= static_cast<int>(std::ceil(std::log10(hi))); ++e) {
    for (int m : {1, 2, 5}) {
      if (m != 1 && !with_minor) continue;
      const double v = m * std::pow(10.0, e);
      if (v < lo * (1 - 1e-9) || v > hi * (1 + 1e-9)) continue;
      const int decimals = e < 0 ? -e : 0;
      const bool labelled = m == 1 || label_minor;
      ticks.push_back({v, labelled ? label_for(v, decimals, si_labels) : std::string(), m == 1});
    }
  }
  return ticks;
}

std::string render_svg(const line_plot& plot) {
  const bool two = plot.bottom.has_value();
  const int width = plot.width_px;
  const int height = plot.height_px > 0 ? plot.height_px : (two ? 700 : 520);

  // Colours by series name, in order of first appearance across both panels.
  std::vector<legend_entry> entries;
  std::map<std::string, const char*> colour_of;
  auto collect = [&](const panel& p) {
    for (const series& s : p.lines) {
      if (s.x.size() != s.y.size())
        throw input_error("plot series '" + s.name + "' has " + std::to_string(s.x.size()) + " x values but " +
                          std::to_string(s.y.size()) + " y values");
      if (colour_of.count(s.name)) continue;
      colour_of[s.name] = palette[entries.size() % palette_size];
      entries.push_back({s.name, colour_of[s.name], s.markers, false});
    }
  };
  collect(plot.top);
  if (two) collect(*plot.bottom);

  const double field_left = margin_left, field_right = width - margin_right;
  const auto rows = legend_rows(entries, field_right - field_left);
  const double field_top = title_band + legend_row * static_cast<double>(rows.size()) + 6;
  const double field_bottom = height - margin_bottom;
  const double gap = 18;
  const double split = two ? field_top + 0.6 * (field_bottom - field_top - gap) : field_bottom;

  std::vector<double> xs;
  for (const panel* p : {&plot.top, two ? &*plot.bottom : nullptr})
    if (p)
      for (const series& s : p->lines) xs.insert(xs.end(), s.x.begin(), s.x.end());
  for (const marker_line& m : plot.markers) xs.push_back(m.x);
  const span_px xr = axis_range(plot.x, xs, "x");
  const scale_map xm{plot.x.scale, xr.lo, xr.hi, field_left, field_right};
  const std::vector<tick> xt = make_ticks(xr.lo, xr.hi, plot.x.scale, plot.x.si_labels);

  svg_writer out;
  out.open(width, height);
  draw_title(out, plot.title);
  draw_legend(out, rows, field_left, title_band + 14);

  struct placed {
    const panel* p;
    double top, bottom;
  };
  std::vector<placed> panels = {{&plot.top, field_top, split}};
  if (two) panels.push_back({&*plot.bottom, split + gap, field_bottom});

  int clip_id = 0;
  for (const placed& pl : panels) {
    std::vector<double> ys;
    for (const series& s : pl.p->lines)
      for (std::size_t i = 0; i < s.y.size(); ++i)
        if (usable(s.x[i], plot.x.scale)) ys.push_back(s.y[i]);
    const span_px yr = axis_range(pl.p->y, ys, "y");
    const scale_map ym{pl.p->y.scale, yr.lo, yr.hi, pl.bottom, pl.top};
    out.rect(field_left, pl.top, field_right - field_left, pl.bottom - pl.top, field_fill, "none");
    const bool is_last = &pl == &panels.back();
    draw_x_grid(out, xt, xm, pl.top, pl.bottom, is_last);
    draw_y_grid(out, make_ticks(yr.lo, yr.hi, pl.p->y.scale, pl.p->y.si_labels), ym, field_left, field_right);
    draw_y_title(out, pl.p->y.title, pl.top, pl.bottom);

    const std::string clip = "field" + std::to_string(clip_id++);
    out.s += "<clipPath id=\"" + clip + "\"><rect x=\"" + num(field_left) + "\" y=\"" + num(pl.top) + "\" width=\"" +
             num(field_right - field_left) + "\" height=\"" + num(pl.bottom - pl.top) + "\"/></clipPath>\n";
    out.s += "<g clip-path=\"url(#" + clip + ")\" fill=\"none\" stroke-width=\"1.8\" stroke-linejoin=\"round\" "
             "stroke-linecap=\"round\">\n";
    for (const series& s : pl.p->lines) {
      const char* colour = colour_of[s.name];
      std::string pts;
      auto flush = [&] {
        if (pts.find(' ') != std::string::npos)  // two or more points
          out.s += "<polyline stroke=\"" + std::string(colour) + "\" points=\"" + pts + "\"/>\n";
        pts.clear();
      };
      for (std::size_t i = 0; i < s.x.size(); ++i) {
        if (!usable(s.x[i], plot.x.scale) || !usable(s.y[i], pl.p->y.scale)) {
          flush();
          continue;
        }
        if (!pts.empty()) pts += ' ';
        pts += num(xm(s.x[i])) + "," + num(ym(s.y[i]));
      }
      flush();
      if (s.markers)
        for (std::size_t i = 0; i < s.x.size(); ++i)
          if (usable(s.x[i], plot.x.scale) && usable(s.y[i], pl.p->y.scale))
            draw_marker(out, xm(s.x[i]), ym(s.y[i]), colour);
    }
    out.s += "</g>\n";
    out.rect(field_left, pl.top, field_right - field_left, pl.bottom - pl.top, "none", frame_stroke);
  }

  for (const marker_line& m : plot.markers) {
    if (!usable(m.x, plot.x.scale) || m.x < xr.lo || m.x > xr.hi) continue;
    const double x = xm(m.x);
    for (const placed& pl : panels) out.line(x, pl.top, x, pl.bottom, marker_stroke, 1.2, " stroke-dasharray=\"5 4\"");
    const bool right_side = x > field_right - 110;
    out.text(right_side ? x - 5 : x + 5, field_top + 15, m.label, 11.5, marker_stroke, right_side ? "end" : "start",
             " stroke=\"#ffffff\" stroke-width=\"3\" paint-order=\"stroke\"");
  }
  out.text((field_left + field_right) / 2, height - 16, plot.x.title, 13, text_main, "middle");
  out.close();
  return out.s;
}

std::string render_svg(const bar_chart& chart) {
  if (chart.values.size() != chart.groups.size())
    throw input_error("bar chart '" + chart.title + "' has " + std::to_string(chart.groups.size()) + " groups but " +
                      std::to_string(chart.values.size()) + " rows of values");
  for (std::size_t g = 0; g < chart.values.size(); ++g)
    if (chart.values[g].size() != chart.categories.size())
      throw input_error("bar chart group '" + chart.groups[g] + "' has " + std::to_string(chart.values[g].size()) +
                        " values for " + std::to_string(chart.categories.size()) + " categories");

  double top = 0.0;
  if (chart.top) {
    top = *chart.top;
  } else {
    double highest = chart.floor;
    for (const auto& row : chart.values)
      for (double v : row)
        if (std::isfinite(v)) highest = std::max(highest, v);
    top = std::max(0.0, highest);
    const double step = linear_step(chart.floor, top > chart.floor ? top : chart.floor + 1);
    top = std::ceil(top / step - 1e-9) * step;
  }
  if (!(top > chart.floor))
    throw input_error("bar chart '" + chart.title + "': the top of the scale must lie above its floor");

  std::vector<legend_entry> entries;
  for (std::size_t g = 0; g < chart.groups.size(); ++g) entries.push_back({chart.groups[g], palette[g % palette_size], false, true});
  const int width = chart.width_px, height = chart.height_px;
  const double field_left = margin_left, field_right = width - margin_right;
  const auto rows = legend_rows(entries, field_right - field_left);
  const double field_top = title_band + legend_row * static_cast<double>(rows.size()) + 6;
  const double field_bottom = height - margin_bottom;
  const scale_map ym{axis_scale::linear, chart.floor, top, field_bottom, field_top};

  svg_writer out;
  out.open(width, height);
  draw_title(out, chart.title);
  draw_legend(out, rows, field_left, title_band + 14);
  out.rect(field_left, field_top, field_right - field_left, field_bottom - field_top, field_fill, "none");
  draw_y_grid(out, make_ticks(chart.floor, top, axis_scale::linear, false), ym, field_left, field_right);
  draw_y_title(out, chart.y_title, field_top, field_bottom);

  const double ncat = static_cast<double>(std::max<std::size_t>(1, chart.categories.size()));
  const double ngroups = static_cast<double>(std::max<std::size_t>(1, chart.groups.size()));
  const double cat_w = (field_right - field_left) / ncat;
  const double bar_w = 0.8 * cat_w / ngroups;
  for (std::size_t c = 0; c < chart.categories.size(); ++c) {
    const double cx = field_left + (static_cast<double>(c) + 0.5) * cat_w;
    out.text(cx, field_bottom + 18, chart.categories[c], 12, text_main, "middle");
    if (c > 0) out.line(cx - cat_w / 2, field_bottom, cx - cat_w / 2, field_bottom + 5, frame_stroke, 1.0);
    for (std::size_t g = 0; g < chart.groups.size(); ++g) {
      const double v = chart.values[g][c];
      if (!std::isfinite(v)) continue;
      const double x = cx - 0.4 * cat_w + static_cast<double>(g) * bar_w;
      if (chart.mark_below && v < *chart.mark_below) {
        // Written upwards from the foot of the bar's place, so narrow places do not overlap.
        const double mx = x + bar_w / 2 + 3.5, my = field_bottom - 4;
        const std::string turn = " transform=\"rotate(-90 " + num(mx) + " " + num(my) + ")\"";
        out.text(mx, my, chart.mark_label, 10.5, palette[g % palette_size], "start", turn.c_str());
        continue;
      }
      const double shown = std::clamp(v, chart.floor, top);
      const double y = ym(shown);
      out.rect(x + 1, y, std::max(0.0, bar_w - 2), field_bottom - y, palette[g % palette_size], "none");
      if (bar_w >= 34) {
        char buf[32];
        std::snprintf(buf, sizeof buf, "%.1f", v);
        out.text(x + bar_w / 2, std::max(field_top + 12, y - 4), buf, 10.5, text_soft, "middle");
      }
    }
  }
  if (chart.floor < 0 && top > 0) out.line(field_left, ym(0), field_right, ym(0), frame_stroke, 1.0);
  for (std::size_t k = 0; k < chart.markers.size(); ++k) {
    const marker_line& m = chart.markers[k];
    if (!std::isfinite(m.x)) continue;
    const double x = field_left + std::clamp(m.x, 0.0, ncat) * cat_w;
    out.line(x, field_top, x, field_bottom, marker_stroke, 1.4, " stroke-dasharray=\"5 4\"");
    const bool right_side = x > field_right - 150;
    out.text(right_side ? x - 5 : x + 5, field_top + 15 + 16 * static_cast<double>(k % 2), m.label, 11.5, marker_stroke,
             right_side ? "end" : "start", " stroke=\"#ffffff\" stroke-width=\"3\" paint-order=\"stroke\"");
  }
  out.rect(field_left, field_top, field_right - field_left, field_bottom - field_top, "none", frame_stroke);
  if (!chart.x_title.empty()) out.text((field_left + field_right) / 2, height - 16, chart.x_title, 13, text_main, "middle");
  out.close();
  return out.s;
}

void add_svg_output(base::output_set& outputs, const std::filesystem::path& path, std::string_view svg) {
  base::output_file f = base::output_file::create(path, base::existing::replace);
  f.write(svg);
  outputs.add(std::move(f));
}

}  // namespace pinchoff::cli
