// Background model (retrieval/preprocess/background.h) on synthetic counts whose background is
// known.
#include <catch2/catch.hpp>

#include <cmath>
#include <random>

#include "retrieval/core/units.h"
#include "retrieval/preprocess/background.h"
#include "retrieval/preprocess/preprocess.h"
#include "synthetic/generator.h"
#include "synthetic/presets.h"
#include "tests/check_support.h"

using namespace sw;

namespace {

std::vector<double> energies_eV(const Trace& t) {
  std::vector<double> w;
  for (double e : t.energy_au) w.push_back(units::au_to_eV(e));
  return w;
}

// neon-150as on 20-140 eV (signal-free bins on both sides of the streaked line) with a known
// background: constant c per bin plus a exp(-W / w).
synthetic::SyntheticScan neon_with_background(double c, double a, double w,
                                              unsigned long long seed) {
  synthetic::ScanConfig cfg = synthetic::find_preset("neon-150as").config;
  cfg.geometry.energy_eV = {20.0, 0.25, 480};
  cfg.noise.background_counts = c;
  cfg.noise.background_exp_counts = a;
  cfg.noise.background_exp_decay_eV = w;
  return synthetic::generate_scan(cfg, seed);
}

}  // namespace

TEST_CASE("background options: defaults validate, bad values are named", "[background]") {
  test::check_validation<BackgroundOptions>(
      {{[](auto& o) { o.group_bins = 0; }, "group_bins = 0"},
       {[](auto& o) { o.tail_decay_max_eV = 0.5; }, "tail_decay_max_eV"}});
}

TEST_CASE("background bins avoid the streaked signal", "[background]") {
  const auto sc = neon_with_background(3.0, 0.0, 10.0, 11);
  const std::vector<bool> bg = background_bins(sc.trace.counts, BackgroundOptions{});
  // Ground truth from the noise-free scan: a bin whose clean signal reaches 1e-3 of the peak
  // in any row is signal (common practice: far below the ~3 count background's Poisson noise).
  const double peak = sc.clean.maxCoeff();
  long bg_count = 0;
  for (Eigen::Index j = 0; j < sc.clean.cols(); ++j) {
    if (!bg[static_cast<std::size_t>(j)]) continue;
    ++bg_count;
    INFO("bin " << j);
    CHECK(sc.clean.col(j).maxCoeff() < 1e-3 * peak);
  }
  CHECK(bg_count > 40);  // both sides of the 20-140 eV axis contribute
}

TEST_CASE("background fit is unbiased within its sigma: constant + exponential tail",
          "[background]") {
  // Known background 2 counts/bin + 60 exp(-W / 12 eV) (the low-energy electron tail shape
  // the generator adds; its parameters are ours). Poisson ML is asymptotically unbiased
  // with the inverse Fisher information as covariance (Cramer-Rao; standard statistics):
  // every parameter must lie within 3 sigma of the truth on each of three seeds, and the
  // pulls' mean over the seeds within 3 / sqrt(3).
  double pull_c = 0, pull_a = 0;
  for (unsigned long long seed : {21ULL, 22ULL, 23ULL}) {
    const auto sc = neon_with_background(2.0, 60.0, 12.0, seed);
    const BackgroundModel m =
        fit_background(sc.trace.counts, energies_eV(sc.trace), BackgroundOptions{});
    INFO("seed " << seed << ": " << m.model << " c = " << m.constant_counts << " +- "
                 << m.constant_counts_sigma << ", a = " << m.tail_counts_at_zero << " +- "
                 << m.tail_counts_at_zero_sigma << ", w = " << m.tail_decay_eV << " +- "
                 << m.tail_decay_eV_sigma << " (" << m.background_bins << " bins)");
    REQUIRE(m.has_tail);
    CHECK(std::abs(m.constant_counts - 2.0) < 3.0 * m.constant_counts_sigma);
    CHECK(std::abs(m.tail_decay_eV - 12.0) < 3.0 * m.tail_decay_eV_sigma);
    // At the lowest measured energy the model must match the truth within 3 sigma_at.
    const double W0 = 20.0;
    CHECK(std::abs(m.at(W0) - (2.0 + 60.0 * std::exp(-W0 / 12.0))) < 3.0 * m.sigma_at(W0));
    pull_c += (m.constant_counts - 2.0) / m.constant_counts_sigma;
    pull_a += (m.at(W0) - (2.0 + 60.0 * std::exp(-W0 / 12.0))) / m.sigma_at(W0);
  }
  CHECK(std::abs(pull_c / 3.0) < 3.0 / std::sqrt(3.0));
  CHECK(std::abs(pull_a / 3.0) < 3.0 / std::sqrt(3.0));
}

