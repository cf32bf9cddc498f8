// Step 4a of preprocess (retrieval/preprocess/preprocess.h): oversampled energy axes are summed
// k bins at a time before the engines. Checked against the counts themselves, against the
// window rule evaluated here with CODATA constants, against the Wiener-Khinchin picture of the
// lag extent (bursts T/2 apart correlate at lags T/2 and T), and end to end against the analysis
// of every measured bin.
#include <catch2/catch.hpp>

#include <cmath>

#include "retrieval/analysis/retrieve.h"
#include "retrieval/core/units.h"
#include "retrieval/preprocess/preprocess.h"
#include "synthetic/generator.h"
#include "synthetic/presets.h"

using namespace sw;

namespace {

// The preset's scan histogrammed on `f` times finer energy bins (same flux per eV).
synthetic::ScanConfig finer(const std::string& preset, int f) {
  synthetic::ScanConfig c = synthetic::find_preset(preset).config;
  c.geometry.energy_eV.step /= f;
  c.geometry.energy_eV.count *= f;
  c.noise.peak_counts /= f;
  return c;
}

PreprocessOptions whole_axis(int combine) {
  PreprocessOptions o;
  o.lines.assume_expected_lines = false;  // no window: the bins stay the scan's
  o.energy_combine = combine;
  return o;
}

}  // namespace

TEST_CASE("energy combination options are validated", "[preprocess][combine]") {
  PreprocessOptions o;
  o.energy_combine = -1;
  CHECK_THAT(o.validate(), Catch::Contains("energy_combine = -1"));
  o = PreprocessOptions{};
  o.combine_min_window_lags = 1.0;
  CHECK_THAT(o.validate(), Catch::Contains("combine_min_window_lags"));
  // A forced factor that leaves too few bins is a usage error naming the field.
  const synthetic::SyntheticScan sc =
      synthetic::generate_scan(synthetic::find_preset("neon-150as").config, 2);
  CHECK_THROWS_WITH(preprocess(sc.trace, whole_axis(40), nullptr),
                    Catch::Contains("energy_combine = 40"));
}

TEST_CASE("summed bins conserve the background-subtracted counts", "[preprocess][combine]") {
  // DESIGN.md "Jacobians": resampling must conserve counts. The engines' |a|^2 times
  // (bin width x p) is the background-subtracted count of a bin, so each summed bin must hold
  // the sum of its k measured bins (the same scan, k = 1 and k = 4).
  synthetic::ScanConfig c = finer("neon-150as", 4);
  c.noise.background_counts = 0.5;  // stated in the sidecar: the same constant both times
  const synthetic::SyntheticScan sc = synthetic::generate_scan(c, 3);
  PreprocessSummary s1, s4;
  const RetrievalProblem p1 = preprocess(sc.trace, whole_axis(1), &s1);
  const RetrievalProblem p4 = preprocess(sc.trace, whole_axis(4), &s4);
  REQUIRE(s1.energy_bins_combined == 1);
  REQUIRE(s4.energy_bins_combined == 4);
  REQUIRE(p4.energy_au.size() == p1.energy_au.size() / 4);
  CHECK(s4.energy_bins_left_out == p1.energy_au.size() % 4);
  const double dW1 = p1.energy_au[1] - p1.energy_au[0], dW4 = p4.energy_au[1] - p4.energy_au[0];
  CHECK(dW4 == Approx(4 * dW1).epsilon(1e-12));
  CHECK(s4.energy_step_eV == Approx(4 * s4.measured_energy_step_eV).epsilon(1e-12));
  auto counts = [](const RetrievalProblem& p, Eigen::Index i, std::size_t j, double dW) {
    return p.intensity(i, static_cast<Eigen::Index>(j)) * dW * units::momentum_au(p.energy_au[j]);
  };
  double worst = 0;
  for (Eigen::Index i = 0; i < p4.intensity.rows(); i += 7)
    for (std::size_t g = 0; g < p4.energy_au.size(); ++g) {
      double sum = 0;
      for (std::size_t j = 4 * g; j < 4 * g + 4; ++j) sum += counts(p1, i, j, dW1);
      worst = std::max(worst, std::abs(counts(p4, i, g, dW4) - sum));
      // the summed bin sits at the mean of its bins' centres
      CHECK(p4.energy_au[g] == Approx(0.5 * (p1.energy_au[4 * g] + p1.energy_au[4 * g + 3])));
    }
  CHECK(worst < 1e-9);
}

