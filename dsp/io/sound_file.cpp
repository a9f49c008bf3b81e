#include "dsp/io/sound_file.hpp"

#include <fcntl.h>
#include <sndfile.h>
#include <unistd.h>

#include <algorithm>
#include <cctype>
#include <cerrno>
#include <cmath>
#include <cstdio>
#include <cstring>
#include <limits>
#include <random>
#include <sstream>
#include <system_error>
#include <utility>

#include "base/error.hpp"
#include "base/units.hpp"

namespace pinchoff::dsp {
namespace fs = std::filesystem;

namespace {

// libsndfile's reason for the last failure, as a clause of our own messages: its
// "System error : " prefix (an errno text follows) and the closing full stop dropped.
std::string sndfile_reason(SNDFILE* f) {
  std::string why = sf_strerror(f);
  for (const char* prefix : {"System error : ", "System error: "})
    if (why.rfind(prefix, 0) == 0) why.erase(0, std::strlen(prefix));
  while (!why.empty() && (why.back() == '.' || why.back() == ' ' || why.back() == '\n')) why.pop_back();
  return why;
}

std::string container_name(int format) {
  int count = 0;
  sf_command(nullptr, SFC_GET_FORMAT_MAJOR_COUNT, &count, sizeof count);
  for (int i = 0; i < count; ++i) {
    SF_FORMAT_INFO m{};
    m.format = i;
    if (sf_command(nullptr, SFC_GET_FORMAT_MAJOR, &m, sizeof m) != 0) continue;
    if (m.format != (format & SF_FORMAT_TYPEMASK) || !m.extension) continue;
    std::string e = m.extension;
    for (char& ch : e) ch = static_cast<char>(std::toupper(static_cast<unsigned char>(ch)));
    return e;
  }
  return "audio";
}

std::string encoding_name(int format) {
  switch (format & SF_FORMAT_SUBMASK) {
    case SF_FORMAT_PCM_S8:
    case SF_FORMAT_PCM_U8: return "8-bit integer";
    case SF_FORMAT_PCM_16: return "16-bit integer";
    case SF_FORMAT_PCM_24: return "24-bit integer";
    case SF_FORMAT_PCM_32: return "32-bit integer";
    case SF_FORMAT_FLOAT: return "32-bit float";
    case SF_FORMAT_DOUBLE: return "64-bit float";
    default: {
      SF_FORMAT_INFO fi{};
      fi.format = format & SF_FORMAT_SUBMASK;
      if (sf_command(nullptr, SFC_GET_FORMAT_INFO, &fi, sizeof fi) == 0 && fi.name) return fi.name;
      return "compressed";
    }
  }
}

sound_info make_info(const SF_INFO& si) {
  sound_info info;
  info.rate_hz = si.samplerate;
  info.channels = si.channels;
  info.frames = si.frames;
  info.sf_format = si.format;
  info.format_text = container_name(si.format) + ", " + encoding_name(si.format);
  const int sub = si.format & SF_FORMAT_SUBMASK;
  info.is_float = sub == SF_FORMAT_FLOAT || sub == SF_FORMAT_DOUBLE;
  return info;
}

// libsndfile opens a WAV or AIFF whose data chunk is cut short and reads what is there; its
// log then holds "data : 96000 (should be 49956)" (SSND for AIFF). A size of 0 or all ones
// in the header is what streaming writers leave when they cannot seek back: not truncation.
std::optional<std::string> truncation_in_log(SNDFILE* f) {
  std::string log(16384, '\0');
  sf_command(f, SFC_GET_LOG_INFO, log.data(), static_cast<int>(log.size()));
  std::istringstream lines(log.c_str());
  std::string line;
  while (std::getline(lines, line)) {
    const bool is_data = line.rfind("data :", 0) == 0 || line.rfind("SSND :", 0) == 0;
    if (!is_data) continue;
    unsigned long long said = 0, held = 0;
    if (std::sscanf(line.c_str() + 6, " %llu (should be %llu)", &said, &held) != 2) continue;
    if (said == 0 || said >= 0xFFFFFFF0ull || said <= held) continue;
    return "the header promises " + std::to_string(said) + " bytes of audio but the file holds " + std::to_string(held) +
           " (truncated?)";
  }
  return std::nullopt;
}

void check_opened(SNDFILE* f, const SF_INFO& si, const std::string& name) {
  if (si.channels < 1 || si.samplerate < 1) {
    sf_close(f);
    throw io_error("cannot open '" + name + "': the header gives " + std::to_string(si.channels) + " channels at " +
                   std::to_string(si.samplerate) + " Hz");
  }
  if (auto why = truncation_in_log(f)) {
    sf_close(f);
    throw io_error("cannot open '" + name + "': " + *why);
  }
}

// All the digits a user may have typed ("44100.5", not the rounded "44100").
std::string exact_text(double v) {
  char text[40];
  std::snprintf(text, sizeof text, "%.12g", v);
  return text;
}

std::string seconds_text(std::int64_t frame, double rate_hz) {
  char text[32];
  std::snprintf(text, sizeof text, "%.6g s", static_cast<double>(frame) / rate_hz);
  return text;
}

}  // namespace

// ---------------------------------------------------------------------------------------
// Formats

std::string_view sample_format_name(sample_format f) noexcept {
  switch (f) {
    case sample_format::wav16: return "wav16";
    case sample_format::wav24: return "wav24";
    case sample_format::wav_float: return "float";
    case sample_format::flac24: return "flac";
  }
  return "?";
}

sample_format parse_sample_format(std::string_view text) {
  for (sample_format f : {sample_format::wav16, sample_format::wav24, sample_format::wav_float, sample_format::flac24})
    if (text == sample_format_name(f)) return f;
  throw input_error("unknown sample format '" + std::string(text) +
                    "' (expected wav16, wav24, float (32-bit float WAV) or flac (24-bit))");
}

sample_format nearest_sample_format(const sound_info& info) noexcept {
  const int sub = info.sf_format & SF_FORMAT_SUBMASK;
  const bool is_flac = (info.sf_format & SF_FORMAT_TYPEMASK) == SF_FORMAT_FLAC;
  if (is_flac) return sample_format::flac24;
  switch (sub) {
    case SF_FORMAT_PCM_S8:
    case SF_FORMAT_PCM_U8:
    case SF_FORMAT_PCM_16: return sample_format::wav16;
    case SF_FORMAT_PCM_24: return sample_format::wav24;
    default: return sample_format::wav_float;
  }
}

int quantisation_bits(sample_format f) noexcept {
  switch (f) {
    case sample_format::wav16: return 16;
    case sample_format::wav24:
    case sample_format::flac24: return 24;
    case sample_format::wav_float: return 0;
  }
  return 0;
}

// ---------------------------------------------------------------------------------------
// Reading

struct sound_reader::memory_source {
  std::span<const std::byte> bytes;
  sf_count_t at{0};

