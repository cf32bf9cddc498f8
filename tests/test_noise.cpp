// Noise models of the synthetic generator (synthetic/noise.h, synthetic/fluctuations.h):
// counting statistics, resolution, background, saturation, per-row jitter.
#include <catch2/catch.hpp>

#include <cmath>
#include <numeric>
#include <vector>

#include "retrieval/core/units.h"
#include "synthetic/fluctuations.h"
#include "synthetic/generator.h"
#include "synthetic/noise.h"
#include "synthetic/presets.h"
#include "tests/test_support.h"

using namespace sw;
using sw::test::axis;
using namespace sw::synthetic;

namespace {

// A small XUV-only scan with many identical rows (no IR: every row has the same expectation).
ScanConfig repeated_field_free(int rows, double peak_counts) {
  ScanConfig c = find_preset("neon-xuv-only").config;
  c.geometry.delay_fs = {0.0, 1.0, rows};
  c.noise.peak_counts = peak_counts;
  return c;
}

}  // namespace

TEST_CASE("Poisson counting: mean = variance at a given peak count", "[noise]") {
  // Counting statistics are Poisson: mean = variance (e.g. G. F. Knoll, Radiation Detection and
  // Measurement, 4th ed. (2010), ch. 3). With N = 400 identical rows the sample mean of a bin
  // with expectation L has sd sqrt(L/N) and its sample variance sd ~ sqrt((L + 2 L^2)/N);
  // summed over the bins above 5 counts, the ratios below have sampling errors < 1 %, so
  // 3 % is a > 3 sigma tolerance.
  const int rows = 400;
  const double peak = 100.0;
  const SyntheticScan s = generate_scan(repeated_field_free(rows, peak), 5);
  const Eigen::MatrixXd& C = s.trace.counts;
  const Eigen::VectorXd expect = s.clean.row(0).transpose() * (peak / s.clean.maxCoeff());
  double sum_mean = 0, sum_var = 0, sum_expect = 0;
  int bins = 0;
  for (Eigen::Index j = 0; j < C.cols(); ++j) {
    if (expect(j) < 5) continue;
    const double mean = C.col(j).mean();
    const double var = (C.col(j).array() - mean).square().sum() / (rows - 1);
    sum_mean += mean;
    sum_var += var;
    sum_expect += expect(j);
    ++bins;
  }
  REQUIRE(bins > 30);
  CHECK(sum_mean / sum_expect == Approx(1.0).margin(0.03));
  CHECK(sum_var / sum_mean == Approx(1.0).margin(0.03));
  // Integer counts.
  CHECK((C.array() - C.array().round()).abs().maxCoeff() == 0.0);

  // The stage alone on a flat expectation: 10^4 draws of L = 50 (sd of the mean 0.07, of the
  // variance 0.71): 4 sigma bounds.
  Eigen::MatrixXd flat = Eigen::MatrixXd::Constant(100, 100, 50.0);
  RandomStreams rs(9);
  PoissonCounting().apply(flat, axis(1, 1, 100), rs);
  const double m = flat.mean();
  const double v = (flat.array() - m).square().sum() / (flat.size() - 1);
  CHECK(m == Approx(50.0).margin(0.28));
  CHECK(v == Approx(50.0).margin(2.9));
}

