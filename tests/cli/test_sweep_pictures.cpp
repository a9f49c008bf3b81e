// sweep --waveform and --transfer: the two bench pictures of how a stage clips, written
// through the one plot module and rendered by an independent SVG renderer (rsvg-convert,
// Debian package librsvg2-bin) at their stated size, as every plot is (test_plot.cpp).
#include <cstdlib>
#include <filesystem>
#include <string>
#include <vector>

#include <doctest/doctest.h>

#include "support/cli_runner.hpp"
#include "support/files.hpp"
#include "support/png_size.hpp"
#include "support/scratch_dir.hpp"

namespace test_sweep_pictures {

namespace fs = std::filesystem;

namespace {
std::string preset(const char* name) { return std::string(PINCHOFF_PRESETS_DIR) + "/" + name; }
std::size_t count(const std::string& s, const std::string& what) {
  std::size_t n = 0;
  for (std::size_t at = s.find(what); at != std::string::npos; at = s.find(what, at + what.size())) ++n;
  return n;
}
}  // namespace

TEST_CASE("sweep --waveform and --transfer draw one period at up to six drives, named in the legend") {
  REQUIRE_MESSAGE(std::system("rsvg-convert --version > /dev/null 2>&1") == 0,
                  "rsvg-convert (Debian package librsvg2-bin) is needed by this test");
  pinchoff::testing::scratch_dir dir;
  const fs::path wave = dir.path / "wave.svg", transfer = dir.path / "transfer.svg";
  // 25 drives (the default sweep): six pictured, the lowest (-40 dBu) and the highest (+20 dBu) among them.
  const auto r = pinchoff::testing::run_cli(
      {"sweep", preset("bass-booster-9v.toml"), "--waveform", wave.string(), "--transfer", transfer.string()});
  REQUIRE(r.status == 0);
  CHECK(r.out.find("waveform written to") != std::string::npos);
  CHECK(r.out.find("transfer curve written to") != std::string::npos);
  struct row {
    fs::path file;
    std::vector<std::string> must_contain;
  };
  const row rows[] = {
      {wave, {"one period of the output", "phase of the generator", "/ its peak", "-40.0 dBu (11.0 mVpk)", "20.0 dBu (11.0 Vpk)"}},
      {transfer, {"transfer curve", "generator voltage / its peak", "-40.0 dBu (11.0 mVpk)", "20.0 dBu (11.0 Vpk)"}},
  };
  for (const row& w : rows) {
    CAPTURE(w.file.string());
    const std::string svg = pinchoff::testing::slurp(w.file);
    for (const std::string& s : w.must_contain) {
      CAPTURE(s);
      CHECK(svg.find(s) != std::string::npos);
    }
    CHECK(count(svg, "<polyline") == 6);  // one unbroken line a drive
    const fs::path png = w.file.string() + ".png";
    REQUIRE(std::system(("rsvg-convert -o '" + png.string() + "' '" + w.file.string() + "' 2>&1").c_str()) == 0);
    const pinchoff::testing::png_size size = pinchoff::testing::read_png_size(png);
    CHECK(size.is_png);
    CHECK(size.width == 860);
    CHECK(size.height == 520);
  }
  // Fewer drives than six: every one pictured.
  const auto two = pinchoff::testing::run_cli(
      {"sweep", preset("clean-preamp-18v.toml"), "--drive", "0.1,1", "--transfer", transfer.string(), "--json"});
  REQUIRE(two.status == 0);
  CHECK(count(pinchoff::testing::slurp(transfer), "<polyline") == 2);
}

}  // namespace test_sweep_pictures
