#include "retrieval/engines/full_model_laplace.h"

#include <cmath>
#include <limits>
#include <random>
#include <utility>

#include <Eigen/Core>

#include "retrieval/core/error.h"
#include "retrieval/core/format.h"
#include "retrieval/core/statistics.h"
#include "retrieval/engines/full_model_internal.h"

namespace sw {

namespace {

using full_model_detail::make_full_model_start;

using Vec = Eigen::VectorXd;

// The generator of the XUV's global phase in the scaled parameters (each support bin holds
// Re, Im: a rotation by phi moves them along (-Im, Re)), normalised; zero on the IR.
Vec phase_direction(const Vec& x, std::size_t num_xuv) {
  Vec u = Vec::Zero(x.size());
  for (Eigen::Index k = 0; k + 1 < static_cast<Eigen::Index>(num_xuv); k += 2) {
    u[k] = -x[k + 1];
    u[k + 1] = x[k];
  }
  const double n = u.norm();
  return n > 0 ? Vec(u / n) : u;
}

Reconstruction fields_at(const FullModelObjective& f, const RetrievalProblem& P, const double* x) {
  Reconstruction r;
  r.engine = "full-model";
  r.model = "full";
  r.xuv = XuvField(P.grid, f.carrier_au(), f.envelope(x));
  r.ir = f.ir_field(x);
  return r;
}

}  // namespace

std::string LaplaceOptions::validate() const {
  if (!(cg_tolerance > 0 && cg_tolerance < 1))
    return "cg_tolerance = " + format_g(cg_tolerance) + ": expected 0 < value < 1";
  if (max_cg_iterations < 1 || max_cg_iterations > 100000)
    return "max_cg_iterations = " + std::to_string(max_cg_iterations) + ": expected 1 .. 100000";
  return "";
}

LaplaceReplicas::LaplaceReplicas(const RetrievalProblem& problem, const EngineOptions& options,
                                 const Reconstruction& estimate, const LaplaceOptions& laplace)
    : problem_(problem), options_(options), laplace_(laplace) {
  if (const std::string e = laplace.validate(); !e.empty())
    throw usage_error("laplace replicas: " + e);
  options_.threads = 1;
  options_.initial_xuv = estimate.xuv;
  options_.initial_ir = estimate.ir;
  if (problem.variance.size() != problem.intensity.size() || problem.intensity.size() == 0) {
    failure_ = "no variances (no counting-noise model to draw replicas from)";
    return;
  }
  if (!problem.extra_lines.empty()) {
    failure_ = "joint lines (their delays and strengths are not linearised)";
    return;
  }
  const FullModelSettings settings = validated_settings(options_.settings.full_model, "full-model");
  const auto st = make_full_model_start(problem_, options_, settings, MomentumModel::kFull);
  FullModelObjective& f = *st.objective;
  x_ = Eigen::Map<const Vec>(st.x.data(), static_cast<Eigen::Index>(st.x.size()));
  centre_ = fields_at(f, problem_, x_.data());
  phase_ = phase_direction(x_, f.num_xuv_parameters());
  // The replicas' noise: the variance the weights stand for (1/w; 0 where a bin has no weight).
  const Eigen::MatrixXd& w = f.weights();
  noise_sd_ = (w.array() > 0).select(w.cwiseMax(1e-300).cwiseInverse().cwiseSqrt(), 0.0);
  // What every replica shares: the gradient on the measured counts, and the counts mu m(x) that
  // the model at x fits exactly with the gradient there (the Gauss-Newton Hessian's base point).
  g_measured_.resize(x_.size());
  f.evaluate(x_.data(), g_measured_.data());
  double mu = 0.0;
  fit_counts_ = f.model(x_.data(), &mu);
  fit_counts_ *= mu;
  f.set_measured(fit_counts_);
  g_fit_.resize(x_.size());
  f.evaluate(x_.data(), g_fit_.data());
  if (laplace_.precondition) first_ = solve(0, nullptr, &preconditioner_);
}

Eigen::VectorXd LaplaceReplicas::QuasiNewtonInverse::apply(const Vec& v) const {
  // Nocedal and Wright, Numerical Optimization (2006), algorithm 7.4.
  const std::size_t m = s.size();
  std::vector<double> a(m);
  Vec q = v;
  for (std::size_t i = m; i-- > 0;) {
    a[i] = rho[i] * s[i].dot(q);
    q -= a[i] * y[i];
  }
  Vec r = gamma * q;
  for (std::size_t i = 0; i < m; ++i) r += (a[i] - rho[i] * y[i].dot(r)) * s[i];
  return r;
}

Eigen::MatrixXd LaplaceReplicas::replica_counts(int b) const {
  if (!ok() || b < 0)
    throw usage_error("laplace replicas: replica_counts(" + std::to_string(b) + ")" +
                      (ok() ? ": expected b >= 0" : ": " + failure_));
  std::mt19937_64 rng(replica_seed(laplace_.seed, b));
  std::normal_distribution<double> gauss(0.0, 1.0);
  Eigen::MatrixXd counts = problem_.intensity;
  for (Eigen::Index c = 0; c < counts.cols(); ++c)
    for (Eigen::Index r = 0; r < counts.rows(); ++r) counts(r, c) += noise_sd_(r, c) * gauss(rng);
  return counts;
}

LaplaceReplica LaplaceReplicas::replica(int b) const {
  if (!ok()) {
    LaplaceReplica out;
    out.failure = failure_;
    return out;
  }
  if (!laplace_.precondition) return solve(b, nullptr, nullptr);
  if (b == 0) return first_;
  if (!first_.ok) {  // no preconditioner, and retrieve() falls back on replica 0's failure anyway
    LaplaceReplica out;
    out.failure = "replica 0: " + first_.failure;
    return out;
  }
  return solve(b, &preconditioner_, nullptr);
}

LaplaceReplica LaplaceReplicas::solve(int b, const QuasiNewtonInverse* pre,
                                      QuasiNewtonInverse* collect) const {
  LaplaceReplica out;
  const FullModelSettings settings = validated_settings(options_.settings.full_model, "full-model");
  auto st = make_full_model_start(problem_, options_, settings, MomentumModel::kFull);
  // Each replica its own objective (an objective is not thread-safe), built like the one in the
  // constructor, so at the same x.
  FullModelObjective& f = *st.objective;
  const Vec& x = x_;
  const Eigen::Index n = x.size();
  auto project_out = [this](Vec& v) { v -= phase_.dot(v) * phase_; };

  // Right-hand side: the gradient's change from the measured counts to the replica's.
  Vec g_replica(n);
  f.set_measured(replica_counts(b));
  f.evaluate(x.data(), g_replica.data());
  Vec rhs = g_measured_ - g_replica;  // H z = -(g_b - g)
  project_out(rhs);
  // The Gauss-Newton Hessian: the Hessian of the same cost on counts the model at x fits
  // exactly (mu m(x)), where every residual and with it every second-derivative term vanishes.
  f.set_measured(fit_counts_);

  const double step = std::sqrt(std::numeric_limits<double>::epsilon()) * (1.0 + x.norm());
  Vec xh(n), gh(n);
  auto hessian_times = [&](Vec v, Vec& Hv) {
    project_out(v);
    const double h = step / v.norm();
    xh = x + h * v;
    f.evaluate(xh.data(), gh.data());
    Hv = (gh - g_fit_) / h;
    project_out(Hv);
  };

  // Conjugate gradients (Hestenes and Stiefel 1952) on H z = rhs from z = 0, preconditioned by
  // `pre` (y = P r; plain CG when null).
  auto precondition = [&](const Vec& v) {
    if (!pre) return v;
    Vec y = pre->apply(v);
    project_out(y);
    return y;
  };
  Vec z = Vec::Zero(n), r = rhs, y = precondition(r), p = y, Hp(n);
  double ry = r.dot(y);
  const double r0 = r.norm();
  if (!(r0 > 0) || !std::isfinite(r0) || !(ry > 0)) {
    out.failure = "the replica's gradient is zero or not finite";
    return out;
  }
  bool converged = false;
  for (int k = 1; k <= laplace_.max_cg_iterations; ++k) {
    hessian_times(p, Hp);
    out.cg_iterations = k;
    const double pHp = p.dot(Hp);
    if (!std::isfinite(pHp)) {
      out.failure = "a Hessian product is not finite at CG iteration " + std::to_string(k);
      return out;
    }
    if (!(pHp > 0)) {
      out.failure = "no positive curvature at CG iteration " + std::to_string(k) +
                    " (a direction the data do not constrain)";
      return out;
    }
    if (collect && collect->s.size() < LaplaceOptions::kMaxPreconditionerPairs) {
      collect->s.push_back(p);
      collect->y.push_back(Hp);
      collect->rho.push_back(1.0 / pHp);
      collect->gamma = pHp / Hp.squaredNorm();
    }
    const double alpha = ry / pHp;
    z += alpha * p;
    r -= alpha * Hp;
    project_out(r);
    out.relative_residual = r.norm() / r0;
    if (out.relative_residual <= laplace_.cg_tolerance) {
      converged = true;
      break;
    }
    y = precondition(r);
    const double ry_new = r.dot(y);
    p = y + (ry_new / ry) * p;
    ry = ry_new;
  }
  if (!converged) {
    out.failure = "CG did not converge in " + std::to_string(laplace_.max_cg_iterations) +
                  " iterations (relative residual " + format_g(out.relative_residual) + ")";
    return out;
  }
  const Vec xb = x + z;
  if (!xb.allFinite()) {
    out.failure = "the Newton step is not finite";
    return out;
  }
  out.fields = fields_at(f, problem_, xb.data());
  out.ok = true;
  return out;
}

}  // namespace sw
