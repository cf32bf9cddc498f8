// retrieval/analysis/uncertainty.h: the warm-started bootstrap against the spread the estimator
// really has over independent noise draws of the same scan (the frequentist meaning of sigma), and
// the method names.
#include <catch2/catch.hpp>

#include <cmath>
#include <cstdio>
#include <limits>
#include <numeric>
#include <optional>
#include <random>
#include <vector>

#include "retrieval/analysis/retrieve.h"
#include "retrieval/analysis/uncertainty.h"
#include "synthetic/generator.h"
#include "synthetic/presets.h"
#include "tests/retrieve_test_support.h"

using namespace sw;

namespace {

// Retrieves the scan `cfg` measured 8 times (generator seeds 1-8, the analysis seed the same),
// runs `each` on every output, and checks that the mean FWHM sigma_statistical describes the
// sample standard deviation of the 8 FWHM estimates within a factor of 2.
template <class Each>
void check_sigma_over_scans(const char* method, const synthetic::ScanConfig& cfg, RetrieveOptions o,
                            Each each) {
  std::vector<double> fwhm, sig;
  for (unsigned long long seed = 1; seed <= 8; ++seed) {
    const auto scan = synthetic::generate_scan(cfg, seed);
    o.seed = seed;
    const RetrieveOutput out = retrieve(scan.trace, o);
    each(out);
    fwhm.push_back(*out.result.xuv->fwhm_as);
    const std::optional<double> s =
        param_number(out.result.extra, "bootstrap.fwhm_as_sigma_statistical");
    REQUIRE(s);
    sig.push_back(*s);
  }
  const double n = static_cast<double>(fwhm.size());
  const double mean = std::accumulate(fwhm.begin(), fwhm.end(), 0.0) / n;
  double ss = 0;
  for (double f : fwhm) ss += (f - mean) * (f - mean);
  const double spread = std::sqrt(ss / (n - 1));
  const double sigma = std::accumulate(sig.begin(), sig.end(), 0.0) / n;
  std::printf(
      "FWHM over 8 scans: mean %.2f as, spread %.2f as; mean %s sigma_statistical %.2f as\n", mean,
      spread, method, sigma);
  CHECK(sigma > 0.5 * spread);
  CHECK(sigma < 2.0 * spread);
}

}  // namespace

TEST_CASE("uncertainty method names round-trip; unknown names are refused", "[uncertainty]") {
  for (UncertaintyMethod m :
       {UncertaintyMethod::kFull, UncertaintyMethod::kWarm, UncertaintyMethod::kLaplace}) {
    UncertaintyMethod back =
        m == UncertaintyMethod::kFull ? UncertaintyMethod::kWarm : UncertaintyMethod::kFull;
    REQUIRE(parse_uncertainty_method(to_string(m), &back));
    CHECK(back == m);
  }
  UncertaintyMethod u = UncertaintyMethod::kWarm;
  CHECK_FALSE(parse_uncertainty_method("hessian", &u));
  CHECK(u == UncertaintyMethod::kWarm);
  CHECK(RetrieveOptions().uncertainty == UncertaintyMethod::kFull);  // the validated default
}

TEST_CASE("warm-started replicas: statistical sigma matches the spread over independent scans",
          "[uncertainty]") {
  // The same pulse and field measured 8 times (independent Poisson noise, generator seeds 1-8):
  // the standard deviation of the 8 FWHM estimates is what sigma_statistical must describe
  // (definition of a standard error; Efron and Tibshirani, An Introduction to the Bootstrap,
  // 1993, ch. 6). With 8 scans that sample deviation is itself uncertain by ~25 % (chi-square
  // with 7 degrees of freedom: 90 % interval 0.63-1.43 x), so we ask for agreement within a
  // factor of 2 of the mean warm sigma.
  RetrieveOptions o = test::ptychographic_options(6);
  o.uncertainty = UncertaintyMethod::kWarm;
  check_sigma_over_scans("warm", test::neon_reference_61_delays(100.0), o,
                         [](const RetrieveOutput&) {});
}

