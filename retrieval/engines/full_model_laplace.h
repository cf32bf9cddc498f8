#pragma once
// Linearised replicas of a full-model fit: the Laplace approximation of its uncertainty, sampled
// through one Newton step per noise replica (retrieve's `--uncertainty laplace`, docs/theory.md
// "Uncertainties").
//
// At the estimate x (the full model's parameters, re-encoded from the estimate's XUV and IR the
// way a warm start encodes them, retrieval/engines/full_model_internal.h) each replica b draws
// Gaussian counting noise, M_b = M + xi_b / sqrt(w), with the variance 1/w that the cost's
// weights stand for (the bins' Poisson variances averaged over their neighbours, with the
// weights' floor: a bin's own count would give a bin of 0 counts a variance of 1 count, where
// the Poisson draws of the full bootstrap leave it at 0), and takes the Newton step of the same
// cost on those counts:
//   H z_b = -(g_b(x) - g(x)),   replica b = x + z_b,
// g the gradient of the weighted cost C (full_model_engine.h; weights and parameter scales kept
// from the measured counts, FullModelObjective::set_measured), g_b the same on M_b, and H the
// Gauss-Newton Hessian of C at x: the Hessian of the same cost on the counts mu m(x) that the
// model at x fits exactly, where every residual, and with it every second-derivative term,
// vanishes (positive semi-definite by construction, unlike the full Hessian at an estimate that
// L-BFGS left short of the minimum: on the helium preset the full Hessian showed negative
// curvature after 59 CG steps). To first order the replicas' covariance is H^-1 Cov(g_b) H^-1 =
// (2/N) H^-1 (the sandwich form equals the Laplace covariance when the weights are the inverse
// variances, chi^2 = N C; Laplace's method: D. J. C. MacKay, Information Theory, Inference, and
// Learning Algorithms, Cambridge University Press 2003, ch. 27; the one-step linearisation of a
// bootstrap replica: A. C. Davison and D. V. Hinkley, Bootstrap Methods and their Application,
// Cambridge University Press 1997, ch. 2 and 9, from memory), and the headline metrics of the
// replicas are the metrics' linearised spread, through their own nonlinear maps.
//
// H is never formed: conjugate gradients (M. R. Hestenes and E. Stiefel, J. Res. Natl. Bur.
// Stand. 49, 409 (1952)) with Hessian-vector products from forward differences of the adjoint
// gradient, H v = (g(x + h v) - g(x)) / h, h = sqrt(machine epsilon) (1 + |x|) / |v| (J. Nocedal
// and S. J. Wright, Numerical Optimization, 2nd ed., Springer 2006, ch. 7: Hessian-free Newton,
// from memory): one cost-and-gradient evaluation per product. The global phase of the XUV (the
// cost's exact symmetry, a null direction of H) is projected out of every vector.
//
// CG stopped at its tolerance also leaves alone the few directions without curvature: spectral
// bins where the model's amplitude a vanishes, so that |a|^2 has no first-order term and the cost
// grows as the fourth power, not the square (no Gaussian there; on a 21 x 100 neon test scan the
// weighted Jacobian's singular values fall from 1 to 0.05 and then jump below 2e-5 for 2 of 206
// directions). The test checks the CG step against the dense least-squares step on the rest
// (tests/test_full_model_laplace.cpp).
//
// What it does not carry: the start-to-start spread of the retrieval (a replica starts at the
// estimate and moves by one linear step), the preprocessing's own noise (the background fit,
// the support), and anything beyond first order in the noise. It fails (ok = false, `failure`
// says why) instead of returning a number it cannot stand behind: no variances (no noise model),
// joint lines, a non-finite Hessian product, a direction without positive curvature (the data
// do not constrain it: no Gaussian), CG not converged within max_cg_iterations, or a non-finite
// step. retrieve() then falls back to the full bootstrap.

#include <string>
#include <vector>

#include <Eigen/Core>

#include "retrieval/engines/engine_options.h"
#include "retrieval/engines/problem.h"
#include "retrieval/engines/reconstruction.h"

