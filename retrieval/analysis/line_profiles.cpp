#include "retrieval/analysis/line_profiles.h"

#include <algorithm>
#include <cmath>

#include <Eigen/Dense>

namespace sw {

namespace {

constexpr double kInvSqrt2Pi = 0.3989422804014327;
constexpr double kMinMu = 1e-6;  // keeps ln mu finite where neither line nor background is

struct Window {
  std::size_t lo = 0, hi = 0;  // bins [lo, hi)
};

// Model mu_j (background included) and, when J is given, d mu_j / d theta (rows: window bins).
void model(const std::vector<double>& W, const std::vector<double>& w, const std::vector<double>& b,
           const Window& win, const Eigen::VectorXd& th, Eigen::VectorXd* mu, Eigen::MatrixXd* J) {
  const Eigen::Index K = th.size() / 3;
  const Eigen::Index n = static_cast<Eigen::Index>(win.hi - win.lo);
  mu->resize(n);
  if (J) J->setZero(n, th.size());
  for (Eigen::Index m = 0; m < n; ++m) {
    const std::size_t j = win.lo + static_cast<std::size_t>(m);
    double v = b[j];
    for (Eigen::Index k = 0; k < K; ++k) {
      const double N = th(3 * k), x = th(3 * k + 1), s = th(3 * k + 2);
      const double u = (W[j] - x) / s;
      const double g = w[j] * kInvSqrt2Pi / s * std::exp(-0.5 * u * u);
      v += N * g;
      if (J) {
        (*J)(m, 3 * k) = g;
        (*J)(m, 3 * k + 1) = N * g * u / s;
        (*J)(m, 3 * k + 2) = N * g * (u * u - 1.0) / s;
      }
    }
    (*mu)(m) = std::max(v, kMinMu);
  }
}

double log_likelihood(const double* c, const Window& win, const Eigen::VectorXd& mu) {
  double L = 0;
  for (Eigen::Index m = 0; m < mu.size(); ++m) {
    const double cj = std::max(c[win.lo + static_cast<std::size_t>(m)], 0.0);
    L += cj * std::log(mu(m)) - mu(m);
  }
  return L;
}

}  // namespace

RowProfileFit fit_row_profiles(const double* c, const std::vector<double>& W,
                               const std::vector<double>& w, const std::vector<double>& b,
                               const std::vector<double>& x0, const std::vector<double>& s0,
                               const RowProfileOptions& o) {
  RowProfileFit out;
  const std::size_t K = x0.size();
  if (K == 0 || s0.size() != K || W.size() < 3 || w.size() != W.size() || b.size() != W.size())
    return out;
  for (std::size_t k = 0; k < K; ++k)
    if (!(s0[k] > 0) || !std::isfinite(x0[k])) return out;
  // Window: every bin within window_widths start widths of a line.
  double lo = x0[0], hi = x0[0];
  for (std::size_t k = 0; k < K; ++k) {
    lo = std::min(lo, x0[k] - o.window_widths * s0[k]);
    hi = std::max(hi, x0[k] + o.window_widths * s0[k]);
  }
  Window win;
  win.lo = static_cast<std::size_t>(std::lower_bound(W.begin(), W.end(), lo) - W.begin());
  win.hi = static_cast<std::size_t>(std::upper_bound(W.begin(), W.end(), hi) - W.begin());
  if (win.hi < win.lo + 3 * K + 2) return out;

  // Start: the counts within +-1 start width of each centre, over the share of a Gaussian there.
  const Eigen::Index P = static_cast<Eigen::Index>(3 * K);
  Eigen::VectorXd th(P);
  for (std::size_t k = 0; k < K; ++k) {
    double n = 0;
    for (std::size_t j = win.lo; j < win.hi; ++j)
      if (std::abs(W[j] - x0[k]) <= s0[k]) n += c[j] - b[j];
    const Eigen::Index q = static_cast<Eigen::Index>(3 * k);
    th(q) = std::max(n / 0.6827, 1.0);
    th(q + 1) = x0[k];
    th(q + 2) = s0[k];
  }
  auto admissible = [&](const Eigen::VectorXd& t) {
    for (std::size_t k = 0; k < K; ++k) {
      const Eigen::Index q = static_cast<Eigen::Index>(3 * k);
      if (!(t(q) > 0) || !(t(q + 2) > s0[k] / o.width_range) ||
          !(t(q + 2) < s0[k] * o.width_range) ||
          !(std::abs(t(q + 1) - x0[k]) < o.max_shift_widths * s0[k]))
        return false;
    }
    return true;
  };

  Eigen::VectorXd mu;
  Eigen::MatrixXd J;
  model(W, w, b, win, th, &mu, &J);
  double L = log_likelihood(c, win, mu);
  double lambda = 1e-3;
  bool converged = false;
  for (int it = 0; it < o.max_iterations && !converged; ++it) {
    out.iterations = it + 1;
    // Fisher scoring: F = J^T diag(1/mu) J, gradient J^T (c / mu - 1).
    Eigen::VectorXd r(mu.size());
    for (Eigen::Index m = 0; m < mu.size(); ++m)
      r(m) = std::max(c[win.lo + static_cast<std::size_t>(m)], 0.0) / mu(m) - 1.0;
    const Eigen::MatrixXd Jw = mu.cwiseInverse().asDiagonal() * J;
    const Eigen::MatrixXd F = J.transpose() * Jw;
    const Eigen::VectorXd g = J.transpose() * r;
    bool stepped = false;
    for (int tries = 0; tries < 12 && !stepped; ++tries) {
      Eigen::MatrixXd A = F;
      A.diagonal() += lambda * F.diagonal().cwiseMax(1e-300);
      const Eigen::VectorXd d = A.ldlt().solve(g);
      if (!d.allFinite()) {
        lambda *= 10;
        continue;
      }
      const Eigen::VectorXd tn = th + d;
      if (!admissible(tn)) {
        lambda *= 10;
        continue;
      }
      Eigen::VectorXd mun;
      model(W, w, b, win, tn, &mun, nullptr);
      const double Ln = log_likelihood(c, win, mun);
      if (!(Ln >= L - 1e-12)) {
        lambda *= 10;
        continue;
      }
      // Converged when no centre moves by more than 1e-6 of its width.
      converged = true;
      for (std::size_t k = 0; k < K; ++k)
        if (std::abs(d(static_cast<Eigen::Index>(3 * k + 1))) >
            1e-6 * tn(static_cast<Eigen::Index>(3 * k + 2)))
          converged = false;
      th = tn;
      L = Ln;
      lambda = std::max(lambda / 10, 1e-9);
      stepped = true;
    }
    if (!stepped) {
      // No admissible step raises the likelihood: the start is its own maximum within the
      // bounds, or the line is lost in noise. Accept only an interior maximum (small gradient).
      converged =
          g.cwiseAbs().maxCoeff() < 1e-6 * std::max(1.0, F.diagonal().cwiseSqrt().maxCoeff());
      break;
    }
    model(W, w, b, win, th, &mu, &J);
  }
  if (!converged) return out;
  model(W, w, b, win, th, &mu, &J);
  const Eigen::MatrixXd F = J.transpose() * (mu.cwiseInverse().asDiagonal() * J);
  const Eigen::LDLT<Eigen::MatrixXd> ldlt(F);
  if (ldlt.info() != Eigen::Success) return out;
  const Eigen::MatrixXd cov = ldlt.solve(Eigen::MatrixXd::Identity(P, P));
  out.counts.resize(K);
  out.centre.resize(K);
  out.centre_var.resize(K);
  out.width.resize(K);
  for (std::size_t k = 0; k < K; ++k) {
    const Eigen::Index q = static_cast<Eigen::Index>(3 * k);
    out.counts[k] = th(q);
    out.centre[k] = th(q + 1);
    out.width[k] = th(q + 2);
    out.centre_var[k] = cov(q + 1, q + 1);
    if (!(out.centre_var[k] > 0) || !std::isfinite(out.centre_var[k])) return out;
  }
  out.ok = true;
  return out;
}

}  // namespace sw
