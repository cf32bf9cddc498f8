// The weighted least-squares fits of the RABBITT analysis: the sideband oscillation
// S = A + B cos(Omega tau + phi) (fit_cosine, rabbitt.h) and the straight line of the energy-axis
// alignment and of the attochirp (rabbitt_internal.h).
#include <algorithm>
#include <cmath>
#include <string>

#include <Eigen/Dense>

#include "retrieval/analysis/rabbitt.h"
#include "retrieval/analysis/rabbitt_internal.h"
#include "retrieval/core/error.h"
#include "retrieval/core/units.h"

namespace sw {

CosineFit fit_cosine(const std::vector<double>& tau, const std::vector<double>& S, double Omega,
                     int reweight_passes) {
  if (tau.size() != S.size())
    throw usage_error("fit_cosine: " + std::to_string(tau.size()) + " delays but " +
                      std::to_string(S.size()) + " signal values.");
  const std::size_t n = tau.size();
  if (n < 4)
    throw usage_error("fit_cosine: " + std::to_string(n) +
                      " points are too few for a 3-parameter fit (need >= 4).");
  if (reweight_passes < 0)
    throw usage_error("fit_cosine: reweight_passes = " + std::to_string(reweight_passes) +
                      " is invalid: it must be >= 0.");
  std::vector<double> cs(n), sn(n), wt(n);
  for (std::size_t i = 0; i < n; ++i) {
    cs[i] = std::cos(Omega * tau[i]);
    sn[i] = std::sin(Omega * tau[i]);
    wt[i] = 1.0 / std::max(S[i], 1.0);
  }
  Eigen::Matrix3d C;
  Eigen::Vector3d c;
  for (int pass = 0; pass <= reweight_passes; ++pass) {
    Eigen::Matrix3d N = Eigen::Matrix3d::Zero();
    Eigen::Vector3d b = Eigen::Vector3d::Zero();
    for (std::size_t i = 0; i < n; ++i) {
      const Eigen::Vector3d x(1.0, cs[i], sn[i]);
      N += wt[i] * x * x.transpose();
      b += wt[i] * S[i] * x;
    }
    C = N.inverse();
    c = C * b;
    if (pass < reweight_passes)
      for (std::size_t i = 0; i < n; ++i)
        wt[i] = 1.0 / std::max(c(0) + c(1) * cs[i] + c(2) * sn[i], 1.0);
  }
  CosineFit f;
  f.angular_frequency_au = Omega;
  f.points = static_cast<int>(n);
  double sw = 0, swy = 0;
  for (std::size_t i = 0; i < n; ++i) {
    sw += wt[i];
    swy += wt[i] * S[i];
  }
  const double mean0 = swy / sw;
  double chi2 = 0, chi2_0 = 0;
  for (std::size_t i = 0; i < n; ++i) {
    const double model = c(0) + c(1) * cs[i] + c(2) * sn[i];
    chi2 += wt[i] * (S[i] - model) * (S[i] - model);
    chi2_0 += wt[i] * (S[i] - mean0) * (S[i] - mean0);
  }
  f.chi2 = chi2;
  f.explained_chi2 = std::max(chi2_0 - chi2, 0.0);
  f.reduced_chi2 = chi2 / static_cast<double>(n - 3);
  double scale = 1.0;
  if (f.reduced_chi2 > 1.0) {
    scale = f.reduced_chi2;
    f.covariance_scaled = true;
  }
  const Eigen::Matrix3d Cs = scale * C;
  f.mean = c(0);
  f.mean_sigma = std::sqrt(std::max(Cs(0, 0), 0.0));
  const double B = std::hypot(c(1), c(2));
  f.amplitude = B;
  f.phase_rad = std::atan2(-c(2), c(1));
  if (B > 0.0) {
    // dB/dc = (c1, c2)/B; dphi/dc = (c2, -c1)/B^2.
    const Eigen::Vector2d jb(c(1) / B, c(2) / B), jp(c(2) / (B * B), -c(1) / (B * B));
    const Eigen::Matrix2d C2 = Cs.block<2, 2>(1, 1);
    f.amplitude_sigma = std::sqrt(std::max(jb.dot(C2 * jb), 0.0));
    f.phase_rad_sigma = std::sqrt(std::max(jp.dot(C2 * jp), 0.0));
  } else {
    f.amplitude_sigma = std::sqrt(std::max(0.5 * (Cs(1, 1) + Cs(2, 2)), 0.0));
    f.phase_rad_sigma = units::kPi;
  }
  f.modulation_depth = f.mean > 0.0 ? B / f.mean : 0.0;
  return f;
}

namespace rabbitt_detail {

LineFit weighted_line(const std::vector<double>& x, const std::vector<double>& y,
                      const std::vector<double>& sigma, double x0) {
  double S = 0, Sx = 0, Sxx = 0, Sy = 0, Sxy = 0;
  for (std::size_t i = 0; i < x.size(); ++i) {
    const double w = 1.0 / (sigma[i] * sigma[i]), u = x[i] - x0;
    S += w;
    Sx += w * u;
    Sxx += w * u * u;
    Sy += w * y[i];
    Sxy += w * u * y[i];
  }
  LineFit f;
  const double det = S * Sxx - Sx * Sx;
  if (!(det > 0.0)) {
    f.intercept = Sy / S;
    f.intercept_sigma = std::sqrt(1.0 / S);
    return f;
  }
  f.slope = (S * Sxy - Sx * Sy) / det;
  f.intercept = (Sxx * Sy - Sx * Sxy) / det;
  f.slope_sigma = std::sqrt(S / det);
  f.intercept_sigma = std::sqrt(Sxx / det);
  if (x.size() > 2) {
    double chi2 = 0;
    for (std::size_t i = 0; i < x.size(); ++i) {
      const double r = (y[i] - f.intercept - f.slope * (x[i] - x0)) / sigma[i];
      chi2 += r * r;
    }
    f.reduced_chi2 = chi2 / static_cast<double>(x.size() - 2);
    if (f.reduced_chi2 > 1.0) {
      const double s = std::sqrt(f.reduced_chi2);
      f.slope_sigma *= s;
      f.intercept_sigma *= s;
      f.scaled = true;
    }
  }
  return f;
}

}  // namespace rabbitt_detail

}  // namespace sw