namespace sw {

/// Options of linearised replicas (defaults documented beside each).
struct LaplaceOptions {
  /// Seed of the replicas' noise draws; replica b draws from (seed, b) alone, so every replica is
  /// the same for any thread count and any order.
  unsigned long long seed = 1;
  /// CG stops when |H z + dg| <= cg_tolerance |dg| (1e-3: the replica's metrics then move by
  /// well under 1 % of their spread; common practice for inexact Newton steps).
  double cg_tolerance = 1e-3;
  /// CG iterations (Hessian-vector products) per replica before it gives up (failure).
  int max_cg_iterations = 200;
  /// Precondition the replicas' CG with the limited-memory quasi-Newton inverse built from the
  /// pairs (p, H p) of one plain CG solve, replica 0's, made once in the constructor
  /// (automatic preconditioning by limited-memory quasi-Newton updating: J. L. Morales and
  /// J. Nocedal, SIAM J. Optim. 10, 1079 (2000)). The pairs span the directions that solve
  /// explored, where the preconditioned operator is the identity, so the other replicas spend
  /// their products on the rest. Every replica still stops at cg_tolerance on its own residual:
  /// the steps agree with plain CG's to that tolerance where H is well conditioned (where it is
  /// not, the preconditioned solve reaches further into the flat directions; docs/theory.md).
  /// When replica 0's plain solve fails (e.g. does not converge: H too ill-conditioned for a
  /// linearisation to be trusted) every replica fails with it. At most kMaxPreconditionerPairs
  /// pairs are kept (the first; memory 2 x pairs x parameters doubles, bounded whatever
  /// max_cg_iterations is). true (default): fewer products; false: plain CG for every replica.
  bool precondition = true;
  /// The most (p, H p) pairs the preconditioner keeps: the default max_cg_iterations, so that a
  /// converged replica 0 gives all of its pairs.
  static constexpr int kMaxPreconditionerPairs = 200;

  /// "" when valid; else names the field, its value and the rule.
  std::string validate() const;
};

/// One linearised replica.
struct LaplaceReplica {
  Reconstruction fields;           ///< xuv and ir of x + z_b (nothing else filled in)
  bool ok = false;                 ///< false: `failure` says why; `fields` empty
  std::string failure;             ///< e.g. "CG did not converge in 200 iterations ..."
  int cg_iterations = 0;           ///< Hessian-vector products used
  double relative_residual = 0.0;  ///< |H z + dg| / |dg| at the end
};

/// The linearisation of one full-model estimate, shared by its replicas (thread-safe: each
/// replica() builds its own objective, so replicas can run on parallel threads).
class LaplaceReplicas {
 public:
  /// `options` as the estimate's full-model run had them (settings; threads is forced to 1);
  /// `estimate` a full-model reconstruction of `problem`. Throws sw::Error(kUsage) for invalid
  /// options; problems it cannot linearise are reported by ok() and failure().
  LaplaceReplicas(const RetrievalProblem& problem, const EngineOptions& options,
                  const Reconstruction& estimate, const LaplaceOptions& laplace);

  /// False when no replica can be made (no variances, joint lines); failure() says why.
  bool ok() const { return failure_.empty(); }
  const std::string& failure() const { return failure_; }
  /// The estimate as re-encoded (the linearisation point): the replicas' metrics are taken
  /// relative to this one's, so that the re-encoding itself does not read as a bias.
  const Reconstruction& centre() const { return centre_; }
  /// Replica b (b >= 0).
  LaplaceReplica replica(int b) const;
  /// The counts replica b is fitted to: the problem's intensity plus Gaussian noise of variance
  /// 1/w (the cost's weights), drawn from (seed, b) alone (b >= 0; requires ok()).
  Eigen::MatrixXd replica_counts(int b) const;

 private:
  RetrievalProblem problem_;
  EngineOptions options_;
  LaplaceOptions laplace_;
  Reconstruction centre_;
  Eigen::MatrixXd noise_sd_;    // standard deviation of each bin's replica noise
  Eigen::VectorXd x_;           // the linearisation point (scaled parameters)
  Eigen::VectorXd phase_;       // the XUV's global-phase direction at x_, normalised
  Eigen::VectorXd g_measured_;  // gradient at x_ on the measured counts
  Eigen::MatrixXd fit_counts_;  // mu m(x_): counts the model at x_ fits exactly
  Eigen::VectorXd g_fit_;       // gradient at x_ on fit_counts_
  std::string failure_;
  // LaplaceOptions::precondition: the quasi-Newton inverse from replica 0's plain CG pairs, and
  // replica 0 itself.
  struct QuasiNewtonInverse {
    std::vector<Eigen::VectorXd> s, y;  // CG directions p and H p
    std::vector<double> rho;            // 1 / (s . y)
    double gamma = 1.0;                 // scale of the identity: s . y / y . y of the last pair
    Eigen::VectorXd apply(const Eigen::VectorXd& v) const;  // two-loop recursion
  };
  QuasiNewtonInverse preconditioner_;
  LaplaceReplica first_;
  // Replica b by CG (preconditioned by `pre` unless null), the pairs into `collect` if not null.
  LaplaceReplica solve(int b, const QuasiNewtonInverse* pre, QuasiNewtonInverse* collect) const;
};

}  // namespace sw
