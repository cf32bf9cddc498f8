// Cost of the full-model path against its FFT floor and of the whole analysis of one broadband
// scan, in one run so that ratios can be read on a shared machine:
//   BM_FullModelFftFloor        the FFTs one cost-and-gradient evaluation must do: one forward
//                               and one adjoint FFT per momentum node and delay (2 x nodes x
//                               delays FFTs of the grid size);
//   BM_FullModelCostGradient/T  one FullModelObjective::evaluate with gradient, T threads
//                               (wall time);
//   BM_FullModelCost            the same without gradient;
//   BM_FullModelFixedFftFloor, BM_FullModelFixedCostGradient   the floor and one evaluation
//                               (1 thread) with the fixed block layout (node_plan = fixed),
//                               against the default fewest-nodes plan above;
//   BM_EpieFftFloor, BM_EpieIteration   two FFTs per delay and one ptychographic iteration
//                               (one central momentum) on the same scan;
//   BM_HeliumRetrieve/B/T       retrieve() of the helium-70as preset scan (121 x 330) with B
//                               bootstrap replicas on T worker threads, wall time of one run
//                               (slow: ~1-4 min each);
//   BM_HeliumRetrieveFixed/8/2  BM_HeliumRetrieve/8/2 with the fixed block layout;
//   BM_HeliumRetrieveLaplace/8/2/K  BM_HeliumRetrieve/8/2 with `--uncertainty laplace` and
//                               `--laplace-check K` (K = 2, the default, and 0);
//   BM_NarrowRetrieve/8/2       the same for the narrow-band neon-150as preset (ptychographic).
// The problem is the helium-70as preset (seed 7) after preprocess(), as `retrieve` sees it.
// tests/bench/run_bench.sh runs these with the numpy reference and prints the ratios.
#include <benchmark/benchmark.h>
#include <sys/resource.h>

#include <cmath>
#include <cstdlib>
#include <memory>
#include <string>
#include <vector>

#include "retrieval/analysis/retrieve.h"
#include "retrieval/core/grid.h"
#include "retrieval/core/units.h"
#include "retrieval/engines/engine.h"
#include "retrieval/engines/full_model_engine.h"
#include "retrieval/physics/ir_parametrization.h"
#include "retrieval/preprocess/preprocess.h"
#include "synthetic/generator.h"
#include "synthetic/presets.h"

#include "tests/bench/bench_support.h"