TEST_CASE("background fit: a flat background gives the constant model", "[background]") {
  // Without a tail the likelihood-ratio test (Wilks: chi^2 with 2 dof, 1 % point 9.21) must
  // keep the constant model on most draws; the constant is unbiased within 3 sigma.
  const auto sc = neon_with_background(4.0, 0.0, 10.0, 31);
  const BackgroundModel m =
      fit_background(sc.trace.counts, energies_eV(sc.trace), BackgroundOptions{});
  INFO(m.model << ": c = " << m.constant_counts << " +- " << m.constant_counts_sigma << "; "
               << m.note);
  CHECK(m.model == "constant");
  CHECK(std::abs(m.constant_counts - 4.0) < 3.0 * m.constant_counts_sigma);
  // sigma of a Poisson mean over n bins x rows counts: sqrt(c / (n rows)) (standard).
  const double expect = std::sqrt(4.0 / static_cast<double>(m.background_bins * m.rows));
  CHECK(m.constant_counts_sigma == Approx(expect).epsilon(0.05));
}

TEST_CASE("background fit: time-of-flight background follows the t^3 Jacobian", "[background]") {
  // Hand-made scan: a Gaussian line whose centre moves with delay (the streaking) over a
  // background that is constant per time-of-flight bin, i.e. d (W_ref / W)^(3/2) per energy
  // bin (|dt/dW| ∝ W^(-3/2) for t ∝ W^(-1/2); DESIGN.md "Jacobians"), plus a flat 1 count.
  std::mt19937_64 rng(5);
  const int nd = 60, ne = 400;
  std::vector<double> W(ne);
  for (int j = 0; j < ne; ++j) W[static_cast<std::size_t>(j)] = 10.0 + 0.25 * j;
  Eigen::MatrixXd counts(nd, ne);
  const double d = 20.0, c = 1.0;
  for (int i = 0; i < nd; ++i)
    for (int j = 0; j < ne; ++j) {
      const double w = W[static_cast<std::size_t>(j)];
      const double centre = 60.0 + 5.0 * std::sin(0.3 * i);
      const double mu = c + d * std::pow(10.0 / w, 1.5) +
                        300.0 * std::exp(-0.5 * std::pow((w - centre) / 4.0, 2));
      counts(i, j) = static_cast<double>(std::poisson_distribution<long long>(mu)(rng));
    }
  const BackgroundModel m = fit_background(counts, W, BackgroundOptions{}, true, 0.0);
  INFO(m.model << ": c = " << m.constant_counts << " +- " << m.constant_counts_sigma
               << ", d = " << m.tof_counts << " +- " << m.tof_counts_sigma << "; " << m.note);
  REQUIRE(m.has_tof);
  CHECK(std::abs(m.tof_counts - d) < 3.0 * m.tof_counts_sigma);
  CHECK(std::abs(m.constant_counts - c) < 3.0 * m.constant_counts_sigma);
}