TEST_CASE("energy resolution conserves counts and has the set width", "[noise]") {
  // A Gaussian response of FWHM dE has sigma = dE / (2 sqrt(2 ln 2)); sampling on bins of width
  // h adds h^2/12 to the variance (Sheppard's correction, W. F. Sheppard, Proc. London Math.
  // Soc. 29, 353 (1898)). Counts are conserved (weights normalised over the axis).
  const auto E = axis(10.0, 0.1, 400);
  Eigen::MatrixXd m = Eigen::MatrixXd::Zero(3, 400);
  m(0, 200) = 1000.0;                                                     // a line at 30 eV
  for (int j = 0; j < 400; ++j) m(1, j) = 5.0 + std::sin(0.1 * j) * 4.0;  // smooth
  m(2, 0) = 77.0;                                                         // at the edge of the axis
  m(2, 399) = 33.0;
  const Eigen::VectorXd before = m.rowwise().sum();
  RandomStreams rs(1);
  Eigen::MatrixXd c = m;
  EnergyResolution(1.0, 0.0).apply(c, E, rs);
  for (int i = 0; i < 3; ++i) CHECK(c.row(i).sum() == Approx(before(i)).epsilon(1e-12));
  double mean = 0, var = 0, tot = c.row(0).sum();
  for (int j = 0; j < 400; ++j) mean += c(0, j) * E[static_cast<std::size_t>(j)] / tot;
  for (int j = 0; j < 400; ++j)
    var += c(0, j) * std::pow(E[static_cast<std::size_t>(j)] - mean, 2) / tot;
  const double sigma = 1.0 / units::kFwhmPerSigma;
  CHECK(mean == Approx(30.0).margin(1e-9));
  CHECK(std::sqrt(var) == Approx(std::sqrt(sigma * sigma + 0.01 / 12)).epsilon(0.01));

  // Relative resolution: FWHM = r W, so a line at 30 eV with r = 0.02 has FWHM 0.6 eV.
  Eigen::MatrixXd r = m;
  EnergyResolution(0.0, 0.02).apply(r, E, rs);
  for (int i = 0; i < 3; ++i) CHECK(r.row(i).sum() == Approx(before(i)).epsilon(1e-12));
  double var2 = 0;
  for (int j = 0; j < 400; ++j)
    var2 += r(0, j) * std::pow(E[static_cast<std::size_t>(j)] - 30.0, 2) / tot;
  const double s2 = 0.6 / units::kFwhmPerSigma;
  CHECK(std::sqrt(var2) == Approx(std::sqrt(s2 * s2 + 0.01 / 12)).epsilon(0.01));
}

TEST_CASE("saturation clips, background adds its documented level", "[noise]") {
  const auto E = axis(5.0, 0.5, 60);
  RandomStreams rs(2);
  Eigen::MatrixXd m(2, 60);
  for (int j = 0; j < 60; ++j) {
    m(0, j) = 20.0 * j;
    m(1, j) = -3.0 + j;  // readout noise can leave negative values
  }
  Eigen::MatrixXd c = m;
  DetectorClip(500.0).apply(c, E, rs);
  CHECK(c.maxCoeff() == 500.0);
  CHECK(c.minCoeff() == 0.0);
  for (int j = 0; j < 60; ++j) {
    CHECK(c(0, j) == std::min(20.0 * j, 500.0));
    CHECK(c(1, j) == std::max(-3.0 + j, 0.0));
  }

  // B(W) = constant + amplitude * exp(-W / decay), W in eV (synthetic/noise.h).
  Eigen::MatrixXd z = Eigen::MatrixXd::Zero(2, 60);
  Background(2.0, 40.0, 15.0).apply(z, E, rs);
  for (int j = 0; j < 60; ++j)
    CHECK(z(1, j) == Approx(2.0 + 40.0 * std::exp(-E[static_cast<std::size_t>(j)] / 15.0)));

  // Through the generator (no Poisson): counts = scaled noise-free density + B(W).
  ScanConfig cfg = repeated_field_free(1, 300.0);
  cfg.noise.poisson = false;
  cfg.noise.background_counts = 2.0;
  cfg.noise.background_exp_counts = 40.0;
  cfg.noise.background_exp_decay_eV = 15.0;
  const SyntheticScan s = generate_scan(cfg, 1);
  const Eigen::MatrixXd scaled = s.clean * (300.0 / s.clean.maxCoeff());
  for (Eigen::Index j = 0; j < s.trace.counts.cols(); ++j) {
    const double W = units::au_to_eV(s.trace.energy_au[static_cast<std::size_t>(j)]);
    CHECK(s.trace.counts(0, j) - scaled(0, j) ==
          Approx(2.0 + 40.0 * std::exp(-W / 15.0)).epsilon(1e-9));
  }
  // Saturation through the generator: nothing above the clip level, and the clip is reached.
  cfg.noise.saturation_counts = 250.0;
  const SyntheticScan sat = generate_scan(cfg, 1);
  CHECK(sat.trace.counts.maxCoeff() == 250.0);
}

