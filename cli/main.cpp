#include <cstdlib>
#include <iostream>
#include <string>
#include <vector>

#include "cli/app.hpp"
#include "cli/data_files.hpp"

int main(int argc, char** argv) {
  std::vector<std::string> args(argv + 1, argv + argc);
  // The data lies beside the program (PREFIX/share/pinchoff when installed, share/pinchoff in
  // the build folder); PINCHOFF_DEVICES names another class file.
  const pinchoff::cli::data_files data =
      pinchoff::cli::find_data_files(pinchoff::cli::program_path(argc > 0 ? argv[0] : ""), std::getenv("PINCHOFF_DEVICES"));
  return pinchoff::cli::run(args, std::cout, std::cerr, data);
}
