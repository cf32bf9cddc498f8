#pragma once
// How retrieve() draws its bootstrap replicas (the uncertainty method). Every method makes each
// replica from a Poisson draw of the measured counts (parametric bootstrap: Wang, Zeek, Trebino
// and Kvam, JOSA B 20, 2400 (2003); Efron and Tibshirani, An Introduction to the Bootstrap,
// Chapman & Hall 1993, ch. 6), preprocessed like the scan; they differ in where the replica's
// engine starts (docs/theory.md, "Uncertainties"):
//
//   kFull  the whole engine chain of the estimate from the same kind of start (the CMA engine
//          from its own initial guess and delay order, the full model from that replica's CMA
//          result or from its own guess, as the estimate did). The replicas' spread then holds
//          the counting noise and the start-to-start spread of the retrieval itself.
//   kWarm  only the estimate's final engine, started from the estimate (its XUV field and A(t))
//          and run until it stops moving on the replica's counts: the relative-change rule of
//          EngineOptions alone, the noise-floor rule off (the estimate already sits near the
//          replica's floor, so that rule would stop it where it started). Cheaper (one engine run
//          from a converged start instead of the chain from scratch), but it keeps only the
//          spread of the minimum under the counting noise, not the start-to-start spread.
//   kLaplace  the Laplace approximation of a full-model estimate, sampled: each replica is one
//          Newton step from the estimate on Gaussian counting noise of the preprocessed counts'
//          variances (retrieval/engines/full_model_laplace.h). The cheapest (no engine run per
//          replica: about a hundred cost-and-gradient evaluations, against ~250 for a chain),
//          and like kWarm it keeps only the spread of the minimum under the counting noise,
//          linearised. Applies where the headline comes from one full-model fit; elsewhere
//          (CMA engines, joint lines) and wherever the linearisation fails (no variances,
//          negative curvature, CG not converged) the replicas are kFull's, and result.json says
//          so (bootstrap.method). Before its sigmas are reported, a few replicas of the full
//          chain test them (check_sigma below): what the linearisation cannot see (a second
//          minimum, the chain's bias) shows there, and the full bootstrap then runs.
//
// The replicas' seeds depend only on the replica index (results are the same for any thread
// count, retrieval/analysis/thread_pool.h).

#include <string>
#include <vector>

namespace sw {

enum class UncertaintyMethod { kFull, kWarm, kLaplace };

/// "full" / "warm" / "laplace".
const char* to_string(UncertaintyMethod m);
/// Parses "full", "warm" or "laplace"; false (and *m unchanged) for anything else.
bool parse_uncertainty_method(const std::string& s, UncertaintyMethod* m);
/// The same for the option descriptions (retrieval/core/option_spec.h, found by ADL).
inline bool parse_option(const std::string& s, UncertaintyMethod* m) {
  return parse_uncertainty_method(s, m);
}

/// The check of linearised sigmas against replicas of the full chain (RetrieveOptions::
/// laplace_check_replicas). kLaplace cannot see what lies beyond the estimate's own minimum: a
/// second minimum the chain falls into on other noise draws, a bias of the chain, a curvature
/// that is not quadratic over sigma. K replicas of the full chain (kFull's, on the Poisson draws
/// the full bootstrap would use) are a sample of exactly that: if the sigma about to be reported
/// holds, their deviations from the estimate are ~ N(0, sigma^2) and
///   chi2 = sum_k (x_k - x_hat)^2 / sigma^2
/// follows the chi-square distribution with K degrees of freedom (the deviations include the
/// chain's bias and start-to-start spread, which sigma must cover too; sigma also holds the
/// systematic terms the replicas need not show, the method's floor among them, so where those
/// dominate the test leans towards passing). The check fails when chi2 exceeds its 99 % quantile
/// (the level our choice), so on scans where sigma holds it fails on 1 % of scans per number
/// checked (and the full bootstrap then runs: a false alarm costs time, not a number). The
/// satellite ratio's sigma (the class margin) is not checked: near zero its replicas are not
/// Gaussian about the estimate, and an isolated pulse's ratio (~1e-6) would fail on deviations
/// far below any class threshold.
struct SigmaCheck {
  double chi2 = 0.0;   ///< sum of squared deviations over sigma^2 (infinite: sigma <= 0, NaN)
  double limit = 0.0;  ///< 99 % quantile of chi-square with K degrees of freedom
  bool pass = true;    ///< chi2 <= limit (true for K = 0)
};

/// `estimate` the headline value, `sigma` its sigma as it would be reported, `replicas` the K
/// full-chain values. A replica value that is not finite, or sigma <= 0 with a replica off the
/// estimate, fails.
SigmaCheck check_sigma(double estimate, double sigma, const std::vector<double>& replicas);

/// The 99 % quantile of the chi-square distribution with `dof` >= 1 degrees of freedom by the
/// Wilson-Hilferty cube-root transformation, dof (1 - 2/(9 dof) + z sqrt(2/(9 dof)))^3 with z
/// the normal 99 % quantile (E. B. Wilson and M. M. Hilferty, Proc. Natl. Acad. Sci. 17, 684
/// (1931)): within 0.8 % of the exact value for dof = 1 and 0.3 % above.
double chi_square_quantile_99(int dof);

}  // namespace sw
