#pragma once
// Stopping long work cleanly. While an interrupt_guard lives, Ctrl-C (SIGINT) and SIGTERM
// only set a flag; the work checks it between blocks, removes its temporary files and
// throws pinchoff::interrupted, which cli/app.cpp turns into exit status 128 + the signal
// (130 for Ctrl-C, 143 for SIGTERM), the shell convention. A second signal of the same
// kind stops the program at once (SA_RESETHAND), the usual way out of a stuck run.
#include <signal.h>

#include <atomic>

namespace pinchoff::cli {

class interrupt_guard {
 public:
  /// Installs the handlers and clears the flag. One guard at a time.
  interrupt_guard();
  /// Puts the previous handlers back.
  ~interrupt_guard();
  interrupt_guard(const interrupt_guard&) = delete;
  interrupt_guard& operator=(const interrupt_guard&) = delete;

  /// The flag the handlers set (for work that polls a pointer, e.g. model::render_control).
  const std::atomic<bool>* flag() const noexcept;
  /// Throws pinchoff::interrupted, carrying the signal, when a signal has arrived.
  void check() const;

 private:
  struct sigaction previous_[2]{};  // SIGINT, SIGTERM
  bool installed_[2]{false, false};
};

}  // namespace pinchoff::cli
