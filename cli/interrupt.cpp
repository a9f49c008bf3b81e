#include "cli/interrupt.hpp"

#include "base/error.hpp"

namespace pinchoff::cli {
namespace {

// Set by the handlers. A signal handler can reach nothing but objects of static storage
// duration, so these are the program's only mutable statics; lock-free atomics are safe to
// store from a handler.
std::atomic<bool> stop_requested{false};
std::atomic<int> stop_signal{0};
static_assert(std::atomic<bool>::is_always_lock_free && std::atomic<int>::is_always_lock_free);

extern "C" void on_stop_signal(int signo) {
  stop_signal.store(signo, std::memory_order_relaxed);
  stop_requested.store(true, std::memory_order_relaxed);
}

constexpr int handled[] = {SIGINT, SIGTERM};

}  // namespace

interrupt_guard::interrupt_guard() {
  stop_requested.store(false);
  stop_signal.store(0);
  struct sigaction sa {};
  sa.sa_handler = on_stop_signal;
  sigemptyset(&sa.sa_mask);
  sa.sa_flags = SA_RESETHAND | SA_RESTART;
  for (int k = 0; k < 2; ++k) installed_[k] = ::sigaction(handled[k], &sa, &previous_[k]) == 0;
}

interrupt_guard::~interrupt_guard() {
  for (int k = 0; k < 2; ++k)
    if (installed_[k]) ::sigaction(handled[k], &previous_[k], nullptr);
}

const std::atomic<bool>* interrupt_guard::flag() const noexcept { return &stop_requested; }

void interrupt_guard::check() const {
  if (stop_requested.load(std::memory_order_relaxed))
    throw interrupted("interrupted; no output written", stop_signal.load(std::memory_order_relaxed));
}

}  // namespace pinchoff::cli
