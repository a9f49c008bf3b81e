#include "cli/progress_bar.hpp"

#include <unistd.h>

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <string>

namespace pinchoff::cli {

bool stderr_is_terminal() noexcept { return ::isatty(STDERR_FILENO) == 1; }

void progress_bar::update(double fraction, double realtime_factor, double seconds_left) {
  if (!enabled_) return;
  const auto now = std::chrono::steady_clock::now();
  if (drawn_ && now - last_ < std::chrono::milliseconds(100) && fraction < 1.0) return;
  last_ = now;
  constexpr int width = 24;
  const double f = std::clamp(fraction, 0.0, 1.0);
  const int filled = static_cast<int>(std::floor(f * width));
  std::string bar(static_cast<std::size_t>(filled), '#');
  bar.append(static_cast<std::size_t>(width - filled), '.');
  const long left = std::lround(std::max(0.0, seconds_left));
  char line[128];
  std::snprintf(line, sizeof line, "\r  %3d %% [%s]  %.1fx real time, %ld:%02ld left ", static_cast<int>(std::floor(100 * f)),
                bar.c_str(), realtime_factor, left / 60, left % 60);
  err_ << line << std::flush;
  drawn_ = true;
}

void progress_bar::clear() {
  if (!drawn_) return;
  err_ << '\r' << std::string(72, ' ') << '\r' << std::flush;
  drawn_ = false;
}

}  // namespace pinchoff::cli
