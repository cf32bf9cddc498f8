#pragma once
// Shared pieces of the Google Benchmark programs under tests/bench/.

#include <benchmark/benchmark.h>

#include <cstddef>

#include "retrieval/core/grid.h"

namespace sw::bench {

/// The FFT floor of one ePIE iteration: a forward and an inverse FFT of an n-point grid for each
/// of `rows` delay rows (the ratios in docs/performance.md divide by it).
inline void fft_floor(benchmark::State& state, std::size_t n, std::size_t rows) {
  const std::size_t nd = rows;
  const Fft fft(n);
  CVec a(n, cdouble(1.0, 0.5)), b(n), c(n);
  for (auto _ : state) {
    for (std::size_t j = 0; j < nd; ++j) {
      fft.time_to_freq(a, b);
      fft.freq_to_time(b, c);
    }
    benchmark::DoNotOptimize(c.data());
  }
  state.counters["grid"] = static_cast<double>(n);
  state.counters["ffts"] = static_cast<double>(2 * nd);
}

/// One timed run per argument set, in seconds of wall-clock time (the settings of the end-to-end
/// benchmarks: `BENCHMARK(f)->Args(...)->Apply(sw::bench::one_timed_run)`).
inline void one_timed_run(benchmark::internal::Benchmark* b) {
  b->Iterations(1)->Unit(benchmark::kSecond)->UseRealTime();
}

}  // namespace sw::bench