namespace {

using namespace sw;

const synthetic::SyntheticScan& helium_scan() {
  static const synthetic::SyntheticScan s =
      synthetic::generate_scan(synthetic::find_preset("helium-70as").config, 7);
  return s;
}

const RetrievalProblem& helium_problem() {
  static const RetrievalProblem p = [] {
    PreprocessSummary sum;
    return preprocess(helium_scan().trace, PreprocessOptions{}, &sum);
  }();
  return p;
}

// Objective with a parametric IR at the preset's pulse (so the momentum blocks are those of a
// converged fit) and a chirped spectrum from the field-free spectrum.
struct Objective {
  std::unique_ptr<FullModelObjective> f;
  std::vector<double> x;
};
Objective make_objective(int threads, const std::string& node_plan = "fewest") {
  {
    const RetrievalProblem& P = helium_problem();
    const auto& cfg = synthetic::find_preset("helium-70as").config;
    const double T = units::period_au(P.ir_omega_au);
    const IrSampling smp = IrSampling::covering(P.delay_au.front() - P.grid.window() / 2,
                                                P.delay_au.back() + P.grid.window() / 2, T / 64);
    Objective r;
    FullModelSettings fs;
    fs.node_plan = node_plan;
    r.f = std::make_unique<FullModelObjective>(
        P, fs, MomentumModel::kFull, std::make_unique<GaussianIrParametrization>(smp), threads);
    std::vector<cdouble> spec(P.energy_au.size());
    for (std::size_t j = 0; j < spec.size(); ++j) {
      const double x = units::au_to_eV(P.energy_au[j]) - 105.0;
      spec[j] = std::sqrt(std::max(P.field_free_spectrum[j], 0.0)) * std::polar(1.0, 1e-3 * x * x);
    }
    r.x = r.f->encode(spec, GaussianIrParametrization::from_pulse(cfg.ir.pulse));
    r.f->replan(r.x.data());
    return r;
  }
}
Objective& helium_objective(int threads = 1) {
  static Objective one = make_objective(1), two = make_objective(2);
  return threads == 1 ? one : two;
}
// The same with the fixed block layout (FullModelSettings::node_plan = fixed: blocks of 2 rad,
// 10 nodes each), one thread.
Objective& helium_objective_fixed() {
  static Objective o = make_objective(1, "fixed");
  return o;
}

void fft_floor_of(benchmark::State& state, const Objective& o) {
  const ForwardAdjoint& fa = o.f->forward();
  std::size_t nodes = 0;
  for (const MomentumBlock& b : fa.plan().blocks) nodes += b.nodes.size();
  const std::size_t n = fa.grid().size(), ffts = 2 * nodes * fa.delays().size();
  const Fft fft(n);
  CVec a(n, cdouble(1.0, 0.5)), b(n);
  for (auto _ : state) {
    for (std::size_t j = 0; j < ffts / 2; ++j) {
      fft.time_to_freq(a, b);
      fft.freq_to_time(b, a);
    }
    benchmark::DoNotOptimize(a.data());
  }
  state.counters["grid"] = static_cast<double>(n);
  state.counters["nodes"] = static_cast<double>(nodes);
  state.counters["ffts"] = static_cast<double>(ffts);
}
void BM_FullModelFftFloor(benchmark::State& state) { fft_floor_of(state, helium_objective()); }
BENCHMARK(BM_FullModelFftFloor)->Unit(benchmark::kMillisecond);
void BM_FullModelFixedFftFloor(benchmark::State& state) {
  fft_floor_of(state, helium_objective_fixed());
}
BENCHMARK(BM_FullModelFixedFftFloor)->Unit(benchmark::kMillisecond);

// Arg: OpenMP threads over delays (wall time: the work of the second thread is not in the
// CPU column).
void cost_gradient_of(benchmark::State& state, const Objective& o) {
  std::vector<double> g(o.x.size());
  for (auto _ : state) benchmark::DoNotOptimize(o.f->evaluate(o.x.data(), g.data()));
  state.counters["parameters"] = static_cast<double>(o.x.size());
}
void BM_FullModelCostGradient(benchmark::State& state) {
  cost_gradient_of(state, helium_objective(static_cast<int>(state.range(0))));
}
BENCHMARK(BM_FullModelCostGradient)->Arg(1)->Arg(2)->Unit(benchmark::kMillisecond)->UseRealTime();

// The fixed block layout, one thread (the fewest-nodes plan's gain, in one run).
void BM_FullModelFixedCostGradient(benchmark::State& state) {
  cost_gradient_of(state, helium_objective_fixed());
}
BENCHMARK(BM_FullModelFixedCostGradient)->Unit(benchmark::kMillisecond);

void BM_FullModelCost(benchmark::State& state) {
  const Objective& o = helium_objective();
  for (auto _ : state) benchmark::DoNotOptimize(o.f->evaluate(o.x.data(), nullptr));
}
BENCHMARK(BM_FullModelCost)->Unit(benchmark::kMillisecond);

void BM_EpieFftFloor(benchmark::State& state) {
  const RetrievalProblem& p = helium_problem();
  bench::fft_floor(state, p.grid.size(), p.delay_au.size());
}
BENCHMARK(BM_EpieFftFloor)->Unit(benchmark::kMicrosecond);

void BM_EpieIteration(benchmark::State& state) {
  const RetrievalProblem& p = helium_problem();
  auto e = make_engine("ptychographic");
  EngineOptions o;
  o.threads = 1;
  o.settings.ptychographic.cma.momentum_bands = 1;
  e->prepare(p, o);
  int k = 1;
  for (auto _ : state) benchmark::DoNotOptimize(e->iterate(k++));
}
BENCHMARK(BM_EpieIteration)->Unit(benchmark::kMicrosecond);

// CPU seconds of the whole process, every thread (user + system).
double process_cpu_seconds() {
  rusage u{};
  getrusage(RUSAGE_SELF, &u);
  return static_cast<double>(u.ru_utime.tv_sec + u.ru_stime.tv_sec) +
         1e-6 * static_cast<double>(u.ru_utime.tv_usec + u.ru_stime.tv_usec);
}

// Whole analysis (preprocess, engines, bootstrap, metrics, quality) as `retrieve` runs it.
// Threads: the second argument (RetrieveOptions::threads). Counter process_cpu_s: CPU seconds of
// all threads (the L-BFGS runs on a worker thread, so the CPU column shows only the main thread);
// on a shared machine it is the figure to compare, wall time depends on the load.
void retrieve_run(benchmark::State& state, const Trace& t, const std::string& node_plan = "fewest",
                  UncertaintyMethod uncertainty = UncertaintyMethod::kFull) {
  RetrieveOptions o;
  o.engine_settings.full_model.node_plan = node_plan;
  o.uncertainty = uncertainty;
  if (uncertainty == UncertaintyMethod::kLaplace)
    o.laplace_check_replicas = static_cast<int>(state.range(2));
  o.bootstrap = static_cast<int>(state.range(0));
  o.threads = static_cast<int>(state.range(1));
  RetrieveOutput r;
  double cpu = 0.0;
  for (auto _ : state) {
    const double c0 = process_cpu_seconds();
    r = retrieve(t, o);
    cpu += process_cpu_seconds() - c0;
    benchmark::DoNotOptimize(r.result.xuv.has_value());
  }
  state.counters["process_cpu_s"] = cpu / static_cast<double>(state.iterations());
  if (r.result.xuv) {
    state.counters["fwhm_as"] = r.result.xuv->fwhm_as.value_or(0.0);
    state.counters["fwhm_sigma_as"] = r.result.xuv->fwhm_as_sigma.value_or(0.0);
  }
  state.counters["threads"] = o.threads;
  long long it = 0;
  for (const Reconstruction& c : r.chain) it += c.iterations;
  state.counters["iterations"] = static_cast<double>(it);
}
void BM_HeliumRetrieve(benchmark::State& state) { retrieve_run(state, helium_scan().trace); }
BENCHMARK(BM_HeliumRetrieve)
    ->Args({0, 1})
    ->Args({8, 1})
    ->Args({8, 2})
    ->Apply(sw::bench::one_timed_run);

// The same with the fixed block layout of the full model (node_plan = fixed), 8 replicas on 2
// threads: the fewest-nodes plan's gain on the whole analysis, in one run.
void BM_HeliumRetrieveFixed(benchmark::State& state) {
  retrieve_run(state, helium_scan().trace, "fixed");
}
BENCHMARK(BM_HeliumRetrieveFixed)->Args({8, 2})->Apply(sw::bench::one_timed_run);

// The same with linearised replicas (retrieval/engines/full_model_laplace.h): one Newton step per
// replica from the estimate instead of the engine chain; the third argument the full-chain
// replicas that check them (RetrieveOptions::laplace_check_replicas: 2 the default, 0 none).
void BM_HeliumRetrieveLaplace(benchmark::State& state) {
  retrieve_run(state, helium_scan().trace, "fewest", UncertaintyMethod::kLaplace);
}
BENCHMARK(BM_HeliumRetrieveLaplace)
    ->Args({8, 2, 2})
    ->Args({8, 2, 0})
    ->Apply(sw::bench::one_timed_run);

// The narrow-band reference: the neon-150as preset (seed 7), which `auto` keeps with the
// ptychographic engine; the default analysis (8 replicas, 2 threads).
void BM_NarrowRetrieve(benchmark::State& state) {
  static const synthetic::SyntheticScan s =
      synthetic::generate_scan(synthetic::find_preset("neon-150as").config, 7);
  retrieve_run(state, s.trace);
}
BENCHMARK(BM_NarrowRetrieve)->Args({8, 2})->Apply(sw::bench::one_timed_run);

}  // namespace
