// Preprocessing (retrieval/preprocess.h) on synthetic counts whose statistics are known.
#include <catch2/catch.hpp>

#include <cmath>
#include <random>

#include "retrieval/preprocess.h"
#include "retrieval/units.h"
#include "synthetic/generator.h"
#include "synthetic/presets.h"

using namespace sw;

TEST_CASE("background subtraction is unbiased in the background-dominated bins", "[preprocess]") {
  // neon-150as with a flat 5 counts/bin pedestal that the sidecar states (meta.background):
  // in the bins far from the signal the counts are Poisson with mean 5 (E[N] = lambda,
  // standard), so the mean of N - 5 over them must be 0 within its standard error
  // sqrt(5 / n). Clipping N - 5 at 0 would give E[max(N - 5, 0)] = 0.88 counts instead
  // (Poisson(5) tail sum, standard) -- the bias that lifted the spectral wings.
  synthetic::ScanConfig c = synthetic::find_preset("neon-150as").config;
  c.geometry.energy_eV = {20.0, 0.25, 480};  // 20-140 eV: signal-free bins on both sides
  c.noise.background_counts = 5.0;
  const synthetic::SyntheticScan sc = synthetic::generate_scan(c, 3);
  REQUIRE(sc.trace.meta.background);
  PreprocessSummary ps;
  const RetrievalProblem pr = preprocess(sc.trace, PreprocessOptions{}, &ps);
  CHECK(ps.background_source == "sidecar");
  // Bins whose noise-free signal is below 1e-3 count: there I = (N - 5) / (dW p).
  const double dW = pr.energy_au[1] - pr.energy_au[0];
  double sum = 0.0;
  long n = 0;
  for (Eigen::Index i = 0; i < pr.intensity.rows(); ++i)
    for (Eigen::Index j = 0; j < pr.intensity.cols(); ++j)
      if (sc.clean(i, j) * (5e2 / sc.clean.maxCoeff()) < 1e-3) {
        sum += pr.intensity(i, j) * dW * units::momentum_au(pr.energy_au[static_cast<std::size_t>(j)]);
        ++n;
      }
  REQUIRE(n > 1000);
  const double mean = sum / static_cast<double>(n);
  INFO("mean of N - 5 over " << n << " background-only bins: " << mean);
  CHECK(std::abs(mean) < 3.0 * std::sqrt(5.0 / static_cast<double>(n)));
  CHECK(pr.intensity.minCoeff() < 0.0);  // kept signed
}
