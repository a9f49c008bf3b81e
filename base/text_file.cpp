#include "base/text_file.hpp"

#include <cerrno>
#include <cstring>

#include <fcntl.h>
#include <sys/stat.h>
#include <unistd.h>

#include "base/error.hpp"

namespace pinchoff::base {
namespace {

// Closes the descriptor on every way out.
struct fd_guard {
  int fd;
  ~fd_guard() {
    if (fd >= 0) ::close(fd);
  }
};

std::string quoted(const std::filesystem::path& p) {
  std::string q(1, '\'');
  q.append(p.string()).push_back('\'');
  return q;
}

}  // namespace

std::string format_bytes(std::size_t bytes) {
  if (bytes >= (std::size_t{1} << 20) && bytes % (std::size_t{1} << 20) == 0)
    return std::to_string(bytes >> 20) + " MiB";
  if (bytes >= (std::size_t{1} << 10) && bytes % (std::size_t{1} << 10) == 0)
    return std::to_string(bytes >> 10) + " KiB";
  return std::to_string(bytes) + (bytes == 1 ? " byte" : " bytes");
}

std::string read_text_file(const std::filesystem::path& path, const text_file_kind& kind) {
  const std::string noun(kind.noun);
  struct stat st {};
  // Look at what the name is before opening it: opening a FIFO with no writer would wait,
  // and a device is never a file of ours.
  if (::stat(path.c_str(), &st) != 0)
    throw io_error("cannot open " + noun + " " + quoted(path) + ": " + std::strerror(errno));
  if (S_ISDIR(st.st_mode)) throw io_error(quoted(path) + " is a directory, not a " + noun);
  if (S_ISCHR(st.st_mode) || S_ISBLK(st.st_mode))
    throw io_error(quoted(path) + " is a device, not a " + noun + " (give a regular file)");
  if (S_ISSOCK(st.st_mode)) throw io_error(quoted(path) + " is a socket, not a " + noun + " (give a regular file)");
  auto too_large = [&] {
    return input_error(path.string() + ": holds more than " + format_bytes(kind.max_bytes) + ", the most a " + noun +
                       " may hold (" + std::string(kind.typical) + "); is it the right file?");
  };
  if (S_ISREG(st.st_mode) && static_cast<std::size_t>(st.st_size) > kind.max_bytes) throw too_large();

  // A FIFO is opened without waiting for a writer, then read as a blocking pipe: one with no
  // writer reads as empty (and is refused as such) instead of hanging the program.
  fd_guard f{::open(path.c_str(), O_RDONLY | O_CLOEXEC | (S_ISFIFO(st.st_mode) ? O_NONBLOCK : 0))};
  if (f.fd < 0) throw io_error("cannot open " + noun + " " + quoted(path) + ": " + std::strerror(errno));
  if (S_ISFIFO(st.st_mode)) ::fcntl(f.fd, F_SETFL, ::fcntl(f.fd, F_GETFL) & ~O_NONBLOCK);
  std::string text;
  // A pipe, or a file that grows while it is read, is bounded here: one byte more than the
  // bound is enough to know it is too large.
  char chunk[65536];
  for (;;) {
    const ssize_t n = ::read(f.fd, chunk, sizeof chunk);
    if (n < 0) {
      if (errno == EINTR) continue;
      throw io_error("cannot read " + noun + " " + quoted(path) + ": " + std::strerror(errno));
    }
    if (n == 0) break;
    if (text.size() + static_cast<std::size_t>(n) > kind.max_bytes) throw too_large();
    text.append(chunk, static_cast<std::size_t>(n));
  }
  return text;
}

}  // namespace pinchoff::base
