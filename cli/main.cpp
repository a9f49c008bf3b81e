#include <fcntl.h>
#include <unistd.h>

#include <cerrno>
#include <cstdlib>
#include <iostream>
#include <string>
#include <vector>

#include "cli/app.hpp"
#include "cli/data_files.hpp"

namespace {

// A standard descriptor the shell left closed (`>&-`) would be taken by the next file the
// program opens, and the report would be written into that file. Standard input and error
// are pointed at /dev/null; a closed standard output is refused before any work, since the
// report could not reach anyone.
bool standard_descriptors_ready() {
  for (const int fd : {0, 2})
    if (::fcntl(fd, F_GETFD) == -1 && errno == EBADF) {
      const int null_fd = ::open("/dev/null", fd == 0 ? O_RDONLY : O_WRONLY);
      if (null_fd >= 0 && null_fd != fd) {
        ::dup2(null_fd, fd);
        ::close(null_fd);
      }
    }
  if (::fcntl(1, F_GETFD) == -1 && errno == EBADF) {
    std::cerr << "pinchoff: standard output is closed: nothing could receive the report; "
                 "send it to a file or to /dev/null instead\n";
    return false;
  }
  return true;
}

}  // namespace

int main(int argc, char** argv) {
  if (!standard_descriptors_ready()) return 1;
  std::vector<std::string> args(argv + 1, argv + argc);
  // The data lies beside the program (PREFIX/share/pinchoff when installed, share/pinchoff in
  // the build folder); PINCHOFF_DEVICES names another class file.
  const pinchoff::cli::data_files data =
      pinchoff::cli::find_data_files(pinchoff::cli::program_path(argc > 0 ? argv[0] : ""), std::getenv("PINCHOFF_DEVICES"));
  return pinchoff::cli::run(args, std::cout, std::cerr, data);
}
