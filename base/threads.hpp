#pragma once
// Thread helpers. Work is split by index (unit u always on the same thread for a given
// thread count), so results never depend on how many threads ran; an exception from any
// thread is rethrown on the caller once every thread has been joined.
#include <algorithm>
#include <cstddef>
#include <exception>
#include <functional>
#include <thread>
#include <vector>

namespace pinchoff::base {

/// The most threads a command may be asked for (0 asks for one per core): far beyond any
/// machine's cores, and low enough that starting them cannot exhaust the process.
inline constexpr int max_threads = 256;
/// Throws setting_error("threads", ...) unless 0 <= threads <= max_threads.
void check_thread_count(int threads);

/// Runs fn(i) for i in [0, n) on `threads` threads (0: one per core), each index once.
void parallel_for(int n, int threads, const std::function<void(int)>& fn);

// Runs work(u) for u in [0, units) on `threads` threads, unit u always on thread u % threads.
template <class Work>
void run_parallel(std::size_t units, int threads, Work&& work) {
  const auto t = static_cast<std::size_t>(std::max(1, threads));
  if (t == 1 || units <= 1) {
    for (std::size_t u = 0; u < units; ++u) work(u);
    return;
  }
  std::vector<std::exception_ptr> errors(t);
  auto share = [&](std::size_t k) {
    try {
      for (std::size_t u = k; u < units; u += t) work(u);
    } catch (...) {
      errors[k] = std::current_exception();
    }
  };
  std::vector<std::thread> pool;
  pool.reserve(t - 1);
  for (std::size_t k = 1; k < t; ++k) pool.emplace_back(share, k);
  share(0);
  for (std::thread& th : pool) th.join();
  for (const std::exception_ptr& e : errors)
    if (e) std::rethrow_exception(e);
}

// Runs work(u) for u in [0, units) on `workers` new threads (unit u always on thread
// u % workers) while the calling thread runs beside(); returns when all are done. An
// exception from any of them is rethrown once every thread has been joined.
template <class Work, class Beside>
void run_beside(std::size_t units, int workers, Work&& work, Beside&& beside) {
  const auto t = static_cast<std::size_t>(std::max(1, workers));
  std::vector<std::exception_ptr> errors(t + 1);
  std::vector<std::thread> pool;
  pool.reserve(t);
  try {
    for (std::size_t k = 0; k < t; ++k)
      pool.emplace_back([&, k] {
        try {
          for (std::size_t u = k; u < units; u += t) work(u);
        } catch (...) {
          errors[k] = std::current_exception();
        }
      });
    beside();
  } catch (...) {
    errors[t] = std::current_exception();
  }
  for (std::thread& th : pool) th.join();
  for (const std::exception_ptr& e : errors)
    if (e) std::rethrow_exception(e);
}

}  // namespace pinchoff::base
