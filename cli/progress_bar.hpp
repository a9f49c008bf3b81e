#pragma once
// A one-line progress bar for long jobs, redrawn in place with a carriage return:
//   "  42 % [##########..............]  38.1x real time, 0:12 left"
// Shown only when enabled (the caller decides: stderr is a terminal and not --quiet);
// redrawn at most every 0.1 s; clear() blanks the line so the report that follows starts
// on a clean line.
#include <chrono>
#include <ostream>

namespace pinchoff::cli {

class progress_bar {
 public:
  progress_bar(std::ostream& err, bool enabled) : err_(err), enabled_(enabled) {}
  progress_bar(const progress_bar&) = delete;
  progress_bar& operator=(const progress_bar&) = delete;
  ~progress_bar() { clear(); }

  /// fraction 0..1, speed as a multiple of real time, estimated seconds left.
  void update(double fraction, double realtime_factor, double seconds_left);
  void clear();

  bool enabled() const noexcept { return enabled_; }

 private:
  std::ostream& err_;
  bool enabled_;
  bool drawn_{false};
  std::chrono::steady_clock::time_point last_{};
};

/// True when standard error is a terminal (isatty).
bool stderr_is_terminal() noexcept;

}  // namespace pinchoff::cli