TEST_CASE("preprocess subtracts the fitted background without bias", "[background][preprocess]") {
  // The same scan with background "auto": in the bins far from the signal N - B must average
  // to 0 within 3 standard errors (E[N] = B for Poisson counts; standard).
  auto sc = neon_with_background(2.0, 60.0, 12.0, 41);
  sc.trace.meta.background.reset();
  sc.trace.meta.background_auto = true;
  PreprocessSummary ps;
  PreprocessOptions po;  // the whole axis (no window at the expected 2s line): bins as the scan's
  po.lines.assume_expected_lines = false;
  const RetrievalProblem pr = preprocess(sc.trace, po, &ps);
  CHECK(ps.background_source == "fit");
  CHECK(ps.background.model == "constant + exponential tail");
  const double dW = pr.energy_au[1] - pr.energy_au[0];
  const double scale = 500.0 / sc.clean.maxCoeff();
  double sum = 0, var = 0, sb = 0;  // sb: the fit's own uncertainty, summed (fully correlated)
  long n = 0;
  for (Eigen::Index i = 0; i < pr.intensity.rows(); ++i)
    for (Eigen::Index j = 0; j < pr.intensity.cols(); ++j)
      if (sc.clean(i, j) * scale < 1e-3) {
        const double W = units::au_to_eV(pr.energy_au[static_cast<std::size_t>(j)]);
        sum +=
            pr.intensity(i, j) * dW * units::momentum_au(pr.energy_au[static_cast<std::size_t>(j)]);
        var += 2.0 + 60.0 * std::exp(-W / 12.0);
        sb += ps.background.sigma_at(W);
        ++n;
      }
  REQUIRE(n > 1000);
  INFO("mean of N - B over " << n << " background-only bins: " << sum / static_cast<double>(n));
  CHECK(std::abs(sum) < 3.0 * (std::sqrt(var) + sb));
}

TEST_CASE("background fit: a tail that rises from an onset is fitted from its maximum on",
          "[background]") {
  // Known background 1 count/bin + 40 exp(-(W - 4 eV) / 10 eV) above an onset at 4 eV and
  // nothing below it (the generator's tail with an onset; parameters ours), on a 1-140 eV axis.
  // Poisson ML within 3 sigma of the truth (Cramer-Rao, as above) once the rising bins are left
  // out of the fit; below the onset each bin's own delay average (Poisson mean over the rows).
  synthetic::ScanConfig cfg = synthetic::find_preset("neon-150as").config;
  cfg.geometry.energy_eV = {1.0, 0.25, 560};
  cfg.noise.background_counts = 1.0;
  cfg.noise.background_exp_counts = 40.0;
  cfg.noise.background_exp_decay_eV = 10.0;
  cfg.noise.background_exp_onset_eV = 4.0;
  const auto sc = synthetic::generate_scan(cfg, 41);
  const BackgroundModel m =
      fit_background(sc.trace.counts, energies_eV(sc.trace), BackgroundOptions{});
  INFO(m.model << ": c = " << m.constant_counts << " +- " << m.constant_counts_sigma
               << ", w = " << m.tail_decay_eV << " +- " << m.tail_decay_eV_sigma << ", onset "
               << m.onset_eV << " eV; " << m.note);
  REQUIRE(m.has_tail);
  // The onset is the first bin of the largest group of 4 bins: 4.0 eV (bins of 0.25 eV).
  CHECK(m.onset_eV == Approx(4.0).margin(0.5));
  CHECK(std::abs(m.constant_counts - 1.0) < 3.0 * m.constant_counts_sigma);
  CHECK(std::abs(m.tail_decay_eV - 10.0) < 3.0 * m.tail_decay_eV_sigma);
  for (double W : {6.0, 15.0, 30.0}) {
    INFO("W = " << W);
    CHECK(std::abs(m.at(W) - (1.0 + 40.0 * std::exp(-(W - 4.0) / 10.0))) < 3.0 * m.sigma_at(W));
  }
  CHECK(std::abs(m.at(2.0) - 1.0) < 4.0 * m.sigma_at(2.0));  // only the constant below

  // The same tail decaying from the axis start has no onset.
  cfg.noise.background_exp_onset_eV = 0.0;
  const auto flat_start = synthetic::generate_scan(cfg, 42);
  const BackgroundModel m0 =
      fit_background(flat_start.trace.counts, energies_eV(flat_start.trace), BackgroundOptions{});
  CHECK(m0.onset_eV == 0.0);
  REQUIRE(m0.has_tail);
  CHECK(std::abs(m0.tail_decay_eV - 10.0) < 3.0 * m0.tail_decay_eV_sigma);
}
