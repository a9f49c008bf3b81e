#pragma once
// The project's error hierarchy. Every layer throws these; only cli/app.cpp catches them
// and turns them into exit codes (0 success, 1 internal failure, 2 bad input or usage,
// 128 + the signal when interrupted: 130 for Ctrl-C).
#include <filesystem>
#include <stdexcept>
#include <string>
#include <utility>

namespace pinchoff {

/// Something the user gave is wrong: a file, a value, an option. Exit status 2.
/// The message names the thing, where it is, and what was expected.
class input_error : public std::runtime_error {
 public:
  using std::runtime_error::runtime_error;
};

/// A file could not be opened, read or written. Exit status 2.
class io_error : public input_error {
 public:
  using input_error::input_error;
};

/// A file to be written exists and replacing it was not allowed. The message says which
/// file; cli/ adds how the user allows it (cli/app.cpp).
class file_exists_error : public io_error {
 public:
  using io_error::io_error;
};

/// A setting's value is wrong: out of its range, or not a value of its kind. `field()` names
/// the setting as the layer that checks it knows it ("oversampling", "frequency_hz",
/// "drain.resistor"); the message says what was expected without naming any option
/// ("oversampling must be 1 to 64, got 100"). cli/ maps the field to the option the user
/// typed (cli/app.hpp, command::options_of_fields), so the model never speaks of options.
class setting_error : public input_error {
 public:
  setting_error(std::string field, const std::string& message) : input_error(message), field_(std::move(field)) {}
  const std::string& field() const noexcept { return field_; }

 private:
  std::string field_;
};

/// The tool failed on valid input (a solver that did not converge where it should).
/// Exit status 1.
class internal_error : public std::runtime_error {
 public:
  using std::runtime_error::runtime_error;
};

/// The user stopped the run (Ctrl-C, or SIGTERM): work was abandoned and its temporary files
/// removed. Exit status 128 + the signal (130 for SIGINT, the shell convention).
class interrupted : public std::runtime_error {
 public:
  explicit interrupted(const std::string& what, int signal_number = 2 /* SIGINT */)
      : std::runtime_error(what), signal_number_(signal_number > 0 ? signal_number : 2) {}
  int signal_number() const noexcept { return signal_number_; }

 private:
  int signal_number_;
};

/// A path in single quotes, as every message names files: 'out/take 2.wav'.
/// (Appended rather than "'" + string: GCC 12 warns falsely, -Wrestrict, on literal + rvalue string.)
inline std::string quoted_path(const std::filesystem::path& p) {
  std::string q(1, '\'');
  q.append(p.string()).push_back('\'');
  return q;
}

}  // namespace pinchoff
