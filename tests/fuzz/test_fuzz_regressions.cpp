// Replays every saved fuzz input through the entry function its fuzz target calls: the
// inputs that once made a parser fail (tests/fuzz/regressions/TARGET/, each fixed since)
// and the seeds (tests/fuzz/corpus/TARGET/). Each must be refused with input_error or be
// accepted with a result that keeps the parser's contract (tests/fuzz/fuzz_entries.hpp).
// Under the sanitizer build this also re-checks them for memory errors and undefined
// behaviour.
#include <doctest/doctest.h>

#include <algorithm>
#include <filesystem>
#include <fstream>
#include <functional>
#include <iterator>
#include <string>
#include <vector>

#include "tests/fuzz/fuzz_entries.hpp"

namespace test_fuzz_regressions {

namespace fs = std::filesystem;
using pinchoff::fuzz::outcome;

namespace {

std::string bytes_of(const fs::path& p) {
  std::ifstream in(p, std::ios::binary);
  return std::string(std::istreambuf_iterator<char>(in), {});
}

std::vector<fs::path> files_in(const fs::path& folder) {
  std::vector<fs::path> out;
  std::error_code ec;
  if (!fs::is_directory(folder, ec)) return out;
  for (const auto& e : fs::directory_iterator(folder))
    if (e.is_regular_file()) out.push_back(e.path());
  std::sort(out.begin(), out.end());
  return out;
}

struct fuzz_target {
  const char* name;
  std::function<outcome(const std::string&)> entry;
};

const fuzz_target targets[] = {
    {"stage_file", [](const std::string& b) { return pinchoff::fuzz::stage_file_entry(b); }},
    {"device_classes", [](const std::string& b) { return pinchoff::fuzz::device_classes_entry(b); }},
    {"units", [](const std::string& b) { return pinchoff::fuzz::units_entry(b); }},
    {"csv_fit", [](const std::string& b) { return pinchoff::fuzz::csv_fit_entry(b); }},
    {"sound", [](const std::string& b) { return pinchoff::fuzz::sound_entry(std::as_bytes(std::span(b.data(), b.size()))); }},
};

}  // namespace

TEST_CASE("every saved fuzz input is refused cleanly or read within the parser's contract") {
  for (const fuzz_target& t : targets) {
    CAPTURE(t.name);
    const std::vector<fs::path> seeds = files_in(fs::path(PINCHOFF_FUZZ_DIR) / "corpus" / t.name);
    CHECK(seeds.size() >= 3);  // a missing corpus folder must not pass as "nothing failed"
    std::vector<fs::path> inputs = files_in(fs::path(PINCHOFF_FUZZ_DIR) / "regressions" / t.name);
    inputs.insert(inputs.end(), seeds.begin(), seeds.end());
    for (const fs::path& p : inputs) {
      const std::string path = p.string();
      CAPTURE(path);
      CHECK_NOTHROW((void)t.entry(bytes_of(p)));
    }
  }
}

TEST_CASE("the valid seeds are accepted, so the entry functions reach the parsers' success paths") {
  // One known-good input per target (written by hand, or by the project's own writer for audio).
  const std::pair<const char*, const char*> good[] = {
      {"stage_file", "preset-bass-booster"}, {"device_classes", "preset-devices.toml"}, {"units", "seed-0"}, {"csv_fit", "gate-sweep"}, {"sound", "tone-wav16.wav"},
      // A bag of parts, the parts table, match's --by, idss_vds, a class's rating.
      {"csv_fit", "bag-jig-source-voltage"}, {"csv_fit", "bag-gate-sweep-interleaved"}, {"csv_fit", "parts-table"},
      {"units", "match-by-vgs"}, {"units", "match-tolerance"}, {"stage_file", "idss-vds-with-lambda"},
      {"device_classes", "class-vds-max"}};
  for (const auto& entry : good) {
    const auto& name = entry.first;
    const auto& file = entry.second;  // plain locals: clang 14 cannot capture structured bindings
    CAPTURE(name);
    const auto t = std::find_if(std::begin(targets), std::end(targets), [&](const fuzz_target& x) { return std::string(x.name) == name; });
    REQUIRE(t != std::end(targets));
    CHECK(t->entry(bytes_of(fs::path(PINCHOFF_FUZZ_DIR) / "corpus" / name / file)) == outcome::accepted);
  }
}

}  // namespace test_fuzz_regressions
