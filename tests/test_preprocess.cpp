// Preprocessing (retrieval/preprocess/preprocess.h) on synthetic counts whose statistics are known.
#include <catch2/catch.hpp>

#include <cmath>
#include <random>

#include "retrieval/analysis/retrieve.h"
#include "retrieval/core/units.h"
#include "retrieval/engines/cma_problem.h"
#include "retrieval/preprocess/preprocess.h"
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
  // The whole axis (no window at the expected 2s line), so the bins match the scan's.
  PreprocessOptions po;
  po.lines.assume_expected_lines = false;
  const RetrievalProblem pr = preprocess(sc.trace, po, &ps);
  CHECK(ps.background_source == "sidecar");
  // Bins whose noise-free signal is below 1e-3 count: there I = (N - 5) / (dW p).
  const double dW = pr.energy_au[1] - pr.energy_au[0];
  double sum = 0.0;
  long n = 0;
  for (Eigen::Index i = 0; i < pr.intensity.rows(); ++i)
    for (Eigen::Index j = 0; j < pr.intensity.cols(); ++j)
      if (sc.clean(i, j) * (5e2 / sc.clean.maxCoeff()) < 1e-3) {
        sum +=
            pr.intensity(i, j) * dW * units::momentum_au(pr.energy_au[static_cast<std::size_t>(j)]);
        ++n;
      }
  REQUIRE(n > 1000);
  const double mean = sum / static_cast<double>(n);
  INFO("mean of N - 5 over " << n << " background-only bins: " << mean);
  CHECK(std::abs(mean) < 3.0 * std::sqrt(5.0 / static_cast<double>(n)));
  CHECK(pr.intensity.minCoeff() < 0.0);  // kept signed
}

TEST_CASE("preprocess options: defaults validate; hot-pixel removal is on by default",
          "[preprocess]") {
  CHECK(PreprocessOptions{}.validate().empty());
  CHECK(PreprocessOptions{}.hot_pixels.remove);
  PreprocessOptions o;
  o.energy_window_lo_eV = 80;
  o.energy_window_hi_eV = 60;
  CHECK_THAT(o.validate(), Catch::Contains("energy_window = [80, 60]"));
}

TEST_CASE("hot pixels are removed without touching RABBITT harmonic peaks", "[preprocess]") {
  // argon-rabbitt on 0.25 eV bins: each harmonic and sideband (0.23 eV wide) is one bin wide,
  // a ridge along the delay axis; a hot pixel stands out in delay AND energy (common practice
  // for detector defects). The clean scan must lose no bin; 20 injected hot pixels must all go.
  synthetic::ScanConfig c = synthetic::find_preset("argon-rabbitt").config;
  c.geometry.energy_eV = {3.0, 0.25, 128};
  const synthetic::SyntheticScan sc = synthetic::generate_scan(c, 5);
  PreprocessSummary ps;
  (void)preprocess(sc.trace, PreprocessOptions{}, &ps);
  CHECK(ps.hot_pixels_replaced == 0);
  // The harmonics really are one bin wide: the peak bin holds most of a line's counts.
  const Eigen::VectorXd spec = sc.trace.counts.colwise().sum().transpose();
  Eigen::Index jmax = 0;
  spec.maxCoeff(&jmax);
  CHECK(spec(jmax) > 0.5 * (spec(std::max<Eigen::Index>(jmax - 1, 0)) + spec(jmax) +
                            spec(std::min<Eigen::Index>(jmax + 1, spec.size() - 1))));

  Trace hot = sc.trace;
  std::mt19937_64 rng(17);
  std::uniform_int_distribution<Eigen::Index> ri(1, hot.counts.rows() - 2),
      rj(1, hot.counts.cols() - 2);
  int injected = 0;
  std::vector<std::pair<Eigen::Index, Eigen::Index>> at;
  while (injected < 20) {
    const Eigen::Index i = ri(rng), j = rj(rng);
    bool near = false;
    for (auto [a, b] : at) near = near || (std::abs(a - i) <= 1 && std::abs(b - j) <= 1);
    if (near) continue;
    at.push_back({i, j});
    hot.counts(i, j) = 10.0 * sc.trace.counts.maxCoeff();  // a stuck pixel near full scale
    ++injected;
  }
  (void)preprocess(hot, PreprocessOptions{}, &ps);
  CHECK(ps.hot_pixels_replaced == 20);

  // No false hits on a weak background with readout noise: neon-150as-lab has 2 counts/bin plus
  // a tail and 1 count rms readout noise; an 8-sigma Poisson excess has probability ~1e-9 per
  // bin (Poisson tail, standard), so none of its 36300 bins may be replaced.
  const synthetic::SyntheticScan lab =
      synthetic::generate_scan(synthetic::find_preset("neon-150as-lab").config, 6);
  (void)preprocess(lab.trace, PreprocessOptions{}, &ps);
  CHECK(ps.hot_pixels_replaced == 0);
}

