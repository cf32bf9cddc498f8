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
//          so (bootstrap.method).
//
// The replicas' seeds depend only on the replica index (results are the same for any thread
// count, retrieval/analysis/thread_pool.h).

#include <string>

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

}  // namespace sw