TEST_CASE("laplace replicas: statistical sigma matches the spread over independent scans",
          "[uncertainty][slow]") {
  // The few-counts scan of test_retrieve.cpp (neon-chirped-neg at 40 peak counts, which auto
  // hands to the full model) measured 8 times with independent Poisson noise (generator seeds
  // 1-8, the generator's direct quadrature being independent of the engines' model): the spread
  // of the 8 FWHM estimates is what the linearised replicas' sigma_statistical must describe
  // (definition of a standard error; Efron and Tibshirani 1993, ch. 6). Within a factor of 2, as
  // for warm replicas above (8 scans: chi-square with 7 degrees of freedom, 90 % interval of the
  // sample deviation 0.63-1.43 x).
  const synthetic::ScanConfig cfg = test::neon_few_counts();
  RetrieveOptions o;
  o.bootstrap = 6;
  o.threads = 2;
  o.uncertainty = UncertaintyMethod::kLaplace;
  o.laplace_check_replicas = 0;  // the linearised sigma itself (the check is tested below)
  check_sigma_over_scans("laplace", cfg, o, [](const RetrieveOutput& out) {
    REQUIRE(out.result.engine == "full-model");
    REQUIRE(param_string(out.result.extra, "bootstrap.method") == "laplace");
    CHECK(param_number(out.result.extra, "bootstrap.laplace_cg_iterations_max").value_or(0) > 0);
  });
}

TEST_CASE("laplace replicas fall back to the full bootstrap on a CMA headline and say so",
          "[uncertainty]") {
  const auto scan = synthetic::generate_scan(test::neon_reference_61_delays(300.0), 3);
  RetrieveOptions o = test::ptychographic_options(2);
  o.uncertainty = UncertaintyMethod::kLaplace;
  const RetrieveOutput out = retrieve(scan.trace, o);
  CHECK(param_string(out.result.extra, "bootstrap.method") ==
        "full (laplace not applicable: the headline is not a full-model fit)");
  // The same numbers as the full bootstrap (the same replicas).
  o.uncertainty = UncertaintyMethod::kFull;
  const RetrieveOutput full = retrieve(scan.trace, o);
  CHECK(*out.result.xuv->fwhm_as_sigma == *full.result.xuv->fwhm_as_sigma);
  CHECK(param_string(full.result.extra, "bootstrap.method") == "full");
}

TEST_CASE("chi-square 99 % quantiles of the laplace check against scipy", "[uncertainty]") {
  // scipy.stats.chi2.ppf(0.99, k), k = 1, 2, 4, 8 (scipy 1.10); the Wilson-Hilferty form is
  // within 0.8 % for k = 1 and 0.3 % above (Wilson and Hilferty, PNAS 17, 684 (1931)).
  const std::vector<std::pair<int, double>> scipy{{1, 6.6348966010212145},
                                                  {2, 9.21034037197618},
                                                  {4, 13.276704135987622},
                                                  {8, 20.090235029663233}};
  for (const auto& [k, q] : scipy) {
    INFO("dof " << k);
    CHECK(chi_square_quantile_99(k) == Approx(q).epsilon(k == 1 ? 0.008 : 0.003));
  }
}

