// retrieval/analysis/thread_pool.h and its use by retrieve(): every task runs once, errors come
// back to the caller, and the bootstrap replicas give the same numbers for any thread count.
#include <catch2/catch.hpp>

#include <omp.h>

#include <atomic>
#include <cstdio>
#include <stdexcept>
#include <thread>
#include <vector>

#include "retrieval/analysis/retrieve.h"
#include "retrieval/analysis/thread_pool.h"
#include "synthetic/generator.h"
#include "synthetic/presets.h"
#include "tests/retrieve_test_support.h"

using namespace sw;

TEST_CASE("parallel_for runs every index exactly once, single-threaded OpenMP inside",
          "[thread_pool]") {
  const int caller_omp = omp_get_max_threads();
  for (int threads : {1, 2, 5}) {
    std::vector<std::atomic<int>> hits(37);
    std::atomic<int> omp_max{0};
    parallel_for(37, threads, [&](int i) {
      hits[static_cast<std::size_t>(i)].fetch_add(1);
      omp_max.store(std::max(omp_max.load(), omp_get_max_threads()));
    });
    for (const auto& h : hits) CHECK(h.load() == 1);
    CHECK(omp_max.load() == 1);  // thread_pool.h: OpenMP regions in a task run on one thread
    CHECK(omp_get_max_threads() == caller_omp);  // and the caller's setting comes back
  }
  int calls = 0;
  parallel_for(0, 2, [&](int) { ++calls; });
  CHECK(calls == 0);
}

TEST_CASE("parallel_for rethrows the failure of the lowest index", "[thread_pool]") {
  // One worker takes the indices in order, so indices 3 and 5 both fail only if no task after
  // the first failure starts (thread_pool.h): the message is task 3's.
  std::atomic<int> started{0};
  try {
    parallel_for(8, 1, [&](int i) {
      started.fetch_add(1);
      if (i == 3 || i == 5) throw std::runtime_error("task " + std::to_string(i));
    });
    FAIL("no exception");
  } catch (const std::runtime_error& e) {
    CHECK(std::string(e.what()) == "task 3");
  }
  CHECK(started.load() == 4);
}

TEST_CASE("resolve_threads: 0 means the hardware threads", "[thread_pool]") {
  CHECK(resolve_threads(3) == 3);
  const unsigned hw = std::thread::hardware_concurrency();
  CHECK(resolve_threads(0) == (hw > 0 ? static_cast<int>(hw) : 1));
}

TEST_CASE("bootstrap replicas give bit-identical results for 1 and 3 threads",
          "[thread_pool][retrieve]") {
  // retrieve.h: seeds per replica index, engines single-threaded; the replica numbers and the
  // reported sigma must not depend on the thread count (common practice for parallel Monte
  // Carlo: reproducible streams per task).
  const auto scan = synthetic::generate_scan(test::neon_reference_61_delays(200.0), 3);
  RetrieveOptions o = test::ptychographic_options(5);
  o.threads = 1;
  const RetrieveOutput a = retrieve(scan.trace, o);
  o.threads = 3;
  const RetrieveOutput b = retrieve(scan.trace, o);
  REQUIRE(a.bootstrap_samples.size() == 5);
  REQUIRE(b.bootstrap_samples.size() == 5);
  for (std::size_t i = 0; i < 5; ++i)
    for (std::size_t k = 0; k < 4; ++k)
      CHECK(a.bootstrap_samples[i][k] == b.bootstrap_samples[i][k]);
  CHECK(*a.result.xuv->fwhm_as == *b.result.xuv->fwhm_as);
  CHECK(*a.result.xuv->fwhm_as_sigma == *b.result.xuv->fwhm_as_sigma);
  CHECK(*a.result.ir->peak_vector_potential_au_sigma ==
        *b.result.ir->peak_vector_potential_au_sigma);
  // The replicas differ from one another (distinct Poisson draws, not one draw five times).
  CHECK(a.bootstrap_samples[0][0] != a.bootstrap_samples[1][0]);
  std::printf("FWHM %.3f +- %.3f as with 1 and 3 threads\n", *a.result.xuv->fwhm_as,
              *a.result.xuv->fwhm_as_sigma);
}
