// Two writers of one audio file at once, without replace: create-or-fail must be a single
// step, or both report success and the second replaces the first. (A check that the name
// was free followed by a rename let both succeed in 12 to 21 of 150 rounds.)
#include <doctest/doctest.h>

#include <atomic>
#include <filesystem>
#include <latch>
#include <optional>
#include <string>
#include <thread>
#include <vector>

#include "base/error.hpp"
#include "dsp/io/sound_file.hpp"
#include "support/scratch_dir.hpp"

namespace test_sound_writer_commit {

namespace fs = std::filesystem;
using pinchoff::testing::scratch_dir;

TEST_CASE("two sound writers committing one name at once: exactly one succeeds without overwrite") {
  scratch_dir dir;
  constexpr int rounds = 150;
  int both = 0, neither = 0;
  for (int round = 0; round < rounds; ++round) {
    const fs::path target = dir.path / ("take-" + std::to_string(round) + ".wav");
    std::latch ready(2);
    std::atomic<int> won{0};
    auto writer = [&](int who) {
      std::optional<pinchoff::dsp::sound_writer> w;
      pinchoff::dsp::write_settings ws;
      ws.format = pinchoff::dsp::sample_format::wav16;
      w.emplace(pinchoff::dsp::sound_writer::create(target, ws));
      w->write(std::vector<double>(480, 0.1 * (who + 1)));
      ready.arrive_and_wait();  // both have passed the early check; now both commit
      try {
        w->commit();
        ++won;
      } catch (const pinchoff::file_exists_error&) {
      }
    };
    std::thread t0(writer, 0), t1(writer, 1);
    t0.join();
    t1.join();
    both += won == 2;
    neither += won == 0;
  }
  CAPTURE(rounds);
  CHECK(both == 0);
  CHECK(neither == 0);
  std::size_t left = 0;
  for (const auto& e : fs::directory_iterator(dir.path)) left += e.path().filename().string().front() == '.';
  CHECK(left == 0);  // no temporary
}

}  // namespace test_sound_writer_commit
