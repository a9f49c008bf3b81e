// Tests of the SVG plot module: tick generation, content of the documents, and rendering
// by an independent SVG renderer (rsvg-convert, Debian package librsvg2-bin) to PNGs whose
// size is read back from the PNG header (PNG specification, ISO/IEC 15948, section 11.2.2:
// IHDR holds width and height as 4-byte big-endian integers at bytes 16-23 of the file).
#include <doctest/doctest.h>

#include <unistd.h>

#include <cmath>
#include <cstdint>
#include <cstdlib>
#include <filesystem>
#include <fstream>
#include <limits>
#include <numbers>
#include <string>
#include <vector>

#include "cli/plot.hpp"
#include "base/output_file.hpp"
#include "base/error.hpp"
#include "support/png_size.hpp"

namespace test_plot {

using namespace pinchoff::cli;
namespace fs = std::filesystem;

namespace {

using pinchoff::testing::png_size;
using pinchoff::testing::read_png_size;

// A scratch folder removed when the test ends. Set PINCHOFF_KEEP_PLOTS to keep the files.
struct scratch_dir {
  fs::path path;
  scratch_dir() : path(fs::temp_directory_path() / ("pinchoff-plot-" + std::to_string(::getpid()))) {
    fs::create_directories(path);
  }
  ~scratch_dir() {
    if (!std::getenv("PINCHOFF_KEEP_PLOTS")) {
      std::error_code ec;
      fs::remove_all(path, ec);
    }
  }
};

int render_png(const fs::path& svg, const fs::path& png) {
  const std::string cmd = "rsvg-convert -o '" + png.string() + "' '" + svg.string() + "' 2>&1";
  return std::system(cmd.c_str());
}

std::size_t count(const std::string& hay, const std::string& needle) {
  std::size_t n = 0;
  for (std::size_t pos = hay.find(needle); pos != std::string::npos; pos = hay.find(needle, pos + 1)) ++n;
  return n;
}

// A first-order high-pass times a first-order low-pass: |H| in dB and phase in degrees.
// Demo data only (the test checks drawing, not the curve).
void band_response(double f_lo, double f_hi, double gain_db, std::vector<double>& f, std::vector<double>& mag,
                   std::vector<double>& phase) {
  for (int i = 0; i <= 200; ++i) {
    const double hz = 10.0 * std::pow(10.0, 4.0 * i / 200.0);
    const double a = hz / f_lo, b = hz / f_hi;
    f.push_back(hz);
    mag.push_back(gain_db + 20 * std::log10(a / std::sqrt(1 + a * a)) - 10 * std::log10(1 + b * b));
    phase.push_back((std::atan(1 / a) - std::atan(b)) * 180 / std::numbers::pi);
  }
}

line_plot response_plot() {
  line_plot p;
  p.title = "Frequency response, two bias choices";
  p.x = {.title = "frequency (Hz)", .scale = axis_scale::log10, .min = 10.0, .max = 100e3};
  p.top.y.title = "magnitude (dB)";
  panel phase;
  phase.y.title = "phase (degrees)";
  for (auto [name, lo, hi, g] : {std::tuple{"bright bias", 35.0, 18e3, 14.0}, std::tuple{"warm bias", 80.0, 6e3, 11.0}}) {
    series m{name, {}, {}}, ph{name, {}, {}};
    band_response(lo, hi, g, m.x, m.y, ph.y);
    ph.x = m.x;
    p.top.lines.push_back(m);
    phase.lines.push_back(ph);
  }
  p.bottom = phase;
  p.markers = {{35.0, "-3 dB 35 Hz"}, {18e3, "-3 dB 18 kHz"}};
  return p;
}

}  // namespace

TEST_CASE("a 10 Hz to 100 kHz log axis is ticked at the decades, labelled 10 .. 100k") {
  // common practice: decade labels on log frequency axes, SI prefixes for kHz.
  const auto ticks = make_ticks(10.0, 100e3, axis_scale::log10);
  std::vector<double> majors;
  std::vector<std::string> labels;
  for (const tick& t : ticks)
    if (t.is_major) {
      majors.push_back(t.value);
      labels.push_back(t.label);
    } else {
      CHECK(t.label.empty());  // four decades: 2 and 5 are unlabelled minor ticks
    }
  const std::vector<double> decades = {10, 100, 1e3, 1e4, 1e5};
  REQUIRE(majors.size() == decades.size());
  for (std::size_t i = 0; i < decades.size(); ++i) CHECK(majors[i] == doctest::Approx(decades[i]).epsilon(1e-12));
  CHECK(labels == std::vector<std::string>{"10", "100", "1k", "10k", "100k"});
  CHECK(ticks.size() == 5 + 4 * 2);  // 2 and 5 in each of the four decades
}

TEST_CASE("tick generation gives nice steps on linear axes and labelled 2/5 subticks on short log axes") {
  // Heckbert, "Nice numbers for graph labels", Graphics Gems 1990: steps of 1, 2, 5 x 10^k.
  struct row {
    const char* source;
    double lo, hi;
    axis_scale scale;
    std::vector<std::string> labels;
  };
  const row rows[] = {
      {"Heckbert 1990: 0..1 in steps of 0.2", 0.0, 1.0, axis_scale::linear, {"0.0", "0.2", "0.4", "0.6", "0.8", "1.0"}},
      {"Heckbert 1990: -120..0 dBc in steps of 20", -120.0, 0.0, axis_scale::linear,
       {"-120", "-100", "-80", "-60", "-40", "-20", "0"}},
      {"Heckbert 1990: 0..20 kHz in steps of 5k", 0.0, 20e3, axis_scale::linear, {"0", "5k", "10k", "15k", "20k"}},
      {"common practice: 20 Hz..20 kHz labels 2 and 5", 20.0, 20e3, axis_scale::log10,
       {"20", "50", "100", "200", "500", "1k", "2k", "5k", "10k", "20k"}},
      {"common practice: sub-unit decades", 0.01, 1.0, axis_scale::log10, {"0.01", "0.02", "0.05", "0.1", "0.2", "0.5", "1"}},
  };
  for (const row& r : rows) {
    INFO(std::string(r.source));
    std::vector<std::string> got;
    for (const tick& t : make_ticks(r.lo, r.hi, r.scale))
      if (!t.label.empty()) got.push_back(t.label);
    CHECK(got == r.labels);
  }
}

TEST_CASE("every plot kind renders with rsvg-convert at its stated size and names its axes and series") {
  scratch_dir dir;
  REQUIRE_MESSAGE(std::system("rsvg-convert --version > /dev/null 2>&1") == 0,
                  "rsvg-convert (Debian package librsvg2-bin) is needed by this test");

  line_plot single;
  single.title = "Output level against drive";
  single.x.title = "drive (V peak)";
  single.top.y.title = "THD (%)";
  single.top.y.scale = axis_scale::log10;
  const double nan = std::numeric_limits<double>::quiet_NaN();
  single.top.lines = {{"supply 9 V", {0.1, 0.2, 0.3, 0.4, 0.5, 0.6}, {0.05, 0.11, nan, 0.4, 0.9, 2.1}, true},
                      {"supply 18 V", {0.1, 0.2, 0.3, 0.4, 0.5, 0.6}, {0.03, 0.06, 0.1, 0.16, 0.25, 0.4}, true}};
  single.width_px = 700;
  single.height_px = 440;

  bar_chart bars;
  bars.title = "Harmonic profile at 0.5 V peak";
  bars.x_title = "harmonic";
  bars.categories = {"H2", "H3", "H4", "H5"};
  bars.groups = {"low-gain", "mid-gain", "high-gain"};
  bars.values = {{-62.5, -81.0, -97.2, -110.4}, {-48.1, -70.3, -88.0, nan}, {-35.7, -52.9, -71.6, -85.0}};

  struct row {
    const char* source;
    std::string file, svg;
    int width, height;
    std::vector<std::string> must_contain;
  };
  const line_plot response = response_plot();
  const row rows[] = {
      {"two-panel line plot", "response.svg", render_svg(response), 860, 700,
       {"frequency (Hz)", "magnitude (dB)", "phase (degrees)", "bright bias", "warm bias", "-3 dB 18 kHz", ">1k<"}},
      {"single-panel line plot with markers and a gap", "drive.svg", render_svg(single), 700, 440,
       {"drive (V peak)", "THD (%)", "supply 9 V", "supply 18 V", "<circle"}},
      {"grouped bars", "bars.svg", render_svg(bars), 860, 480,
       {"level (dBc)", "harmonic", "low-gain", "high-gain", ">H2<", ">H5<", ">-120<"}},
  };
  for (const row& r : rows) {
    INFO(std::string(r.source));
    for (const std::string& s : r.must_contain) {
      CAPTURE(s);
      CHECK(r.svg.find(s) != std::string::npos);
    }
    const fs::path svg = dir.path / r.file;
    {
      pinchoff::base::output_set outputs;
      add_svg_output(outputs, svg, r.svg);
      outputs.commit();
    }
    for (const auto& e : fs::directory_iterator(dir.path))  // no temporary left
      CHECK(e.path().filename().string().rfind(pinchoff::base::temporary_prefix(svg), 0) == std::string::npos);
    const fs::path png = dir.path / (r.file + ".png");
    REQUIRE(render_png(svg, png) == 0);
    const png_size size = read_png_size(png);
    CHECK(size.is_png);
    CHECK(size.width == static_cast<std::uint32_t>(r.width));
    CHECK(size.height == static_cast<std::uint32_t>(r.height));
  }
  // The NaN point splits the 9 V series into two polylines; the 18 V one stays whole.
  CHECK(count(rows[1].svg, "<polyline") == 3);
  // One bar is NaN: 11 bars drawn, plus 3 legend swatches and the page, field and frame.
  CHECK(count(rows[2].svg, "<rect") == 11 + 3 + 3);
}

TEST_CASE("plots escape text, check their inputs, and refuse a missing folder") {
  line_plot p;
  p.x.title = "f (Hz)";
  p.x.scale = axis_scale::log10;
  p.top.lines = {{"R1 < R2 & C", {10, 100}, {1, 2}}};
  const std::string svg = render_svg(p);
  CHECK(svg.find("R1 &lt; R2 &amp; C") != std::string::npos);

  p.top.lines = {{"short", {1, 2, 3}, {1, 2}}};
  CHECK_THROWS_AS(render_svg(p), pinchoff::input_error);
  p.top.lines.clear();
  p.x.min = -1.0;
  CHECK_THROWS_AS(render_svg(p), pinchoff::input_error);

  bar_chart b;
  b.categories = {"H2"};
  b.groups = {"a", "b"};
  b.values = {{-40}};
  CHECK_THROWS_AS(render_svg(b), pinchoff::input_error);

  const fs::path missing = fs::temp_directory_path() / "pinchoff-no-such-folder" / "plot.svg";
  try {
    pinchoff::base::output_set outputs;
    add_svg_output(outputs, missing, svg);
    FAIL("add_svg_output accepted a missing folder");
  } catch (const pinchoff::io_error& e) {
    CHECK(std::string(e.what()).find("does not exist") != std::string::npos);
    CHECK(std::string(e.what()).find("plot.svg") != std::string::npos);
  }
}

}  // namespace test_plot
