// Audio file reading and writing: round trips within each format's quantisation, damaged
// and foreign files refused with clear messages, the temporary file never left behind, and
// a WAV assembled byte by byte from the RIFF/WAVE layout read through virtual I/O.
#include <doctest/doctest.h>

#include <bit>
#include <cmath>
#include <cstdint>
#include <cstring>
#include <filesystem>
#include <fstream>
#include <numbers>
#include <random>
#include <string>
#include <vector>

#include "base/units.hpp"
#include "base/error.hpp"
#include "dsp/io/sound_file.hpp"
#include "support/patch_float.hpp"
#include "support/scratch_dir.hpp"

namespace test_sound_file {

using namespace pinchoff::dsp;
using namespace pinchoff::base;
using pinchoff::input_error;
using pinchoff::io_error;
using pinchoff::testing::scratch_dir;
namespace fs = std::filesystem;

namespace {


// Stereo test material: a sine on the left, a ramp across almost all of full scale on the
// right (both signs, the extremes included), so every code region and the channel order
// are exercised.
std::vector<double> stereo_material(std::size_t frames) {
  std::vector<double> x(2 * frames);
  for (std::size_t t = 0; t < frames; ++t) {
    x[2 * t] = 0.7 * std::sin(2 * std::numbers::pi * 997.0 * static_cast<double>(t) / 48000.0);
    x[2 * t + 1] = -0.9999 + 1.9998 * static_cast<double>(t) / static_cast<double>(frames - 1);
  }
  return x;
}

void write_file(const fs::path& p, const write_settings& s, const std::vector<double>& x) {
  sound_writer w = sound_writer::create(p, s);
  w.write(x);
  w.commit();
}

std::vector<double> read_all(sound_reader& r) {
  std::vector<double> x(static_cast<std::size_t>(r.info().frames * r.info().channels));
  std::size_t at = 0;
  for (;;) {
    const std::size_t got = r.read(std::span<double>(x).subspan(at, std::min<std::size_t>(4096 * 2, x.size() - at)));
    if (got == 0) break;
    at += got * static_cast<std::size_t>(r.info().channels);
  }
  CHECK(at == x.size());
  return x;
}

template <class T>
void put(std::vector<std::byte>& b, T v) {  // little-endian, as RIFF requires
  for (std::size_t i = 0; i < sizeof(T); ++i) b.push_back(static_cast<std::byte>((static_cast<std::uint64_t>(v) >> (8 * i)) & 0xFF));
}
void put_tag(std::vector<std::byte>& b, const char* tag) {
  for (int i = 0; i < 4; ++i) b.push_back(static_cast<std::byte>(tag[i]));
}

}  // namespace

TEST_CASE("each write format reads back within its quantisation") {
  // Bounds: our quantiser rounds to the nearest code, so the error is at most half a step,
  // 2^-bits (1/65536 for 16-bit, 2^-24 for 24-bit); float stores the nearest float exactly
  // (IEEE 754 binary32). Decoding divides by 2^(bits-1), exact in double.
  struct row {
    const char* source;
    sample_format format;
    double max_error;
    const char* format_text;
  };
  const row rows[] = {
      {"half a 16-bit step, rounding quantiser", sample_format::wav16, std::ldexp(1.0, -16), "WAV, 16-bit integer"},
      {"half a 24-bit step, rounding quantiser", sample_format::wav24, std::ldexp(1.0, -24), "WAV, 24-bit integer"},
      {"half a 24-bit step, FLAC is lossless", sample_format::flac24, std::ldexp(1.0, -24), "FLAC, 24-bit integer"},
      {"binary32 rounding, compared exactly", sample_format::wav_float, 0.0, "WAV, 32-bit float"},
  };
  scratch_dir dir;
  const std::vector<double> x = stereo_material(9000);
  for (const row& r : rows) {
    INFO(std::string(r.source));
    const fs::path p = dir.path / ("rt-" + std::string(sample_format_name(r.format)));
    write_settings s;
    s.rate_hz = 44100;
    s.channels = 2;
    s.format = r.format;
    write_file(p, s, x);
    sound_reader rd = sound_reader::open(p);
    CHECK(rd.info().rate_hz == 44100.0);
    CHECK(rd.info().channels == 2);
    CHECK(rd.info().frames == 9000);
    CHECK(rd.info().format_text == r.format_text);
    CHECK(rd.info().is_float == (r.format == sample_format::wav_float));
    CHECK(nearest_sample_format(rd.info()) == r.format);
    const std::vector<double> y = read_all(rd);
    double worst = 0.0;
    for (std::size_t i = 0; i < x.size(); ++i) {
      const double want = r.format == sample_format::wav_float ? static_cast<double>(static_cast<float>(x[i])) : x[i];
      worst = std::max(worst, std::abs(y[i] - want));
    }
    CHECK(worst <= r.max_error);
    const auto left = channel_of(y, 2, 0);
    CHECK(left.size() == 9000);
    CHECK(left[100] == y[200]);
  }
}

TEST_CASE("integer formats clip at full scale and count the clipped samples") {
  // 16-bit two's complement: codes -32768 .. 32767 (RIFF/WAVE PCM), read as code / 32768.
  scratch_dir dir;
  write_settings s;
  s.format = sample_format::wav16;
  const fs::path p = dir.path / "clip.wav";
  sound_writer w = sound_writer::create(p, s);
  w.write(std::vector<double>{1.5, -1.5, 1.0, -1.0, 0.5});
  CHECK(w.clipped_samples() == 3);  // 1.0 -> code 32768 is out of range too
  w.write(std::vector<double>{0.0});
  w.commit();
  sound_reader r = sound_reader::open(p);
  const auto y = read_channel(r, 0);
  REQUIRE(y.size() == 6);
  CHECK(y[0] == 32767.0 / 32768.0);
  CHECK(y[1] == -1.0);
  CHECK(y[2] == 32767.0 / 32768.0);
  CHECK(y[3] == -1.0);
  CHECK(y[4] == 0.5);
}

TEST_CASE("a NaN or infinity in a float file is refused at its frame, time and channel") {
  // A valid float file with a marker value patched to a quiet NaN (0x7FC00000) or
  // +infinity (0x7F800000), IEEE 754 binary32 (tests/support/patch_float.hpp).
  struct row {
    const char* source;
    std::uint32_t bits;
    const char* word;
  };
  const row rows[] = {{"IEEE 754 quiet NaN", 0x7FC00000u, "NaN"}, {"IEEE 754 +infinity", 0x7F800000u, "infinite"}};
  scratch_dir dir;
  for (const row& rw : rows) {
    INFO(std::string(rw.source));
    const fs::path p = dir.path / (std::string("nan-") + rw.word + ".wav");
    write_settings s;
    s.rate_hz = 48000;
    s.channels = 2;
    s.format = sample_format::wav_float;
    std::vector<double> x(2 * 20000, 0.25);
    x[2 * 12000 + 1] = pinchoff::testing::float_marker;  // frame 12000, second channel
    write_file(p, s, x);
    pinchoff::testing::patch_float_marker(p, rw.bits);
    sound_reader r = sound_reader::open(p);
    std::string message;
    try {
      read_channel(r, 0);
    } catch (const input_error& e) {
      message = e.what();
    }
    CAPTURE(message);
    CHECK(message.find("frame 12000 (0.25 s), channel 2 is " + std::string(rw.word)) != std::string::npos);
  }
}

TEST_CASE("missing, foreign and damaged files are refused with the reason") {
  scratch_dir dir;
  write_settings s;
  s.format = sample_format::wav16;
  write_file(dir.path / "whole.wav", s, std::vector<double>(48000, 0.1));
  fs::copy_file(dir.path / "whole.wav", dir.path / "cut.wav");
  fs::resize_file(dir.path / "cut.wav", 50000);  // about half of the 96044-byte file
  s.format = sample_format::flac24;
  std::vector<double> noise(48000);
  std::mt19937 gen(7);
  std::uniform_real_distribution<double> u(-0.5, 0.5);
  for (double& v : noise) v = u(gen);  // noise does not compress, so the cut lands in the audio
  write_file(dir.path / "whole.flac", s, noise);
  fs::copy_file(dir.path / "whole.flac", dir.path / "cut.flac");
  fs::resize_file(dir.path / "cut.flac", fs::file_size(dir.path / "whole.flac") / 2);
  std::ofstream(dir.path / "notes.wav") << "these are not samples\n";
  fs::create_directory(dir.path / "folder.wav");

  struct row {
    const char* source;
    const char* file;
    const char* expect;
  };
  // common practice: each message names the file and says what is wrong with it
  const row rows[] = {
      {"missing file", "none.wav", "No such file"},
      {"text, not audio", "notes.wav", "not recognised"},
      {"a folder", "folder.wav", "it is a folder"},
      {"WAV cut in its data chunk", "cut.wav", "truncated"},
      {"FLAC cut in its frames", "cut.flac", "truncated"},
  };
  for (const row& r : rows) {
    INFO(std::string(r.source));
    std::string message;
    bool is_io = false;
    try {
      sound_reader rd = sound_reader::open(dir.path / r.file);
      read_channel(rd, 0);
    } catch (const io_error& e) {
      message = e.what();
      is_io = true;
    }
    CAPTURE(message);
    CHECK(is_io);
    CHECK(message.find(r.file) != std::string::npos);
    CHECK(message.find(r.expect) != std::string::npos);
  }
  sound_reader whole = sound_reader::open(dir.path / "whole.flac");
  CHECK(read_channel(whole, 0).size() == 48000);
}

TEST_CASE("a WAV built in memory reads through virtual I/O") {
  // Layout from the RIFF/WAVE specification (Microsoft & IBM, Multimedia Programming
  // Interface and Data Specifications 1.0, 1991): "RIFF" size "WAVE", "fmt " chunk of 16
  // bytes (format 1 = PCM, channels, rate, byte rate, block align, bits), "data" chunk.
  const std::vector<std::int16_t> codes{0, 16384, -16384, 32767, -32768, 1, -1};
  std::vector<std::byte> b;
  const std::uint32_t data_bytes = static_cast<std::uint32_t>(codes.size() * 2);
  put_tag(b, "RIFF");
  put<std::uint32_t>(b, 36 + data_bytes);
  put_tag(b, "WAVE");
  put_tag(b, "fmt ");
  put<std::uint32_t>(b, 16);
  put<std::uint16_t>(b, 1);
  put<std::uint16_t>(b, 1);
  put<std::uint32_t>(b, 22050);
  put<std::uint32_t>(b, 22050 * 2);
  put<std::uint16_t>(b, 2);
  put<std::uint16_t>(b, 16);
  put_tag(b, "data");
  put<std::uint32_t>(b, data_bytes);
  for (std::int16_t c : codes) put<std::uint16_t>(b, static_cast<std::uint16_t>(c));

  sound_reader r = sound_reader::open_memory(b, "memory.wav");
  CHECK(r.info().rate_hz == 22050.0);
  CHECK(r.info().channels == 1);
  CHECK(r.info().frames == static_cast<std::int64_t>(codes.size()));
  const auto y = read_channel(r, 0);
  REQUIRE(y.size() == codes.size());
  for (std::size_t i = 0; i < codes.size(); ++i) {
    CAPTURE(i);
    CHECK(y[i] == codes[i] / 32768.0);  // exact: code / 2^15
  }
  r.seek(3);
  CHECK(read_channel(r, 0, 1).front() == 32767.0 / 32768.0);

  std::vector<std::byte> cut(b.begin(), b.begin() + 30);  // ends inside the fmt chunk
  CHECK_THROWS_AS(sound_reader::open_memory(cut, "cut.wav"), io_error);
}

TEST_CASE("the output appears only on commit and never replaces what it must not") {
  scratch_dir dir;
  write_settings s;
  s.format = sample_format::wav16;
  const fs::path out = dir.path / "out.wav";

  SUBCASE("a writer dropped without commit leaves nothing") {
    {
      sound_writer w = sound_writer::create(out, s);
      w.write(std::vector<double>(1000, 0.1));
      CHECK(dir.entries() == 1);  // the temporary, beside the target
      CHECK_FALSE(fs::exists(out));
    }
    CHECK(dir.entries() == 0);
  }
  SUBCASE("commit renames the temporary into place") {
    sound_writer w = sound_writer::create(out, s);
    w.write(std::vector<double>(1000, 0.1));
    sound_writer moved = std::move(w);
    moved.commit();
    CHECK(fs::exists(out));
    CHECK(dir.entries() == 1);
    CHECK(moved.frames_written() == 1000);
  }
  SUBCASE("an existing file is kept unless overwrite is set") {
    write_file(out, s, std::vector<double>(10, 0.1));
    std::string message;
    try {
      sound_writer::create(out, s);
    } catch (const pinchoff::file_exists_error& e) {  // its own type: cli/ adds how to replace it
      message = e.what();
    }
    CHECK(message.find("exists") != std::string::npos);
    CHECK(message.find("--") == std::string::npos);
    s.overwrite = true;
    write_file(out, s, std::vector<double>(20, 0.1));
    sound_reader r = sound_reader::open(out);
    CHECK(r.info().frames == 20);
    CHECK(dir.entries() == 1);
  }
  SUBCASE("the input is refused as output, however it is spelled, even with overwrite") {
    write_file(out, s, std::vector<double>(10, 0.1));
    fs::create_symlink(out, dir.path / "link.wav");
    s.overwrite = true;
    s.inputs = {dir.path / "link.wav"};
    const fs::path spellings[] = {out, dir.path / "." / "out.wav"};
    for (const fs::path& p : spellings) {
      CAPTURE(p);
      std::string message;
      try {
        sound_writer::create(p, s);
      } catch (const io_error& e) {
        message = e.what();
      }
      CHECK(message.find("it is the input file") != std::string::npos);
    }
  }
  SUBCASE("a missing folder is named") {
    std::string message;
    try {
      sound_writer::create(dir.path / "no-such-folder" / "x.wav", s);
    } catch (const io_error& e) {
      message = e.what();
    }
    CHECK(message.find("no-such-folder' does not exist") != std::string::npos);
  }
}

TEST_CASE("format names and bad settings") {
  CHECK(parse_sample_format("wav24") == sample_format::wav24);
  CHECK(parse_sample_format("float") == sample_format::wav_float);
  CHECK(parse_sample_format("flac") == sample_format::flac24);
  CHECK_THROWS_AS(parse_sample_format("mp3"), input_error);
  scratch_dir dir;
  write_settings s;
  s.rate_hz = 44100.5;
  CHECK_THROWS_AS(sound_writer::create(dir.path / "a.wav", s), input_error);
  s.rate_hz = 48000;
  s.channels = 0;
  CHECK_THROWS_AS(sound_writer::create(dir.path / "a.wav", s), input_error);
  CHECK(dir.entries() == 0);
}

TEST_CASE("TPDF dither makes the rounding error signal-independent noise of power step^2/4") {
  // Lipshitz, Wannamaker & Vanderkooy, JAES 40(5), 1992: with triangular dither of +-1
  // step the total error has mean 0 and power step^2/4 whatever the input. Without dither a
  // constant 0.3 step above a code rounds to an error of exactly -0.3 step. Sampling
  // tolerance: 200000 samples give the mean to 0.5/sqrt(n) = 0.0011 step (1 sigma) and the
  // power to about 0.3 % (1 sigma); the checks allow 5 sigma.
  scratch_dir dir;
  const std::size_t n = 200000;
  const double step = 1.0 / 32768.0;
  struct row {
    const char* source;
    double offset_steps, sine_steps;
  };
  const row rows[] = {{"LWV 1992, constant input", 0.3, 0.0}, {"LWV 1992, slow sine of 3 steps", 0.0, 3.0}};
  for (const row& r : rows) {
    INFO(std::string(r.source));
    std::vector<double> x(n);
    for (std::size_t t = 0; t < n; ++t)
      x[t] = step * (100.0 + r.offset_steps + r.sine_steps * std::sin(2 * std::numbers::pi * static_cast<double>(t) / 4801.0));
    for (bool dither : {false, true}) {
      CAPTURE(dither);
      write_settings s;
      s.format = sample_format::wav16;
      s.tpdf_dither = dither;
      const fs::path p = dir.path / (std::string(dither ? "d" : "nd") + std::to_string(r.offset_steps) + ".wav");
      write_file(p, s, x);
      sound_reader rd = sound_reader::open(p);
      const auto y = read_channel(rd, 0);
      double mean = 0.0, power = 0.0, worst = 0.0;
      for (std::size_t t = 0; t < n; ++t) {
        const double e = (y[t] - x[t]) / step;
        mean += e / static_cast<double>(n);
        power += e * e / static_cast<double>(n);
        worst = std::max(worst, std::abs(e));
      }
      if (dither) {
        CHECK(std::abs(mean) <= 0.0055);
        CHECK(power == doctest::Approx(0.25).epsilon(0.015).scale(0));
        CHECK(worst <= 1.5);
      } else {
        CHECK(worst <= 0.5);
        if (r.sine_steps == 0.0) CHECK(mean == doctest::Approx(-0.3).epsilon(1e-9));
      }
    }
  }
}

}  // namespace test_sound_file