TEST_CASE("stage and laser jitter change rows only when enabled", "[noise]") {
  ScanConfig base = find_preset("neon-150as").config;
  base.noise.poisson = false;
  base.geometry.delay_fs = {-1.0, 0.25, 9};
  const SyntheticScan ref = generate_scan(base, 100);
  // Without any random effect two seeds give the same counts.
  CHECK(generate_scan(base, 101).trace.counts == ref.trace.counts);
  for (const RowPerturbation& r : ref.rows) {
    CHECK(r.delay_offset_fs == 0.0);
    CHECK(r.intensity_factor == 1.0);
    CHECK(r.cep_offset_rad == 0.0);
  }
  auto changes_rows = [&](ScanConfig c) {
    const SyntheticScan s = generate_scan(c, 100);
    CHECK(s.trace.delay_au == ref.trace.delay_au);  // the axis keeps the nominal delays
    const double d = (s.trace.counts - ref.trace.counts).cwiseAbs().maxCoeff();
    return d / ref.trace.counts.maxCoeff();
  };
  ScanConfig c = base;
  c.noise.delay_jitter_rms_fs = 0.05;
  CHECK(changes_rows(c) > 1e-3);
  c = base;
  c.noise.delay_drift_fs_per_row = 0.02;
  CHECK(changes_rows(c) > 1e-3);
  c = base;
  c.noise.ir_intensity_rms = 0.05;
  CHECK(changes_rows(c) > 1e-3);
  c = base;
  c.noise.cep_jitter_rms_rad = 0.3;
  CHECK(changes_rows(c) > 1e-3);

  // Realised statistics and independence of the sub-streams (synthetic/random_streams.h).
  NoiseConfig n;
  n.delay_jitter_rms_fs = 0.03;
  const std::size_t rows = 4000;
  RandomStreams r1(77);
  const auto only_jitter = draw_row_perturbations(n, rows, r1);
  n.cep_jitter_rms_rad = 0.4;
  n.delay_walk_rms_fs = 0.002;
  n.delay_drift_fs_per_row = 0.001;
  RandomStreams r2(77);
  const auto all = draw_row_perturbations(n, rows, r2);
  double ss = 0, sc = 0, walk_ss = 0;
  for (std::size_t i = 0; i < rows; ++i) {
    ss += only_jitter[i].delay_offset_fs * only_jitter[i].delay_offset_fs;
    sc += all[i].cep_offset_rad * all[i].cep_offset_rad;
    if (i > 0) {
      // all - only_jitter = drift * i + walk_i: the walk increments have rms 0.002 fs.
      const double w1 = all[i].delay_offset_fs - only_jitter[i].delay_offset_fs - 0.001 * i;
      const double w0 =
          all[i - 1].delay_offset_fs - only_jitter[i - 1].delay_offset_fs - 0.001 * (i - 1);
      walk_ss += (w1 - w0) * (w1 - w0);
    }
  }
  // rms estimates from 4000 normal draws: relative sd 1/sqrt(2 N) = 1.1 %; 5 % bounds.
  CHECK(std::sqrt(ss / rows) == Approx(0.03).epsilon(0.05));
  CHECK(std::sqrt(sc / rows) == Approx(0.4).epsilon(0.05));
  CHECK(std::sqrt(walk_ss / (rows - 1)) == Approx(0.002).epsilon(0.05));
  CHECK(all[0].delay_offset_fs == only_jitter[0].delay_offset_fs);  // walk_0 = 0, drift_0 = 0
}

TEST_CASE("hot pixels: own sub-stream, limits named", "[noise]") {
  NoiseConfig n;
  n.hot_pixels = 5;
  RandomStreams a(9), b(9);
  const auto p1 = draw_hot_pixels(n, 50, 80, a);
  // Drawing hot pixels leaves the Poisson sub-stream untouched (synthetic/random_streams.h).
  (void)draw_hot_pixels(n, 50, 80, b);
  RandomStreams c(9);
  CHECK(a[Stream::kPoisson]() == c[Stream::kPoisson]());
  REQUIRE(p1.size() == 5);
  // Too many for the image: refused with the field's name (1 per 90 pixels at most).
  n.hot_pixels = 100;
  CHECK_THROWS_WITH(draw_hot_pixels(n, 50, 80, a), Catch::Contains("noise.hot_pixels"));
  n.hot_pixels = 1;
  n.hot_pixel_factor_min = 1.0;
  CHECK_THAT(n.validate(), Catch::Contains("noise.hot_pixel_factor_min"));
  n.hot_pixel_factor_min = 30.0;
  n.hot_pixel_factor_max = 20.0;
  CHECK_THAT(n.validate(), Catch::Contains("noise.hot_pixel_factor_max"));
  // A hot pixel reads factor x the mean of its 8 neighbours (rounded): 40 x 3 = 120
  Eigen::MatrixXd m = Eigen::MatrixXd::Constant(5, 5, 2.0);
  m(1, 1) = 10.0;  // one neighbour of (2,2) higher: mean = (7 x 2 + 10) / 8 = 3
  const HotPixels h({HotPixel{2, 2, 40.0}});
  RandomStreams r(1);
  h.apply(m, {}, r);
  CHECK(m(2, 2) == 120.0);
  CHECK(m(1, 1) == 10.0);
}
