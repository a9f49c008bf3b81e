#include "dsp/io/sample_spool.hpp"

#include <fcntl.h>
#include <unistd.h>

#include <algorithm>
#include <cerrno>
#include <cstdio>
#include <cstring>
#include <string>
#include <utility>

#include "base/error.hpp"
#include "base/output_file.hpp"

namespace pinchoff::dsp {
namespace fs = std::filesystem;

namespace {

constexpr std::size_t chunk_values = 16384;

}  // namespace

sample_spool sample_spool::create(const fs::path& target) {
  sample_spool s;
  s.target_ = target;
  s.fd_ = base::create_scratch_file(target);
  s.buffer_.resize(chunk_values);
  return s;
}

sample_spool::sample_spool(sample_spool&& o) noexcept
    : fd_(std::exchange(o.fd_, -1)),
      target_(std::move(o.target_)),
      buffer_(std::move(o.buffer_)),
      written_(o.written_),
      read_(o.read_) {}

sample_spool& sample_spool::operator=(sample_spool&& o) noexcept {
  if (this != &o) {
    remove();
    fd_ = std::exchange(o.fd_, -1);
    target_ = std::move(o.target_);
    buffer_ = std::move(o.buffer_);
    written_ = o.written_;
    read_ = o.read_;
  }
  return *this;
}

sample_spool::~sample_spool() { remove(); }

void sample_spool::remove() noexcept {
  if (fd_ >= 0) ::close(fd_);
  fd_ = -1;
}

void sample_spool::write(std::span<const double> values) {
  if (fd_ < 0) throw internal_error("write to a closed spool");
  while (!values.empty()) {
    const std::size_t n = std::min(values.size(), buffer_.size());
    for (std::size_t i = 0; i < n; ++i) buffer_[i] = static_cast<float>(values[i]);
    const char* p = reinterpret_cast<const char*>(buffer_.data());
    std::size_t left = n * sizeof(float);
    while (left > 0) {
      const ssize_t w = ::write(fd_, p, left);
      if (w < 0 && errno == EINTR) continue;
      if (w <= 0) {
        const int e = errno;
        throw io_error("cannot write a temporary file beside " + quoted_path(target_) + ": " + std::strerror(e));
      }
      p += w;
      left -= static_cast<std::size_t>(w);
    }
    written_ += static_cast<std::int64_t>(n);
    values = values.subspan(n);
  }
}

void sample_spool::rewind() {
  if (fd_ < 0) throw internal_error("rewind of a closed spool");
  if (::lseek(fd_, 0, SEEK_SET) != 0) {
    const int e = errno;
    throw io_error("cannot read back a temporary file beside " + quoted_path(target_) + ": " + std::strerror(e));
  }
  read_ = 0;
}

std::size_t sample_spool::read(std::span<double> values) {
  if (fd_ < 0) throw internal_error("read from a closed spool");
  const std::size_t want =
      static_cast<std::size_t>(std::min<std::int64_t>(static_cast<std::int64_t>(values.size()), written_ - read_));
  std::size_t done = 0;
  while (done < want) {
    const std::size_t n = std::min(want - done, buffer_.size());
    char* p = reinterpret_cast<char*>(buffer_.data());
    std::size_t left = n * sizeof(float);
    while (left > 0) {
      const ssize_t r = ::read(fd_, p, left);
      if (r < 0 && errno == EINTR) continue;
      if (r <= 0) {
        const int e = r < 0 ? errno : EIO;
        throw io_error("cannot read back a temporary file beside " + quoted_path(target_) + ": " + std::strerror(e));
      }
      p += r;
      left -= static_cast<std::size_t>(r);
    }
    for (std::size_t i = 0; i < n; ++i) values[done + i] = static_cast<double>(buffer_[i]);
    done += n;
  }
  read_ += static_cast<std::int64_t>(done);
  return done;
}

}  // namespace pinchoff::dsp
