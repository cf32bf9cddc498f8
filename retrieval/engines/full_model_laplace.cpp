#include "retrieval/engines/full_model_laplace.h"

#include <cmath>
#include <limits>
#include <random>
#include <utility>

#include "retrieval/core/error.h"
#include "retrieval/core/format.h"
#include "retrieval/engines/full_model_internal.h"

namespace sw {

namespace {

using full_model_detail::make_full_model_start;

double dot(const std::vector<double>& a, const std::vector<double>& b) {
  double s = 0.0;
  for (std::size_t i = 0; i < a.size(); ++i) s += a[i] * b[i];
  return s;
}

// The generator of the XUV's global phase in the scaled parameters (each support bin holds
// Re, Im: a rotation by phi moves them along (-Im, Re)), normalised; zero on the IR.
std::vector<double> phase_direction(const std::vector<double>& x, std::size_t num_xuv) {
  std::vector<double> u(x.size(), 0.0);
  for (std::size_t k = 0; k + 1 < num_xuv; k += 2) {
    u[k] = -x[k + 1];
    u[k + 1] = x[k];
  }
  const double n = std::sqrt(dot(u, u));
  if (n > 0)
    for (double& v : u) v /= n;
  return u;
}

void project_out(const std::vector<double>& u, std::vector<double>* v) {
  const double c = dot(u, *v);
  for (std::size_t i = 0; i < v->size(); ++i) (*v)[i] -= c * u[i];
}

Reconstruction fields_at(const FullModelObjective& f, const RetrievalProblem& P,
                         const std::vector<double>& x) {
  Reconstruction r;
  r.engine = "full-model";
  r.model = "full";
  r.xuv = XuvField(P.grid, f.carrier_au(), f.envelope(x.data()));
  r.ir = f.ir_field(x.data());
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
  centre_ = fields_at(*st.objective, problem_, st.x);
  // The replicas' noise: the variance the weights stand for (1/w; 0 where a bin has no weight).
  const Eigen::MatrixXd& w = st.objective->weights();
  noise_sd_ = (w.array() > 0).select(w.cwiseMax(1e-300).cwiseInverse().cwiseSqrt(), 0.0);
}

Eigen::MatrixXd LaplaceReplicas::replica_counts(int b) const {
  if (!ok() || b < 0)
    throw usage_error("laplace replicas: replica_counts(" + std::to_string(b) + ")" +
                      (ok() ? ": expected b >= 0" : ": " + failure_));
  std::mt19937_64 rng(laplace_.seed * 1000003ULL + static_cast<unsigned long long>(b) + 1);
  std::normal_distribution<double> gauss(0.0, 1.0);
  Eigen::MatrixXd counts = problem_.intensity;
  for (Eigen::Index c = 0; c < counts.cols(); ++c)
    for (Eigen::Index r = 0; r < counts.rows(); ++r) counts(r, c) += noise_sd_(r, c) * gauss(rng);
  return counts;
}

LaplaceReplica LaplaceReplicas::replica(int b) const {
  LaplaceReplica out;
  if (!ok()) {
    out.failure = failure_;
    return out;
  }
  const FullModelSettings settings = validated_settings(options_.settings.full_model, "full-model");
  auto st = make_full_model_start(problem_, options_, settings, MomentumModel::kFull);
  FullModelObjective& f = *st.objective;
  const std::vector<double>& x = st.x;
  const std::size_t n = x.size();
  const std::vector<double> u = phase_direction(x, f.num_xuv_parameters());

  const Eigen::MatrixXd counts = replica_counts(b);
  std::vector<double> g0(n), gb(n), rhs(n);
  f.evaluate(x.data(), g0.data());
  f.set_measured(counts);
  f.evaluate(x.data(), gb.data());
  for (std::size_t i = 0; i < n; ++i) rhs[i] = g0[i] - gb[i];  // H z = -(g_b - g)
  project_out(u, &rhs);
  // The Gauss-Newton Hessian: the Hessian of the same cost on counts the model at x fits
  // exactly (mu m(x)), where every residual and with it every second-derivative term vanishes.
  double mu = 0.0;
  const Eigen::MatrixXd m = f.model(x.data(), &mu);
  f.set_measured(mu * m);
  f.evaluate(x.data(), g0.data());

  const double x_norm = std::sqrt(dot(x, x));
  std::vector<double> xh(n), gh(n);
  auto hessian_times = [&](std::vector<double> v, std::vector<double>* Hv) {
    project_out(u, &v);
    const double vn = std::sqrt(dot(v, v));
    const double h = std::sqrt(std::numeric_limits<double>::epsilon()) * (1.0 + x_norm) / vn;
    for (std::size_t i = 0; i < n; ++i) xh[i] = x[i] + h * v[i];
    f.evaluate(xh.data(), gh.data());
    for (std::size_t i = 0; i < n; ++i) (*Hv)[i] = (gh[i] - g0[i]) / h;
    project_out(u, Hv);
  };

  // Conjugate gradients (Hestenes and Stiefel 1952) on H z = rhs from z = 0.
  std::vector<double> z(n, 0.0), r = rhs, p = rhs, Hp(n);
  double rr = dot(r, r);
  const double r0 = std::sqrt(rr);
  if (!(r0 > 0) || !std::isfinite(r0)) {
    out.failure = "the replica's gradient is zero or not finite";
    return out;
  }
  bool converged = false;
  for (int k = 1; k <= laplace_.max_cg_iterations; ++k) {
    hessian_times(p, &Hp);
    out.cg_iterations = k;
    const double pHp = dot(p, Hp);
    if (!(pHp > 0)) {
      out.failure = "no positive curvature at CG iteration " + std::to_string(k) +
                    " (a direction the data do not constrain)";
      return out;
    }
    const double alpha = rr / pHp;
    for (std::size_t i = 0; i < n; ++i) {
      z[i] += alpha * p[i];
      r[i] -= alpha * Hp[i];
    }
    project_out(u, &r);
    const double rr_new = dot(r, r);
    out.relative_residual = std::sqrt(rr_new) / r0;
    if (out.relative_residual <= laplace_.cg_tolerance) {
      converged = true;
      break;
    }
    const double beta = rr_new / rr;
    rr = rr_new;
    for (std::size_t i = 0; i < n; ++i) p[i] = r[i] + beta * p[i];
  }
  if (!converged) {
    out.failure = "CG did not converge in " + std::to_string(laplace_.max_cg_iterations) +
                  " iterations (relative residual " + format_g(out.relative_residual) + ")";
    return out;
  }
  std::vector<double> xb(n);
  for (std::size_t i = 0; i < n; ++i) {
    xb[i] = x[i] + z[i];
    if (!std::isfinite(xb[i])) {
      out.failure = "the Newton step is not finite";
      return out;
    }
  }
  out.fields = fields_at(f, problem_, xb);
  out.ok = true;
  return out;
}

}  // namespace sw