TEST_CASE("the laplace check: chi-square of the full-chain replicas' deviations", "[uncertainty]") {
  CHECK(check_sigma(10.0, 1.0, {}).pass);  // no replicas: nothing to test
  const SigmaCheck near = check_sigma(10.0, 1.0, {10.5, 9.0});
  CHECK(near.chi2 == Approx(0.25 + 1.0));
  CHECK(near.pass);
  const SigmaCheck far = check_sigma(10.0, 1.0, {14.0, 6.0});
  CHECK(far.chi2 == Approx(32.0));
  CHECK_FALSE(far.pass);
  CHECK_FALSE(check_sigma(10.0, 1.0, {10.0, std::numeric_limits<double>::quiet_NaN()}).pass);
  CHECK_FALSE(check_sigma(10.0, 0.0, {10.0, 10.1}).pass);  // no sigma, a replica off the value
  CHECK(check_sigma(10.0, 0.0, {10.0, 10.0}).pass);
  CHECK_FALSE(check_sigma(10.0, std::numeric_limits<double>::quiet_NaN(), {10.1}).pass);
  // Where sigma holds (deviations ~ N(0, sigma^2), drawn by std::normal_distribution, not by the
  // code under test) the check fails on 1 % of scans (its level, by the definition of the
  // quantile; binomial standard error of the rate over 200000 draws 0.022 %, the quantile's
  // Wilson-Hilferty error for 2 dof moves the rate by 0.001 %).
  std::mt19937_64 rng(5);
  std::normal_distribution<double> gauss(0.0, 2.5);
  for (int k : {2, 4}) {
    int fails = 0;
    const int n = 200000;
    std::vector<double> reps(static_cast<std::size_t>(k));
    for (int t = 0; t < n; ++t) {
      for (double& r : reps) r = 70.0 + gauss(rng);
      fails += check_sigma(70.0, 2.5, reps).pass ? 0 : 1;
    }
    INFO("K = " << k);
    CHECK(fails / static_cast<double>(n) == Approx(0.01).margin(0.001));
  }
}

TEST_CASE("laplace replicas pass their check on a scan the linearisation describes",
          "[uncertainty][slow]") {
  // The few-counts scan of the test above, once: two replicas of the full chain check the
  // linearised sigmas (uncertainty.h); they pass (chi-square 99 % limit 9.21 for 2 dof, scipy)
  // and the reported sigma is the linearised one, the same as with the check off.
  const synthetic::ScanConfig cfg = test::neon_few_counts();
  const auto scan = synthetic::generate_scan(cfg, 2);
  RetrieveOptions o;
  o.bootstrap = 4;
  o.threads = 2;
  o.uncertainty = UncertaintyMethod::kLaplace;
  CHECK(o.laplace_check_replicas == 2);  // the default
  const RetrieveOutput checked = retrieve(scan.trace, o);
  REQUIRE(param_string(checked.result.extra, "bootstrap.method") == "laplace");
  const auto chi2 = param_number(checked.result.extra, "bootstrap.laplace_check_fwhm_as_chi2");
  const auto limit = param_number(checked.result.extra, "bootstrap.laplace_check_fwhm_as_limit");
  REQUIRE(chi2);
  REQUIRE(limit);
  CHECK(*limit == Approx(9.21034037197618).epsilon(0.003));
  CHECK(*chi2 <= *limit);
  CHECK(
      param_number(checked.result.extra, "bootstrap.laplace_check_peak_vector_potential_au_chi2"));
  // The linearised and the checking replicas share one task list (retrieve.cpp): on 3 threads a
  // linearised replica waits for replica 0's preconditioner while a check replica runs; every
  // number is the same as on 2 threads and on 1.
  for (int threads : {1, 3}) {
    INFO("threads " << threads);
    RetrieveOptions ot = o;
    ot.threads = threads;
    const RetrieveOutput again = retrieve(scan.trace, ot);
    CHECK(*again.result.xuv->fwhm_as_sigma == *checked.result.xuv->fwhm_as_sigma);
    CHECK(*again.result.ir->peak_vector_potential_au_sigma ==
          *checked.result.ir->peak_vector_potential_au_sigma);
    CHECK(param_number(again.result.extra, "bootstrap.laplace_check_fwhm_as_chi2") == chi2);
  }
  o.laplace_check_replicas = 0;
  const RetrieveOutput plain = retrieve(scan.trace, o);
  CHECK_FALSE(param_number(plain.result.extra, "bootstrap.laplace_check_fwhm_as_chi2"));
  CHECK(*plain.result.xuv->fwhm_as_sigma == *checked.result.xuv->fwhm_as_sigma);
}