TEST_CASE("saturated bins get zero weight; the saturated scan retrieves the FWHM within 8 %",
          "[preprocess][retrieve]") {
  // neon-150as clipped at 60 % of its peak (a detector limit of our scenario): the plateau
  // of identical maximal counts is found without being told, each clipped bin gets weight 0,
  // and the retrieval on the rest gives the generator's FWHM within 8 % (our tolerance, the
  // issue's requirement).
  synthetic::ScanConfig c = synthetic::find_preset("neon-150as").config;
  c.noise.saturation_counts = 300.0;
  const synthetic::SyntheticScan sc = synthetic::generate_scan(c, 4);
  long clipped = 0;
  for (Eigen::Index i = 0; i < sc.trace.counts.size(); ++i)
    clipped += sc.trace.counts.data()[i] >= 300.0 ? 1 : 0;
  REQUIRE(clipped > 20);
  PreprocessSummary ps;
  PreprocessOptions po;  // the whole axis, so the bins match the scan's
  po.lines.assume_expected_lines = false;
  const RetrievalProblem pr = preprocess(sc.trace, po, &ps);
  CHECK(ps.saturated_bins == static_cast<std::size_t>(clipped));
  CHECK(ps.saturation_source == "plateau");
  REQUIRE(pr.weight.size() == pr.intensity.size());
  CHECK(pr.weight.sum() == Approx(static_cast<double>(pr.weight.size() - clipped)));
  for (Eigen::Index i = 0; i < sc.trace.counts.rows(); ++i)
    for (Eigen::Index j = 0; j < sc.trace.counts.cols(); ++j)
      if (sc.trace.counts(i, j) >= 300.0) CHECK(pr.weight(i, j) == 0.0);
  // The sidecar's level finds the same bins.
  Trace t = sc.trace;
  t.meta.saturation_counts = 300.0;
  (void)preprocess(t, PreprocessOptions{}, &ps);
  CHECK(ps.saturation_source == "sidecar");
  CHECK(ps.saturated_bins == static_cast<std::size_t>(clipped));
  // An unsaturated Poisson scan has no plateau.
  const synthetic::SyntheticScan clean =
      synthetic::generate_scan(synthetic::find_preset("neon-150as").config, 4);
  (void)preprocess(clean.trace, PreprocessOptions{}, &ps);
  CHECK(ps.saturated_bins == 0);

  RetrieveOptions o;
  o.bootstrap = 0;
  o.engine = "ptychographic";
  const RetrieveOutput out = retrieve(sc.trace, o);
  const double truth = *sc.truth.xuv->fwhm_as;
  INFO("retrieved " << *out.result.xuv->fwhm_as << " as, truth " << truth << " as");
  CHECK(std::abs(*out.result.xuv->fwhm_as / truth - 1.0) < 0.08);
}

