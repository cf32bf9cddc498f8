// retrieval/analysis/uncertainty.h: the warm-started bootstrap against the spread the estimator
// really has over independent noise draws of the same scan (the frequentist meaning of sigma), and
// the method names.
#include <catch2/catch.hpp>

#include <cmath>
#include <cstdio>
#include <numeric>
#include <optional>
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
  synthetic::ScanConfig cfg = synthetic::find_preset("neon-chirped-neg").config;
  cfg.noise.peak_counts = 40.0;
  cfg.noise.background_counts = 0.0;
  RetrieveOptions o;
  o.bootstrap = 6;
  o.threads = 2;
  o.uncertainty = UncertaintyMethod::kLaplace;
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
