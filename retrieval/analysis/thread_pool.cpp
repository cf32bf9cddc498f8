#include "retrieval/analysis/thread_pool.h"

#include <omp.h>

#include <algorithm>
#include <atomic>
#include <exception>
#include <thread>
#include <vector>

namespace sw {

int resolve_threads(int requested) {
  if (requested >= 1) return requested;
  const unsigned hw = std::thread::hardware_concurrency();
  return hw > 0 ? static_cast<int>(hw) : 1;
}

void parallel_for(int n, int threads, const std::function<void(int)>& task) {
  if (n <= 0) return;
  const int workers = std::clamp(threads, 1, n);
  std::atomic<int> next{0};
  std::atomic<bool> failed{false};
  std::vector<std::exception_ptr> errors(static_cast<std::size_t>(n));
  auto work = [&] {
    omp_set_num_threads(1);
    for (;;) {
      if (failed.load()) return;
      const int i = next.fetch_add(1);
      if (i >= n) return;
      try {
        task(i);
      } catch (...) {
        errors[static_cast<std::size_t>(i)] = std::current_exception();
        failed.store(true);
      }
    }
  };
  // The calling thread is one of the workers (a caller that checks for interrupts in its
  // progress callback, as the Python module does, then still sees them); its OpenMP setting is
  // restored afterwards.
  const int caller_omp_threads = omp_get_max_threads();
  std::vector<std::thread> pool;
  pool.reserve(static_cast<std::size_t>(workers - 1));
  for (int w = 1; w < workers; ++w) pool.emplace_back(work);
  work();
  for (auto& t : pool) t.join();
  omp_set_num_threads(caller_omp_threads);
  for (const auto& e : errors)
    if (e) std::rethrow_exception(e);
}

}  // namespace sw
