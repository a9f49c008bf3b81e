#include "base/threads.hpp"

#include <string>

#include "base/error.hpp"

namespace pinchoff::base {

void check_thread_count(int threads) {
  if (threads < 0 || threads > max_threads)
    throw setting_error("threads", "the number of threads must be 0 (one per core) to " + std::to_string(max_threads) +
                                       ", got " + std::to_string(threads));
}

void parallel_for(int n, int threads, const std::function<void(int)>& fn) {
  int t = threads > 0 ? threads : static_cast<int>(std::max(1u, std::thread::hardware_concurrency()));
  t = std::min(t, std::max(1, n));
  if (t == 1) {
    for (int i = 0; i < n; ++i) fn(i);
    return;
  }
  std::vector<std::thread> pool;
  std::vector<std::exception_ptr> errors(static_cast<std::size_t>(t));
  for (int w = 0; w < t; ++w)
    pool.emplace_back([&, w] {
      try {
        for (int i = w; i < n; i += t) fn(i);
      } catch (...) {
        errors[static_cast<std::size_t>(w)] = std::current_exception();
      }
    });
  for (auto& th : pool) th.join();
  for (auto& e : errors)
    if (e) std::rethrow_exception(e);
}

}  // namespace pinchoff::base
