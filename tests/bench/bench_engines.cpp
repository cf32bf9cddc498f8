// Cost of the CMA engines against their FFT floor, in one run so that ratios can be read on a
// shared machine:
//   BM_FftFloor/N           2 x N_delay FFTs of the grid size (the floor of one CMA iteration);
//   BM_PtychographicIteration, BM_ProjectionsIteration   one iteration, 121 delays x 400 energies;
//   BM_PtychographicIterationNodes/N   the same with N momentum nodes (floor: N x BM_FftFloor);
//   BM_*Retrieval           a full retrieval to convergence of that problem (Poisson noise,
//                           100 counts at the peak), iterations and G as counters;
//   BM_ForwardModelCma      the CMA forward model, 128 delays x 512 energies, 1024 grid,
//                           single-threaded (ForwardModelOptions::threads = 1).
// Build with -DSTREAKWRIGHT_BUILD_BENCHMARKS=ON; run bench_engines.
#include <benchmark/benchmark.h>

#include <string>
#include <utility>
#include <vector>

#include "retrieval/engines/engine.h"
#include "retrieval/physics/forward_model.h"
#include "tests/cma_test_problem.h"

#include "tests/bench/bench_support.h"

namespace {

using namespace sw;

const testing::Case& problem_121x400(bool noisy) {
  static const testing::Case clean = testing::make_case({.xuv = {.gdd_as2 = 3000}});
  static const testing::Case noisy_case =
      testing::make_case({.xuv = {.gdd_as2 = 3000}, .peak_counts = 100});
  return noisy ? noisy_case : clean;
}

void BM_FftFloor(benchmark::State& state) {
  const RetrievalProblem& p = problem_121x400(false).problem;
  bench::fft_floor(state, p.grid.size(), p.delay_au.size());
}
BENCHMARK(BM_FftFloor)->Unit(benchmark::kMicrosecond);

// `settings` of the engines; `warmup` iterations run before timing (the ptychographic engine
// adds its momentum nodes within its first 100 iterations).
void iteration(benchmark::State& state, const char* engine, int threads,
               EngineSettings settings = {}, int warmup = 0) {
  const auto& p = problem_121x400(false).problem;
  auto e = make_engine(engine);
  EngineOptions o;
  o.threads = threads;
  o.settings = std::move(settings);
  e->prepare(p, o);
  int k = 1;
  for (; k <= warmup; ++k) e->iterate(k);
  for (auto _ : state) benchmark::DoNotOptimize(e->iterate(k++));
  state.counters["delays"] = static_cast<double>(p.delay_au.size());
  state.counters["energies"] = static_cast<double>(p.energy_au.size());
}

// The ptychographic engine's settings with `nodes` momentum nodes.
EngineSettings with_nodes(int nodes) {
  EngineSettings s;
  s.ptychographic.cma.momentum_bands = nodes;
  return s;
}

// One central momentum (the one-p0 stage).
void BM_PtychographicIteration(benchmark::State& state) {
  iteration(state, "ptychographic", 1, with_nodes(1));
}
BENCHMARK(BM_PtychographicIteration)->Unit(benchmark::kMicrosecond);
// With N momentum nodes (after the switch): N FFT pairs per delay plus the interpolation.
void BM_PtychographicIterationNodes(benchmark::State& state) {
  iteration(state, "ptychographic", 1, with_nodes(static_cast<int>(state.range(0))), 101);
  state.counters["nodes"] = static_cast<double>(state.range(0));
}
BENCHMARK(BM_PtychographicIterationNodes)->Arg(3)->Arg(7)->Unit(benchmark::kMicrosecond);
void BM_ProjectionsIteration(benchmark::State& state) {
  iteration(state, "projections", static_cast<int>(state.range(0)));
}
BENCHMARK(BM_ProjectionsIteration)->Arg(1)->Arg(2)->Unit(benchmark::kMicrosecond)->UseRealTime();

void retrieval(benchmark::State& state, const char* engine, int threads) {
  const auto& p = problem_121x400(true).problem;
  Reconstruction r;
  for (auto _ : state) {
    auto e = make_engine(engine);
    EngineOptions o;
    o.threads = threads;
    r = run_engine(*e, p, o);
    benchmark::DoNotOptimize(r.history.data());
  }
  state.counters["iterations"] = r.iterations;
  state.counters["G"] = r.trace_error;
  state.counters["G_noise"] = r.noise_floor_trace_error;
  state.counters["converged"] = r.converged() ? 1 : 0;
}

void BM_PtychographicRetrieval(benchmark::State& state) { retrieval(state, "ptychographic", 1); }
BENCHMARK(BM_PtychographicRetrieval)->Unit(benchmark::kMillisecond)->UseRealTime();
void BM_ProjectionsRetrieval(benchmark::State& state) {
  retrieval(state, "projections", static_cast<int>(state.range(0)));
}
BENCHMARK(BM_ProjectionsRetrieval)->Arg(1)->Arg(2)->Unit(benchmark::kMillisecond)->UseRealTime();

void BM_ForwardModelCma(benchmark::State& state) {
  const auto& c = problem_121x400(false);
  const TimeGrid g = TimeGrid::for_energy_step(1024, units::eV_to_au(0.25));
  const XuvField x = make_gaussian_xuv(g, GaussianXuvPulse{});
  std::vector<double> W, D;
  for (int j = 0; j < 512; ++j) W.push_back(units::eV_to_au(20.0) + g.dw() * j);
  for (int i = 0; i < 128; ++i) D.push_back(units::fs_to_au(-6.0 + 12.0 * i / 127.0));
  ForwardModelOptions o;
  o.central_momentum_au = c.problem.central_momentum_au;
  o.threads = 1;
  const ForwardModel fm(c.problem.ionization_energy_au, DipoleModel(), o);
  for (auto _ : state) benchmark::DoNotOptimize(fm.trace(x, c.ir, D, W));
}
BENCHMARK(BM_ForwardModelCma)->Unit(benchmark::kMillisecond);

}  // namespace