TEST_CASE("the automatic factor follows the window rule", "[preprocess][combine]") {
  // neon-150as on 4x finer bins: 0.0625 eV, 121 delays over -6..6 fs, 800 nm. The rule, with
  // CODATA 2018 constants (h = 4.135667696e-15 eV s, c = 299792458 m/s): the window h / (k dW)
  // must reach 6 IR periods (6 x 800 nm / c = 16.01 fs) and 1.5 x the delay span (18 fs), so
  // k = floor(h / (dW x 18 fs)) = floor(3.68) = 3. The lag extent of a 150 as pulse (< 1 fs)
  // does not bind.
  const synthetic::SyntheticScan sc = synthetic::generate_scan(finer("neon-150as", 4), 4);
  PreprocessSummary s;
  (void)preprocess(sc.trace, whole_axis(0), &s);
  const double h_eVfs = 4.135667696;
  const double period_fs = 800e-9 / 299792458.0 * 1e15;
  const double span_au = sc.trace.delay_au.back() - sc.trace.delay_au.front();
  const double window_fs = std::max(6 * period_fs, 1.5 * units::au_to_fs(span_au));
  const auto expect = static_cast<std::size_t>(std::floor(h_eVfs / (0.0625 * window_fs)));
  CHECK(expect == 3);
  CHECK(s.energy_bins_combined == expect);
  CHECK(s.signal_lag_extent_fs > 0.1);
  CHECK(s.signal_lag_extent_fs < 1.0);
  // A Poisson-bootstrap replica carries the counting noise twice (the scan's and its own draw),
  // which the Poisson noise power of the rule does not expect: structure at every lag, k = 1.
  // That is why retrieve() gives every replica (and the joint-lines problem) the scan's k.
  PreprocessSummary sr;
  (void)preprocess(poisson_resample(sc.trace, 11), whole_axis(0), &sr);
  CHECK(sr.energy_bins_combined == 1);
  // The scan's own 0.25 eV bins already give a window below 18 fs: nothing is summed.
  PreprocessSummary s0;
  (void)preprocess(synthetic::generate_scan(synthetic::find_preset("neon-150as").config, 4).trace,
                   whole_axis(0), &s0);
  CHECK(s0.energy_bins_combined == 1);
}

TEST_CASE("satellites and pulse trains keep the bins they need", "[preprocess][combine]") {
  // Wiener-Khinchin: the Fourier transform of a row's spectrum over energy is the
  // autocorrelation of the wave packet. Satellites T/2 before and after the main burst
  // (neon-satellites) correlate at lags T/2 and T (T = 2.67 fs at 800 nm): the lag extent
  // reaches T.
  PreprocessSummary s;
  (void)preprocess(synthetic::generate_scan(finer("neon-satellites", 4), 6).trace, whole_axis(0),
                   &s);
  const double period_fs = 800e-9 / 299792458.0 * 1e15;
  CHECK(s.signal_lag_extent_fs > period_fs);
  // ... and 12 x that lag (the sum's attenuation <= 1.1 % there) needs a window of > 32 fs,
  // which the 0.0625 eV bins give only unsummed: h / (2 x 0.0625 eV) = 33.1 fs is the largest
  // window of a sum, and it falls short of 12 x 3.04 fs.
  CHECK(s.energy_bins_combined == 1);
  // A train of bursts every T/2 under a 8 fs train envelope (argon-rabbitt, 0.05 eV bins that
  // resolve the harmonics): its autocorrelation extends over the train, far beyond the
  // 6-period window, so its bins are kept.
  PreprocessSummary r;
  (void)preprocess(
      synthetic::generate_scan(synthetic::find_preset("argon-rabbitt").config, 6).trace,
      whole_axis(0), &r);
  CHECK(r.signal_lag_extent_fs > 8.0);
  CHECK(r.energy_bins_combined == 1);
}

TEST_CASE("summing oversampled bins leaves the retrieved pulse unchanged",
          "[retrieve][combine][slow]") {
  // The same fine-binned scan analysed on every measured bin and on the automatic sums (k = 3):
  // the FWHMs agree within their sigmas and both cover the generator's truth (the truth comes
  // from the generator's direct quadrature, not from the engines).
  const synthetic::SyntheticScan sc = synthetic::generate_scan(finer("neon-150as", 4), 8);
  RetrieveOptions o;
  o.bootstrap = 8;
  o.threads = 1;
  o.preprocess.energy_combine = 1;
  const RetrieveOutput every = retrieve(sc.trace, o);
  o.preprocess.energy_combine = 0;
  const RetrieveOutput summed = retrieve(sc.trace, o);
  REQUIRE(summed.preprocess.energy_bins_combined == 3);
  REQUIRE(every.problem.grid.size() == 4096);
  CHECK(summed.problem.grid.size() == 1024);
  const double truth = *sc.truth.xuv->fwhm_as;
  const double f1 = *every.result.xuv->fwhm_as, s1 = *every.result.xuv->fwhm_as_sigma;
  const double f3 = *summed.result.xuv->fwhm_as, s3 = *summed.result.xuv->fwhm_as_sigma;
  INFO("every bin " << f1 << " +- " << s1 << " as; summed " << f3 << " +- " << s3 << " as; truth "
                    << truth << " as");
  CHECK(std::abs(f1 - f3) <= std::hypot(s1, s3));
  CHECK(std::abs(f3 - truth) <= 3 * s3);
  CHECK(std::abs(f1 - truth) <= 3 * s1);
  // No information lost that the sigma would show: two spreads of 8 replicas (7 degrees of
  // freedom each) from the same distribution differ by more than sqrt(F) = 2.235 with
  // probability 2.5 % (F distribution, 97.5 % quantile of F(7, 7) = 4.995: the regularised
  // incomplete beta function I_x(3.5, 3.5), evaluated numerically; standard).
  CHECK(s3 <= 2.235 * s1);
}
