// Cost of a whole analysis against the scan size, and the largest scan with its sigma
// (issue 13 targets; docs/performance.md):
//   BM_ScanSize/ND/NE          retrieve() with bootstrap 0 of a neon scan (the neon-150as
//                              pulse and field) with ND delays over -6..6 fs and NE energies over
//                              40..115 eV (finer steps, the same physics); counters: seconds
//                              (wall), process_cpu_s, engine iterations, delays, energies, grid
//                              (XUV time-grid points), and per_iteration_ms;
//                              The engines' scaling: the energy bins are never combined
//                              (PreprocessOptions::energy_combine = 1), so the grid follows NE;
//   BM_LargeWithSigma/T        the 401 x 1200 scan with the default 8 bootstrap replicas on T
//                              worker threads (T = 1 and 2: the replicas' speed-up) and default
//                              options (its 0.0625 eV bins are summed in threes, preprocess step
//                              4a); counters fwhm_as, fwhm_sigma_as, energy_bins_combined.
//                              tests/bench/run_bench.sh also runs the T = 2 case alone under
//                              /usr/bin/time -v for the peak memory;
//   BM_LargeWithSigmaUncombined/T  the same with energy_combine = 1 (every measured bin).
//   BM_FewCounts/M             a 121 x 300 neon scan at 40 peak counts (~22 counts per delay row
//                              in its strongest bin) with 8 replicas on 2 threads and
//                              RetrieveOptions::cma_min_signal_counts = M: M = 0 keeps the CMA
//                              result, M = 60 (the default) refines it with the full model (the
//                              cost of the few-counts rule, docs/performance.md "Round 6").
// Wall time on a shared machine depends on the load: compare rows of one run.
#include <benchmark/benchmark.h>
#include <sys/resource.h>

#include "retrieval/analysis/retrieve.h"
#include "retrieval/analysis/thread_pool.h"
#include "synthetic/generator.h"
#include "synthetic/presets.h"
#include "tests/bench/bench_support.h"

namespace {

using namespace sw;

double process_cpu_seconds() {
  rusage u{};
  getrusage(RUSAGE_SELF, &u);
  return static_cast<double>(u.ru_utime.tv_sec + u.ru_stime.tv_sec) +
         1e-6 * static_cast<double>(u.ru_utime.tv_usec + u.ru_stime.tv_usec);
}

synthetic::SyntheticScan neon_scan(int nd, int ne, double peak_counts = 0.0) {
  synthetic::ScanConfig c = synthetic::find_preset("neon-150as").config;
  c.geometry.delay_fs = {-6.0, 12.0 / (nd - 1), nd};
  c.geometry.energy_eV = {40.0, 75.0 / ne, ne};
  if (peak_counts > 0) c.noise.peak_counts = peak_counts;
  return synthetic::generate_scan(c, 5);
}

void run(benchmark::State& state, int nd, int ne, int bootstrap, int threads, int combine,
         double peak_counts = 0.0, double cma_min_signal_counts = -1.0) {
  const synthetic::SyntheticScan scan = neon_scan(nd, ne, peak_counts);
  RetrieveOptions o;
  o.bootstrap = bootstrap;
  o.threads = threads;
  o.preprocess.energy_combine = combine;
  if (cma_min_signal_counts >= 0) o.cma_min_signal_counts = cma_min_signal_counts;
  RetrieveOutput r;
  double cpu = 0.0;
  for (auto _ : state) {
    const double c0 = process_cpu_seconds();
    r = retrieve(scan.trace, o);
    cpu += process_cpu_seconds() - c0;
    benchmark::DoNotOptimize(r.result.xuv.has_value());
  }
  const double n = static_cast<double>(state.iterations());
  state.counters["process_cpu_s"] = cpu / n;
  long long it = 0;
  for (const Reconstruction& c : r.chain) it += c.iterations;
  state.counters["iterations"] = static_cast<double>(it);
  state.counters["delays"] = nd;
  state.counters["energies"] = ne;
  state.counters["grid"] = static_cast<double>(r.problem.grid.size());
  state.counters["energy_bins_combined"] = static_cast<double>(r.preprocess.energy_bins_combined);
  state.counters["threads"] = resolve_threads(threads);
  state.counters["signal_peak_counts"] = r.preprocess.signal_peak_counts;
  state.counters["full_model"] = r.result.engine == "full-model" ? 1 : 0;
  if (r.result.xuv) {
    state.counters["fwhm_as"] = r.result.xuv->fwhm_as.value_or(0.0);
    state.counters["fwhm_sigma_as"] = r.result.xuv->fwhm_as_sigma.value_or(0.0);
  }
}

void BM_ScanSize(benchmark::State& state) {
  run(state, static_cast<int>(state.range(0)), static_cast<int>(state.range(1)), 0, 1, 1);
}
BENCHMARK(BM_ScanSize)
    ->Args({61, 300})
    ->Args({121, 600})
    ->Args({241, 900})
    ->Args({401, 1200})
    ->Apply(sw::bench::one_timed_run);

void BM_LargeWithSigma(benchmark::State& state) {
  run(state, 401, 1200, 8, static_cast<int>(state.range(0)), 0);
}
BENCHMARK(BM_LargeWithSigma)->Arg(1)->Arg(2)->Apply(sw::bench::one_timed_run);

void BM_LargeWithSigmaUncombined(benchmark::State& state) {
  run(state, 401, 1200, 8, static_cast<int>(state.range(0)), 1);
}
BENCHMARK(BM_LargeWithSigmaUncombined)->Arg(2)->Apply(sw::bench::one_timed_run);

void BM_FewCounts(benchmark::State& state) {
  run(state, 121, 300, 8, 2, 0, 40.0, static_cast<double>(state.range(0)));
}
BENCHMARK(BM_FewCounts)->Arg(0)->Arg(60)->Apply(sw::bench::one_timed_run);

}  // namespace