TEST_CASE("the engines ignore weight-0 elements", "[preprocess][engine]") {
  // Weighted trace error (engine.h): with weight 0 on a bin, changing the measured value there
  // changes nothing (the definition, checked by hand on a 2x2 case).
  Eigen::MatrixXd meas(2, 2), model(2, 2), w(2, 2);
  meas << 1, 2, 3, 4;
  model << 1, 2, 3, 4;
  w << 1, 1, 1, 0;
  double mu = 0;
  CHECK(trace_error(meas, model, &mu, &w) == Approx(0.0).margin(1e-15));
  meas(1, 1) = 100;  // a clipped/garbage value at the weight-0 bin
  CHECK(trace_error(meas, model, &mu, &w) == Approx(0.0).margin(1e-15));
  CHECK(mu == Approx(1.0));
  CHECK(trace_error(meas, model, &mu) > 0.1);  // unweighted it matters
  // Noise floor over weighted elements only: sqrt(sum var / (N max^2)) with N = 3, max = 3.
  Eigen::MatrixXd var = Eigen::MatrixXd::Constant(2, 2, 1.0);
  CHECK(noise_floor_trace_error(meas, var, &w) == Approx(std::sqrt(3.0 / (3.0 * 9.0))));
}

TEST_CASE("the CMA projection keeps the model at weight-0 bins", "[preprocess][engine]") {
  // RetrievalProblem::weight = 0 means "not data" (engine.h): projecting a delay row whose
  // bins all have weight 0 must leave its exit-wave spectrum unchanged; with weight 1 it moves.
  const synthetic::SyntheticScan sc =
      synthetic::generate_scan(synthetic::find_preset("neon-150as").config, 2);
  RetrievalProblem pr = preprocess(sc.trace, PreprocessOptions{}, nullptr);
  pr.weight = Eigen::MatrixXd::Ones(pr.intensity.rows(), pr.intensity.cols());
  const std::size_t row = 60;
  pr.weight.row(static_cast<Eigen::Index>(row)).setZero();
  for (bool poisson : {false, true}) {
    CmaSettings set;
    set.projection = poisson ? CmaProjection::kPoisson : CmaProjection::kAmplitude;
    const CmaProblem cma(pr, set, "test");
    std::mt19937_64 rng(3);
    std::normal_distribution<double> g;
    CVec spec(cma.samples());
    for (auto& z : spec) z = cdouble(g(rng), g(rng));
    std::vector<double> scratch(cma.scratch_size());
    CVec a = spec, b = spec;
    ErrorSums sums;
    cma.project(row, a.data(), sums, scratch.data());
    double moved = 0;
    for (std::size_t k = 0; k < a.size(); ++k) moved += std::abs(a[k] - spec[k]);
    CHECK(moved == 0.0);
    cma.project(row - 1, b.data(), sums, scratch.data());
    moved = 0;
    for (std::size_t k = 0; k < b.size(); ++k) moved += std::abs(b[k] - spec[k]);
    CHECK(moved > 0.0);
  }
}

TEST_CASE("hot pixels on the edge rows and columns are removed too", "[preprocess]") {
  // A stuck pixel on the first or last delay row or energy bin is as isolated as an interior one
  // (one neighbour fewer); left in, it is a 30-200 count spike the engines must fit (common
  // practice for detector defects). The clean scan must lose no bin; 4 corner-side spikes
  // must all go, and be replaced by a neighbour-level value.
  const synthetic::SyntheticScan sc =
      synthetic::generate_scan(synthetic::find_preset("neon-150as").config, 9);
  Eigen::MatrixXd clean = sc.trace.counts, none;
  CHECK(remove_hot_pixels(clean, none, 8.0, 5.0) == 0);
  Eigen::MatrixXd hot = sc.trace.counts;
  const Eigen::Index nd = hot.rows(), ne = hot.cols();
  Eigen::Index jpk = 0;
  hot.row(0).maxCoeff(&jpk);
  const std::vector<std::pair<Eigen::Index, Eigen::Index>> at = {
      {0, jpk}, {nd - 1, ne / 3}, {nd / 2, 0}, {nd / 3, ne - 1}};
  for (auto [i, j] : at) hot(i, j) = 50.0 * std::max(1.0, sc.trace.counts(i, j));
  CHECK(remove_hot_pixels(hot, none, 8.0, 5.0) == at.size());
  for (auto [i, j] : at) {
    INFO("pixel " << i << ", " << j);
    CHECK(hot(i, j) <= 3.0 * std::max(sc.trace.counts(i, j), 3.0));
  }
}
