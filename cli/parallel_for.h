#pragma once
// Independent work items (clips, specimens, rendered clips) on a few threads.

#include <algorithm>
#include <atomic>
#include <cstddef>
#include <exception>
#include <mutex>
#include <thread>
#include <vector>

namespace dropfit::cli {

// Calls fn(i) once for every i in [0, count) on up to `threads` threads, the calling thread one of
// them. Items are taken in order as threads come free, so one long item does not hold up the
// rest. An exception thrown by fn does not stop the other items; the first one is rethrown after
// every thread has finished. fn must be safe to call concurrently for different indices.
template <typename F>
void ParallelFor(size_t count, int threads, F&& fn) {
  std::atomic<size_t> next{0};
  std::mutex failure_mutex;
  std::exception_ptr failure;
  auto worker = [&] {
    for (size_t i = next++; i < count; i = next++) {
      try {
        fn(i);
      } catch (...) {
        std::lock_guard<std::mutex> lock(failure_mutex);
        if (!failure) failure = std::current_exception();
      }
    }
  };
  const size_t used = std::min(count, static_cast<size_t>(std::max(threads, 1)));
  {
    std::vector<std::jthread> pool;
    for (size_t t = 1; t < used; ++t) pool.emplace_back(worker);
    worker();
  }  // joined here
  if (failure) std::rethrow_exception(failure);
}

}  // namespace dropfit::cli
