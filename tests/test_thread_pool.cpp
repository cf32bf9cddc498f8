// retrieval/analysis/thread_pool.h and its use by retrieve(): every task runs once, errors come
// back to the caller, and the bootstrap replicas give the same numbers for any thread count.
#include <catch2/catch.hpp>

#include <omp.h>

#include <atomic>
#include <cstdio>
#include <mutex>
#include <stdexcept>
#include <thread>
#include <vector>

#include "retrieval/analysis/retrieve.h"
#include "retrieval/analysis/thread_pool.h"
#include "retrieval/engines/ptychographic_engine.h"
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

namespace {

// The same analysis on two thread counts: every replica's numbers, the FWHM and the sigmas of
// the FWHM and A0 equal to the last bit.
void check_same_numbers(const RetrieveOutput& a, const RetrieveOutput& b, std::size_t replicas) {
  REQUIRE(a.bootstrap_samples.size() == replicas);
  REQUIRE(b.bootstrap_samples.size() == replicas);
  for (std::size_t i = 0; i < replicas; ++i)
    for (std::size_t k = 0; k < 4; ++k)
      CHECK(a.bootstrap_samples[i][k] == b.bootstrap_samples[i][k]);
  CHECK(*a.result.xuv->fwhm_as == *b.result.xuv->fwhm_as);
  CHECK(*a.result.xuv->fwhm_as_sigma == *b.result.xuv->fwhm_as_sigma);
  CHECK(*a.result.ir->peak_vector_potential_au_sigma ==
        *b.result.ir->peak_vector_potential_au_sigma);
}

// The few-counts scan (full model from the CMA result, satellite starts; test_retrieve.cpp) and
// the default analysis with 3 replicas on `threads` threads.
const synthetic::SyntheticScan& few_counts_scan() {
  static const synthetic::SyntheticScan s = synthetic::generate_scan(test::neon_few_counts(), 21);
  return s;
}
RetrieveOptions three_replicas(int threads) {
  RetrieveOptions o;
  o.bootstrap = 3;
  o.threads = threads;
  return o;
}

}  // namespace

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
  check_same_numbers(a, b, 5);
  // The replicas differ from one another (distinct Poisson draws, not one draw five times).
  CHECK(a.bootstrap_samples[0][0] != a.bootstrap_samples[1][0]);
  std::printf("FWHM %.3f +- %.3f as with 1 and 3 threads\n", *a.result.xuv->fwhm_as,
              *a.result.xuv->fwhm_as_sigma);
}

TEST_CASE("replicas made during the estimate give the same numbers for any thread count",
          "[thread_pool][retrieve][slow]") {
  // retrieve.cpp (ReplicaStarts): while the estimate's first full-model run has one thread,
  // the others make replicas of the full chain up to their single-line result, and more (up to
  // twice the threads in all) are made in the task list of the estimate's satellite starts. A
  // replica's numbers depend on its index alone (retrieve.h), so with 1 thread (two beside the
  // satellite starts, one in the bootstrap stage), 2 (one ahead, two beside) and 3 (two ahead,
  // one beside) every number must be the same to the last bit
  // (common practice for parallel Monte Carlo: reproducible streams per task). The few-counts
  // scan goes to the full model from the CMA result (test_retrieve.cpp).
  // Its estimate's CMA run ends with one momentum node while the engine would add three, so
  // the replicas' CMA runs made beside it (2 and 3 threads) are dropped and made again.
  const auto& scan = few_counts_scan();
  const RetrieveOutput a = retrieve(scan.trace, three_replicas(1));
  REQUIRE(a.result.engine == "full-model");
  REQUIRE(a.chain.front().momentum_nodes == 1);
  REQUIRE(ptychographic_momentum_nodes(a.problem, RetrieveOptions{}.engine_settings.ptychographic) >
          1);
  REQUIRE(a.bootstrap_samples.size() == 3);
  CHECK(a.bootstrap_samples[0][0] != a.bootstrap_samples[1][0]);
  for (int threads : {2, 3}) {
    INFO("threads " << threads);
    check_same_numbers(a, retrieve(scan.trace, three_replicas(threads)), 3);
  }
}

TEST_CASE("the replicas' CMA runs beside the estimate's give the same numbers for any threads",
          "[thread_pool][retrieve]") {
  // retrieve.cpp (CmaAhead): with `auto`, the replicas' CMA runs start on the other threads
  // beside the estimate's, on the momentum-node count its engine adds, and are kept when the
  // estimate ends with that count. On the 200-count neon scan it does (three nodes; the chain
  // ends with the CMA), so with 2 threads replica 1 runs beside the estimate and is kept: its
  // iterations come before the estimate's last one and never start again. Every number must
  // equal that of 1 thread (no runs beside) to the last bit, and of 3 (two beside)
  // (common practice for parallel Monte Carlo: reproducible streams per task).
  const auto scan = synthetic::generate_scan(test::neon_reference_61_delays(200.0), 3);
  RetrieveOptions o;
  o.bootstrap = 3;
  o.threads = 1;
  const RetrieveOutput a = retrieve(scan.trace, o);
  REQUIRE(a.result.engine == "ptychographic");
  REQUIRE(a.chain.front().momentum_nodes == 3);
  std::mutex m;
  int estimate_records = 0, replica_before = 0, restarts = 0, last = 0;
  o.threads = 2;
  const RetrieveOutput b =
      retrieve(scan.trace, o, [&](const std::string& stage, const IterationRecord& r) {
        const std::lock_guard<std::mutex> lock(m);
        if (stage == "ptychographic") ++estimate_records;
        if (stage != "bootstrap 1/3") return;
        if (estimate_records < a.chain.front().iterations) ++replica_before;
        if (r.iteration < last) ++restarts;
        last = r.iteration;
      });
  CHECK(replica_before > 0);
  CHECK(restarts == 0);
  check_same_numbers(a, b, 3);
  o.threads = 3;
  check_same_numbers(a, retrieve(scan.trace, o), 3);
}

TEST_CASE("a replica started ahead that fails stops the estimate and its error comes back",
          "[thread_pool][retrieve]") {
  // A progress callback that throws (as the Python module's does on Ctrl-C) in the first
  // replica, which starts beside the estimate's CMA run on 2 threads (and is dropped there: the
  // estimate ends with one momentum node, the replica started with three): retrieve() must
  // rethrow that error, and the estimate must stop at once (its later runs, the satellite
  // starts, report no progress) instead of finishing before the error is seen.
  const RetrieveOptions o = three_replicas(2);
  std::atomic<bool> thrown{false};
  std::atomic<int> after{0}, satellite{0};
  const RetrieveProgress progress = [&](const std::string& stage, const IterationRecord&) {
    if (stage.find("satellite") != std::string::npos) satellite.fetch_add(1);
    if (stage.rfind("bootstrap 1/", 0) == 0) {
      thrown.store(true);
      throw std::runtime_error("stopped in " + stage);
    }
    if (thrown.load()) after.fetch_add(1);
  };
  try {
    (void)retrieve(few_counts_scan().trace, o, progress);
    FAIL("no exception");
  } catch (const std::runtime_error& e) {
    CHECK(std::string(e.what()) == "stopped in bootstrap 1/3");
  }
  // At most one report of the estimate's run can have passed its stop check before the flag
  // was raised (the reports are serialised by a mutex).
  CHECK(after.load() <= 1);
  CHECK(satellite.load() == 0);
}
