// Reading a user's text file with a bound: regular files and pipes are read, devices and
// directories refused by name, anything over the bound refused naming the bound; and CSV
// text as a spreadsheet exports it (with a UTF-8 byte-order mark).
#include <sys/stat.h>

#include <fstream>
#include <string>

#include <doctest/doctest.h>

#include "base/csv.hpp"
#include "base/error.hpp"
#include "base/text_file.hpp"
#include "support/scratch_dir.hpp"

namespace test_text_file {

using namespace pinchoff;
using namespace pinchoff::base;

namespace {
constexpr text_file_kind small_kind{"test file", 1000, "a test file is short"};

void write(const std::string& path, const std::string& bytes) {
  std::ofstream f(path, std::ios::binary);
  f << bytes;
}
}  // namespace

TEST_CASE("a text file is read up to its bound and refused beyond it") {
  pinchoff::testing::scratch_dir dir;
  write(dir.file("exact.txt"), std::string(1000, 'a'));
  write(dir.file("over.txt"), std::string(1001, 'a'));
  CHECK(read_text_file(dir.file("exact.txt"), small_kind).size() == 1000);
  CHECK_THROWS_WITH_AS(read_text_file(dir.file("over.txt"), small_kind),
                       doctest::Contains("holds more than 1000 bytes, the most a test file may hold (a test file is short)"),
                       input_error);
  CHECK_THROWS_WITH_AS(read_text_file(dir.path, small_kind), doctest::Contains("is a directory, not a test file"), io_error);
  CHECK_THROWS_WITH_AS(read_text_file("/dev/zero", small_kind), doctest::Contains("'/dev/zero' is a device"), io_error);
  CHECK_THROWS_WITH_AS(read_text_file(dir.file("none.txt"), small_kind), doctest::Contains("No such file"), io_error);
  // A FIFO with no writer reads as empty at once, never waits.
  REQUIRE(::mkfifo(dir.file("fifo").c_str(), 0600) == 0);
  CHECK(read_text_file(dir.file("fifo"), small_kind).empty());
  CHECK(format_bytes(std::size_t{16} << 20) == "16 MiB");
  CHECK(format_bytes(512 * 1024) == "512 KiB");
  CHECK(format_bytes(1001) == "1001 bytes");
}

TEST_CASE("a CSV with a UTF-8 byte-order mark reads its first column by name") {
  // Unicode 15, section 23.8: U+FEFF at the start of a UTF-8 text is a signature, not content;
  // spreadsheets write it in their "CSV UTF-8" export.
  const csv_table t = parse_csv("\xEF\xBB\xBFvgs_v,id_a\r\n0,5m\r\n-0.5,2.9m\r\n", "bom.csv");
  CHECK(t.column("vgs_v") == 0);
  CHECK(t.columns.front() == "vgs_v");
  REQUIRE(t.rows.size() == 2);
  CHECK(t.rows[1][1] == doctest::Approx(2.9e-3).epsilon(1e-15));
}

}  // namespace test_text_file