  static sf_count_t length(void* self) { return static_cast<sf_count_t>(static_cast<memory_source*>(self)->bytes.size()); }
  static sf_count_t seek(sf_count_t offset, int whence, void* self) {
    auto* m = static_cast<memory_source*>(self);
    const sf_count_t size = static_cast<sf_count_t>(m->bytes.size());
    sf_count_t to = offset;
    if (whence == SEEK_CUR) to = m->at + offset;
    else if (whence == SEEK_END) to = size + offset;
    if (to < 0 || to > size) return -1;
    m->at = to;
    return to;
  }
  static sf_count_t read(void* ptr, sf_count_t count, void* self) {
    auto* m = static_cast<memory_source*>(self);
    const sf_count_t size = static_cast<sf_count_t>(m->bytes.size());
    const sf_count_t n = std::max<sf_count_t>(0, std::min(count, size - m->at));
    if (n > 0) std::memcpy(ptr, m->bytes.data() + m->at, static_cast<std::size_t>(n));
    m->at += n;
    return n;
  }
  static sf_count_t write(const void*, sf_count_t, void*) { return 0; }
  static sf_count_t tell(void* self) { return static_cast<memory_source*>(self)->at; }
};

sound_reader sound_reader::open(const fs::path& path) {
  std::error_code ec;
  if (fs::is_directory(path, ec)) throw io_error("cannot open " + quoted_path(path) + ": it is a folder, not an audio file");
  if (fs::is_regular_file(path, ec) && fs::file_size(path, ec) == 0 && !ec)
    throw io_error("cannot open " + quoted_path(path) + ": the file is empty (0 bytes)");
  SF_INFO si{};
  SNDFILE* f = sf_open(path.c_str(), SFM_READ, &si);
  if (!f) throw io_error("cannot open " + quoted_path(path) + ": " + sndfile_reason(nullptr));
  check_opened(f, si, path.string());
  sound_reader r;
  r.file_ = f;
  r.info_ = make_info(si);
  r.name_ = path.string();
  return r;
}

sound_reader sound_reader::open_memory(std::span<const std::byte> bytes, std::string name) {
  auto mem = std::make_unique<memory_source>();
  mem->bytes = bytes;
  SF_VIRTUAL_IO io{&memory_source::length, &memory_source::seek, &memory_source::read, &memory_source::write,
                   &memory_source::tell};
  SF_INFO si{};
  SNDFILE* f = sf_open_virtual(&io, SFM_READ, &si, mem.get());
  if (!f) throw io_error("cannot open '" + name + "': " + sndfile_reason(nullptr));
  check_opened(f, si, name);
  sound_reader r;
  r.file_ = f;
  r.memory_ = std::move(mem);
  r.info_ = make_info(si);
  r.name_ = std::move(name);
  return r;
}

sound_reader::sound_reader(sound_reader&& o) noexcept
    : file_(std::exchange(o.file_, nullptr)),
      memory_(std::move(o.memory_)),
      info_(std::move(o.info_)),
      name_(std::move(o.name_)),
      position_(o.position_) {}

sound_reader& sound_reader::operator=(sound_reader&& o) noexcept {
  if (this != &o) {
    close();
    file_ = std::exchange(o.file_, nullptr);
    memory_ = std::move(o.memory_);
    info_ = std::move(o.info_);
    name_ = std::move(o.name_);
    position_ = o.position_;
  }
  return *this;
}

sound_reader::~sound_reader() { close(); }

void sound_reader::close() noexcept {
  if (file_) sf_close(file_);
  file_ = nullptr;
}

std::size_t sound_reader::read(std::span<double> interleaved) {
  if (!file_) throw internal_error("read from a closed sound file");
  const auto ch = static_cast<std::size_t>(info_.channels);
  const sf_count_t want = static_cast<sf_count_t>(interleaved.size() / ch);
  const sf_count_t remaining = info_.frames - position_;
  const sf_count_t asked = std::min(want, remaining);
  if (asked <= 0) return 0;
  const sf_count_t got = sf_readf_double(file_, interleaved.data(), asked);
  if (got < asked) {
    const int e = sf_error(file_);
    throw io_error("cannot read '" + name_ + "': " +
                   (e != SF_ERR_NO_ERROR ? sndfile_reason(file_) : std::string("the audio ends early")) +
                   " at frame " + std::to_string(position_ + std::max<sf_count_t>(got, 0)) + " of " +
                   std::to_string(info_.frames) + " (damaged or truncated file)");
  }
  if (info_.is_float) {
    const std::size_t n = static_cast<std::size_t>(got) * ch;
    for (std::size_t i = 0; i < n; ++i) {
      if (std::isfinite(interleaved[i])) continue;
      const std::int64_t frame = position_ + static_cast<std::int64_t>(i / ch);
      throw input_error("'" + name_ + "': sample at frame " + std::to_string(frame) + " (" + seconds_text(frame, info_.rate_hz) +
                        "), channel " + std::to_string(i % ch + 1) + " is " + (std::isnan(interleaved[i]) ? "NaN" : "infinite") +
                        " (a float file must hold finite samples)");
    }
  }
  position_ += got;
  return static_cast<std::size_t>(got);
}

void sound_reader::seek(std::int64_t frame) {
  if (frame < 0 || frame > info_.frames)
    throw input_error("'" + name_ + "': frame " + std::to_string(frame) + " lies outside the file's " +
                      std::to_string(info_.frames) + " frames");
  if (sf_seek(file_, frame, SEEK_SET) < 0) throw io_error("cannot seek in '" + name_ + "': " + sndfile_reason(file_));
  position_ = frame;
}

void require_seekable_file(const fs::path& path, std::string_view why) {
  std::error_code ec;
  const fs::file_status st = fs::status(path, ec);
  if (ec || !fs::exists(st)) return;  // the open names what is missing
  if (fs::is_regular_file(st) || fs::is_directory(st)) return;  // a folder is refused by the open
  const char* kind = fs::is_fifo(st) ? "a pipe" : fs::is_character_file(st) || fs::is_block_file(st) ? "a device" : "not a file";
  throw io_error("cannot read " + quoted_path(path) + ": it is " + kind + ", and " + std::string(why) +
                 "; save the audio to a file first");
}

std::vector<double> channel_of(std::span<const double> interleaved, int channels, int channel) {
  if (channels < 1 || channel < 0 || channel >= channels)
    throw input_error("channel " + std::to_string(channel + 1) + " does not exist (the audio has " + std::to_string(channels) +
                      " channels)");
  const auto ch = static_cast<std::size_t>(channels);
  std::vector<double> out(interleaved.size() / ch);
  for (std::size_t i = 0; i < out.size(); ++i) out[i] = interleaved[i * ch + static_cast<std::size_t>(channel)];
  return out;
}

std::vector<std::vector<double>> deinterleave(std::span<const double> interleaved, int channels) {
  std::vector<std::vector<double>> out;
  for (int c = 0; c < channels; ++c) out.push_back(channel_of(interleaved, channels, c));
  return out;
}

std::vector<double> read_channel(sound_reader& reader, int channel, std::int64_t frames) {
  const int ch = reader.info().channels;
  if (channel < 0 || channel >= ch)
    throw input_error("'" + reader.name() + "' has " + std::to_string(ch) + " channel" + (ch == 1 ? "" : "s") +
                      "; there is no channel " + std::to_string(channel + 1));
  const std::int64_t left = reader.info().frames - reader.position();
  const std::int64_t n = frames < 0 ? left : std::min(frames, left);
  std::vector<double> out;
  out.reserve(static_cast<std::size_t>(n));
  std::vector<double> block(static_cast<std::size_t>(ch) * 8192);
  std::int64_t done = 0;
  while (done < n) {
    const std::size_t want = static_cast<std::size_t>(std::min<std::int64_t>(8192, n - done));
    const std::size_t got = reader.read(std::span<double>(block).first(want * static_cast<std::size_t>(ch)));
    if (got == 0) break;
    for (std::size_t i = 0; i < got; ++i) out.push_back(block[i * static_cast<std::size_t>(ch) + static_cast<std::size_t>(channel)]);
    done += static_cast<std::int64_t>(got);
  }
  return out;
}

// ---------------------------------------------------------------------------------------
// Writing

namespace {

int sf_format_of(sample_format f) {
  switch (f) {
    case sample_format::wav16: return SF_FORMAT_WAV | SF_FORMAT_PCM_16;
    case sample_format::wav24: return SF_FORMAT_WAV | SF_FORMAT_PCM_24;
    case sample_format::wav_float: return SF_FORMAT_WAV | SF_FORMAT_FLOAT;
    case sample_format::flac24: return SF_FORMAT_FLAC | SF_FORMAT_PCM_24;
  }
  return 0;
}

bool same_file(const fs::path& a, const fs::path& b) {
  std::error_code ec;
  if (fs::exists(a, ec) && fs::exists(b, ec)) return fs::equivalent(a, b, ec);
  return fs::weakly_canonical(a, ec) == fs::weakly_canonical(b, ec);
}

}  // namespace

sound_writer sound_writer::create(const fs::path& path, const write_settings& s) {
  if (!(s.rate_hz >= 1.0 && s.rate_hz <= 768000.0) || s.rate_hz != std::floor(s.rate_hz))
    throw input_error("sample rate must be a whole number of hertz from 1 to 768000, got " + exact_text(s.rate_hz));
  if (s.channels < 1 || s.channels > 64)
    throw input_error("channel count must be 1 to 64, got " + std::to_string(s.channels));
  if (path.empty()) throw io_error("no output file given");
  std::error_code ec;
  if (fs::is_directory(path, ec)) throw io_error("cannot write " + quoted_path(path) + ": it is a folder");
  for (const fs::path& in : s.inputs)
    if (same_file(path, in)) throw io_error("cannot write " + quoted_path(path) + ": it is the input file; choose another name");

  sound_writer w;
  w.target_ = path;
  w.settings_ = s;
  w.dither_state_ = s.dither_seed;
  w.out_.emplace(base::output_file::create(path, s.overwrite ? base::existing::replace : base::existing::refuse));
  SF_INFO si{};
  si.samplerate = static_cast<int>(s.rate_hz);
  si.channels = s.channels;
  si.format = sf_format_of(s.format);
  if (!sf_format_check(&si)) {
    w.discard();
    throw input_error("libsndfile cannot write " + std::string(sample_format_name(s.format)) + " with " +
                      std::to_string(s.channels) + " channels at " + base::format_number(s.rate_hz) + " Hz");
  }
  w.file_ = sf_open_fd(w.out_->fd(), SFM_WRITE, &si, SF_FALSE);
  if (!w.file_) {
    const std::string why = sndfile_reason(nullptr);
    w.discard();
    throw io_error("cannot write " + quoted_path(path) + ": " + why);
  }
  return w;
}

sound_writer::sound_writer(sound_writer&& o) noexcept
    : file_(std::exchange(o.file_, nullptr)),
      out_(std::exchange(o.out_, std::nullopt)),
      target_(std::move(o.target_)),
      settings_(std::move(o.settings_)),
      frames_(o.frames_),
      clipped_(o.clipped_),
      codes_(std::move(o.codes_)),
      dither_state_(o.dither_state_) {}

sound_writer& sound_writer::operator=(sound_writer&& o) noexcept {
  if (this != &o) {
    discard();
    file_ = std::exchange(o.file_, nullptr);
    out_ = std::exchange(o.out_, std::nullopt);
    target_ = std::move(o.target_);
    settings_ = std::move(o.settings_);
    frames_ = o.frames_;
    clipped_ = o.clipped_;
    codes_ = std::move(o.codes_);
    dither_state_ = o.dither_state_;
  }
  return *this;
}

sound_writer::~sound_writer() { discard(); }

void sound_writer::discard() noexcept {
  if (file_) sf_close(file_);
  file_ = nullptr;
  out_.reset();  // removes the temporary
}

// SplitMix64 (Steele, Lea & Flood, "Fast splittable pseudorandom number generators",
// OOPSLA 2014): small, seedable with any value, and the same on every platform.
double sound_writer::uniform() noexcept {
  std::uint64_t z = (dither_state_ += 0x9E3779B97F4A7C15ull);
  z = (z ^ (z >> 30)) * 0xBF58476D1CE4E5B9ull;
  z = (z ^ (z >> 27)) * 0x94D049BB133111EBull;
  z ^= z >> 31;
  // 53 random bits times 2^-53: exact, as ldexp would be, without the library call.
  return static_cast<double>(z >> 11) * 0x1p-53 - 0.5;
}

void sound_writer::write(std::span<const double> x) {
  if (!file_) throw internal_error("write to a finished or failed sound file");
  const auto ch = static_cast<std::size_t>(settings_.channels);
  if (x.size() % ch != 0) throw internal_error("a block of " + std::to_string(x.size()) + " samples is not whole frames");
  for (std::size_t i = 0; i < x.size(); ++i)
    if (!std::isfinite(x[i]))
      throw internal_error("non-finite sample at frame " + std::to_string(frames_ + static_cast<std::int64_t>(i / ch)) +
                           " written to " + quoted_path(target_));
  const sf_count_t frames = static_cast<sf_count_t>(x.size() / ch);
  sf_count_t done = 0;
  const int bits = quantisation_bits(settings_.format);
  if (bits == 0) {
    done = sf_writef_double(file_, x.data(), frames);
  } else {
    // Our own quantiser (see the header); codes go to libsndfile left-justified in 32 bits,
    // which it shifts down without rounding.
    const double scale = std::ldexp(1.0, bits - 1);
    const double lo = -scale, hi = scale - 1.0;
    codes_.resize(x.size());
    for (std::size_t i = 0; i < x.size(); ++i) {
      double v = x[i] * scale;
      if (settings_.tpdf_dither && v != 0.0) v += uniform() + uniform();  // digital silence stays silent
      double q = std::nearbyint(v);
      if (q < lo || q > hi) {
        q = std::clamp(q, lo, hi);
        ++clipped_;
      }
      codes_[i] = static_cast<int>(q) * (1 << (32 - bits));
    }
    done = sf_writef_int(file_, codes_.data(), frames);
  }
  if (done != frames) {
    const std::string why = sndfile_reason(file_);
    discard();
    throw io_error("cannot write " + quoted_path(target_) + ": " + why);
  }
  frames_ += frames;
}

base::output_file sound_writer::finish() {
  if (!file_ || !out_) throw internal_error("commit of a finished or failed sound file");
  const int e = sf_close(file_);
  file_ = nullptr;
  if (e != 0) {
    const std::string why = sf_error_number(e);
    discard();
    throw io_error("cannot write " + quoted_path(target_) + ": " + why);
  }
  out_->finish();
  base::output_file done = std::move(*out_);
  out_.reset();
  return done;
}

void sound_writer::commit() {
  base::output_set set;
  set.add(finish());
  set.commit();
}

}  // namespace pinchoff::dsp
