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

TEST_CASE("uncertainty method names round-trip; unknown names are refused", "[uncertainty]") {
  for (UncertaintyMethod m : {UncertaintyMethod::kFull, UncertaintyMethod::kWarm}) {
    UncertaintyMethod back =
        m == UncertaintyMethod::kFull ? UncertaintyMethod::kWarm : UncertaintyMethod::kFull;
    REQUIRE(parse_uncertainty_method(to_string(m), &back));
    CHECK(back == m);
  }
  UncertaintyMethod u = UncertaintyMethod::kWarm;
  CHECK_FALSE(parse_uncertainty_method("laplace", &u));
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
  const synthetic::ScanConfig cfg = test::neon_reference_61_delays(100.0);
  std::vector<double> fwhm, sig;
  for (unsigned long long seed = 1; seed <= 8; ++seed) {
    const auto scan = synthetic::generate_scan(cfg, seed);
    RetrieveOptions o = test::ptychographic_options(6);
    o.seed = seed;
    o.uncertainty = UncertaintyMethod::kWarm;
    const RetrieveOutput out = retrieve(scan.trace, o);
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
  const double warm = std::accumulate(sig.begin(), sig.end(), 0.0) / n;
  std::printf(
      "FWHM over 8 scans: mean %.2f as, spread %.2f as; mean warm sigma_statistical %.2f as\n",
      mean, spread, warm);
  CHECK(warm > 0.5 * spread);
  CHECK(warm < 2.0 * spread);
}
