// Energy support of the signal (retrieval/preprocess/support.h) on delay-integrated spectra with
// known shape, and its use by preprocess().
#include <catch2/catch.hpp>

#include <cmath>
#include <random>

#include "retrieval/core/error.h"
#include "retrieval/core/units.h"
#include "retrieval/preprocess/preprocess.h"
#include "retrieval/preprocess/support.h"
#include "tests/check_support.h"

using namespace sw;

namespace {

// 121 delays x n energies from first_eV in steps of step_eV; counts = background + a Gaussian
// line (peak counts per element, centre and rms width in eV) in every delay row, Poisson-drawn
// when rng is given.
struct Scan {
  Eigen::MatrixXd counts;
  std::vector<double> W;
};
Scan scan(double peak, double centre_eV, double sigma_eV, double background, std::mt19937_64* rng,
          int n = 360, double first_eV = 25.0, double step_eV = 0.25) {
  Scan s;
  s.counts.resize(121, n);
  for (int j = 0; j < n; ++j) s.W.push_back(units::eV_to_au(first_eV + step_eV * j));
  for (int i = 0; i < 121; ++i)
    for (int j = 0; j < n; ++j) {
      const double e = first_eV + step_eV * j;
      const double m = background + peak * std::exp(-0.5 * std::pow((e - centre_eV) / sigma_eV, 2));
      s.counts(i, j) = rng ? static_cast<double>(std::poisson_distribution<long long>(m)(*rng)) : m;
    }
  return s;
}

}  // namespace

TEST_CASE("support options: defaults validate, bad values are named", "[support]") {
  test::check_validation<SupportOptions>(
      {{[](auto& o) { o.min_sigma = 0; }, "min_sigma"},
       {[](auto& o) { o.smoothing_bins = 0; }, "smoothing_bins"}});
  SupportOptions o;
  o.smoothing_bins = 0;
  CHECK_THROWS_AS(find_energy_support(Eigen::MatrixXd::Ones(2, 3), Eigen::MatrixXd::Ones(2, 3),
                                      {0.1, 0.2, 0.3}, o),
                  Error);
}

TEST_CASE("a Gaussian line on a flat background: the support holds the line, not the window",
          "[support]") {
  // 25 peak counts, 1 background count per element (issue 10's wide-window case), line at
  // 73 eV with sigma 5 eV in a 90 eV window. Summed over 121 delays and 5 bins, the 5-sigma
  // significance is reached where the line is ~ 5 sqrt(5 x 121) / (5 x 121) x 1 / 25 = 0.8 %
  // of its peak, 3.1 sigma_E from the centre (Gaussian closed form); the margin adds 1 eV + 10 %.
  std::mt19937_64 rng(7);
  const Scan s = scan(25.0, 73.0, 5.0, 1.0, &rng);
  const Eigen::MatrixXd sig = s.counts.array() - 1.0;
  const EnergySupport b = find_energy_support(sig, s.counts, s.W, SupportOptions());
  REQUIRE(b.found);
  CHECK_FALSE(b.fills_axis);
  const double lo = units::au_to_eV(b.lo_au), hi = units::au_to_eV(b.hi_au);
  CHECK(lo < 73.0 - 2.5 * 5.0);  // the line's +-2.5 sigma (98.8 % of it) is inside
  CHECK(hi > 73.0 + 2.5 * 5.0);
  CHECK(lo > 73.0 - 6.0 * 5.0);  // and the window's far ends are not
  CHECK(hi < 73.0 + 6.0 * 5.0);
  CHECK(b.core_share < 0.5);
}

TEST_CASE("pure noise has no support; a constant level without subtraction fills the axis",
          "[support]") {
  // Background-subtracted Poisson noise: a 5-sigma excursion of a box sum has probability
  // 2.9e-7 per bin (normal tail, common practice), so none is found.
  std::mt19937_64 rng(3);
  const Scan s = scan(0.0, 73.0, 5.0, 2.0, &rng);
  const EnergySupport none =
      find_energy_support(s.counts.array() - 2.0, s.counts, s.W, SupportOptions());
  CHECK_FALSE(none.found);
  // Nothing subtracted: every bin is "signal" and the band is the whole axis.
  const EnergySupport all = find_energy_support(s.counts, s.counts, s.W, SupportOptions());
  REQUIRE(all.found);
  CHECK(all.fills_axis);
}

TEST_CASE("harmonic comb: gaps up to max_gap_eV are bridged", "[support]") {
  // Three lines 3.1 eV apart (odd harmonics of 800 nm, 2 hbar omega = 3.10 eV, CODATA), each
  // 0.3 eV rms: the gaps between them (~2 eV below threshold) are bridged with the default gap
  // of 2 hbar omega, but not with a 0.5 eV gap (then only the strongest line is kept).
  Eigen::MatrixXd c = Eigen::MatrixXd::Zero(40, 200);
  std::vector<double> W;
  for (int j = 0; j < 200; ++j) W.push_back(units::eV_to_au(20.0 + 0.1 * j));
  const double centres[3] = {26.9, 30.0, 33.1}, peaks[3] = {30.0, 50.0, 30.0};
  for (int i = 0; i < 40; ++i)
    for (int j = 0; j < 200; ++j)
      for (int k = 0; k < 3; ++k)
        c(i, j) += peaks[k] * std::exp(-0.5 * std::pow((20.0 + 0.1 * j - centres[k]) / 0.3, 2));
  SupportOptions o;
  o.max_gap_eV = 3.1;
  const EnergySupport wide = find_energy_support(c, c, W, o);
  CHECK(units::au_to_eV(wide.lo_au) < 26.0);
  CHECK(units::au_to_eV(wide.hi_au) > 34.0);
  o.max_gap_eV = 0.5;
  const EnergySupport narrow = find_energy_support(c, c, W, o);
  CHECK(units::au_to_eV(narrow.lo_au) > 27.5);
  CHECK(units::au_to_eV(narrow.hi_au) < 32.5);
}

TEST_CASE("preprocess records the support and hands it to the engines", "[support]") {
  Trace t;
  std::mt19937_64 rng(5);
  const Scan s = scan(25.0, 73.0, 5.0, 1.0, &rng);
  t.counts = s.counts;
  t.energy_au = s.W;
  for (int i = 0; i < 121; ++i) t.delay_au.push_back(units::fs_to_au(-6.0 + 0.1 * i));
  t.meta.gas = "Ne";
  t.meta.ir_wavelength_nm = 800.0;
  t.meta.background = 1.0;  // known: this test is about the support, not the background model
  PreprocessSummary sum;
  const RetrievalProblem p = preprocess(t, PreprocessOptions(), &sum);
  CHECK(sum.support_hi_eV > sum.support_lo_eV);
  CHECK(p.support_lo_au == Approx(units::eV_to_au(sum.support_lo_eV)));
  CHECK(p.support_hi_au == Approx(units::eV_to_au(sum.support_hi_eV)));
  CHECK(sum.support_lo_eV > 25.0);
  CHECK(sum.support_hi_eV < 115.0);
}
