#include "retrieval/physics/ir_parametrization.h"

#include <algorithm>
#include <cmath>
#include <stdexcept>

#include <ceres/ceres.h>
#include <Eigen/Dense>

#include "retrieval/core/error.h"
#include "retrieval/core/units.h"

namespace sw {

namespace {
constexpr double kLn2 = 0.69314718055994530942;

double wrap_phase(double x) {
  x = std::remainder(x, units::kTwoPi);  // [-pi, pi]
  return x <= -units::kPi ? x + units::kTwoPi : x;
}

void normalise(std::vector<double>& th) {
  using G = GaussianIrParametrization;
  if (th[G::kA0] < 0) {
    th[G::kA0] = -th[G::kA0];
    th[G::kCep] += units::kPi;
  }
  th[G::kFwhm] = std::abs(th[G::kFwhm]);
  th[G::kCep] = wrap_phase(th[G::kCep]);
}

// Residual of the 6-parameter form for Ceres' automatic derivatives.
struct GaussianResidual {
  double t, a, sw;
  template <class T>
  bool operator()(const T* th, T* r) const {
    const T tp = T(t) - th[5];
    const T f = exp(-2.0 * kLn2 * tp * tp / (th[2] * th[2]));
    r[0] = T(sw) * (-th[0] * f * sin(th[1] * tp + th[4] * tp * tp + th[3]) - T(a));
    return true;
  }
};
}  // namespace

IrSampling IrSampling::covering(double t_first, double t_last, double max_dt) {
  if (!(t_last > t_first) || !(max_dt > 0))
    throw std::invalid_argument("IrSampling::covering: empty interval or non-positive step");
  const auto n = static_cast<std::size_t>(std::ceil((t_last - t_first) / max_dt)) + 1;
  IrSampling s;
  s.size = std::max<std::size_t>(n, 5);
  s.t0_au = t_first;
  s.dt_au = (t_last - t_first) / static_cast<double>(s.size - 1);
  return s;
}

IrField IrParametrization::field(const double* theta) const {
  std::vector<double> A;
  samples(theta, &A);
  return IrField(sampling_.t0_au, sampling_.dt_au, std::move(A));
}

// --- Gaussian form ----------------------------------------------------------------------------

double GaussianIrParametrization::value(const double* th, double t) {
  const double tp = t - th[kCenter];
  const double f = std::exp(-2.0 * kLn2 * tp * tp / (th[kFwhm] * th[kFwhm]));
  return -th[kA0] * f * std::sin(th[kOmega] * tp + th[kChirp] * tp * tp + th[kCep]);
}

void GaussianIrParametrization::samples(const double* th, std::vector<double>* A) const {
  A->resize(sampling_.size);
  for (std::size_t i = 0; i < sampling_.size; ++i) (*A)[i] = value(th, sampling_.time(i));
}

void GaussianIrParametrization::pullback(const double* th, const std::vector<double>& Ab,
                                         double* tb) const {
  std::fill(tb, tb + kCount, 0.0);
  const double A0 = th[kA0], w = th[kOmega], F = th[kFwhm], b = th[kChirp];
  for (std::size_t i = 0; i < sampling_.size; ++i) {
    if (Ab[i] == 0.0) continue;
    const double tp = sampling_.time(i) - th[kCenter];
    const double f = std::exp(-2.0 * kLn2 * tp * tp / (F * F));
    const double ph = w * tp + b * tp * tp + th[kCep];
    const double s = std::sin(ph), c = std::cos(ph);
    const double g = Ab[i];
    tb[kA0] += g * (-f * s);
    tb[kOmega] += g * (-A0 * f * c * tp);
    tb[kFwhm] += g * (-A0 * s * f * 4.0 * kLn2 * tp * tp / (F * F * F));
    tb[kCep] += g * (-A0 * f * c);
    tb[kChirp] += g * (-A0 * f * c * tp * tp);
    tb[kCenter] += g * (-A0 * f * (4.0 * kLn2 * tp / (F * F) * s - c * (w + 2.0 * b * tp)));
  }
}

std::vector<double> GaussianIrParametrization::scales(const double* th) const {
  const double F = std::max(std::abs(th[kFwhm]), 1.0);
  const double w = std::max(std::abs(th[kOmega]), 1e-3);
  // A change of 1 in each scaled parameter moves the carrier phase at the envelope's edge, or
  // the amplitude, by O(1).
  return {std::max(std::abs(th[kA0]), 1e-3), 1.0 / F, F, 1.0, 1.0 / (F * F), 1.0 / w};
}

std::vector<double> GaussianIrParametrization::from_pulse(const GaussianIrPulse& p) {
  std::vector<double> th(kCount);
  const double w = units::wavelength_nm_to_omega_au(p.wavelength_nm);
  th[kA0] = units::intensity_to_peak_field_au(p.peak_intensity_Wcm2) / w;
  th[kOmega] = w;
  th[kFwhm] = units::fs_to_au(p.fwhm_fs);
  th[kCep] = p.cep_rad;
  th[kChirp] = p.chirp_rad_per_fs2 / (units::fs_to_au(1.0) * units::fs_to_au(1.0));
  th[kCenter] = units::fs_to_au(p.center_fs);
  return th;
}

GaussianIrPulse GaussianIrParametrization::to_pulse(const double* theta) {
  std::vector<double> th(theta, theta + kCount);
  normalise(th);
  GaussianIrPulse p;
  p.wavelength_nm = units::omega_au_to_wavelength_nm(th[kOmega]);
  p.fwhm_fs = units::au_to_fs(th[kFwhm]);
  p.peak_intensity_Wcm2 = units::peak_field_au_to_intensity(th[kA0] * th[kOmega]);
  p.cep_rad = th[kCep];
  p.chirp_rad_per_fs2 = th[kChirp] * units::fs_to_au(1.0) * units::fs_to_au(1.0);
  p.center_fs = units::au_to_fs(th[kCenter]);
  return p;
}

std::vector<double> GaussianIrParametrization::fit_samples(const std::vector<double>& t,
                                                           const std::vector<double>& A,
                                                           const std::vector<double>& wt,
                                                           double omega_guess) {
  if (t.size() != A.size() || t.size() != wt.size() || t.size() < 6)
    throw std::invalid_argument("GaussianIrParametrization::fit_samples: need >= 6 samples");
  if (!(omega_guess > 0))
    throw std::invalid_argument("GaussianIrParametrization::fit_samples: omega_guess <= 0");
  // Envelope moments of w A^2: centre and FWHM (A^2 ~ f^2 has intensity FWHM F).
  double s0 = 0, s1 = 0, s2 = 0;
  for (std::size_t k = 0; k < t.size(); ++k) {
    const double q = wt[k] * A[k] * A[k];
    s0 += q;
    s1 += q * t[k];
    s2 += q * t[k] * t[k];
  }
  if (!(s0 > 0)) throw numeric_error("IR fit: the vector potential samples are all zero");
  const double tc = s1 / s0;
  const double rms = std::sqrt(std::max(s2 / s0 - tc * tc, 0.0));
  const double span = t.back() - t.front();
  const double F = std::clamp(units::kFwhmPerSigma * rms, 0.5 * units::period_au(omega_guess),
                              std::max(span, units::period_au(omega_guess)));
  // Linear fit of alpha sin + beta cos for the carrier phase and amplitude.
  double m11 = 0, m12 = 0, m22 = 0, r1 = 0, r2 = 0;
  for (std::size_t k = 0; k < t.size(); ++k) {
    const double tp = t[k] - tc;
    const double f = std::exp(-2.0 * kLn2 * tp * tp / (F * F));
    const double a = f * std::sin(omega_guess * tp), b = f * std::cos(omega_guess * tp);
    m11 += wt[k] * a * a;
    m12 += wt[k] * a * b;
    m22 += wt[k] * b * b;
    r1 += wt[k] * a * A[k];
    r2 += wt[k] * b * A[k];
  }
  const double det = m11 * m22 - m12 * m12;
  double alpha = 0, beta = 0;
  if (std::abs(det) > 1e-300) {
    alpha = (m22 * r1 - m12 * r2) / det;
    beta = (m11 * r2 - m12 * r1) / det;
  }
  std::vector<double> th(kCount);
  // alpha sin + beta cos = -A0 sin(w t' + cep)  ->  alpha = -A0 cos cep, beta = -A0 sin cep.
  th[kA0] = std::max(std::hypot(alpha, beta), 1e-6);
  th[kCep] = std::atan2(-beta, -alpha);
  th[kOmega] = omega_guess;
  th[kFwhm] = F;
  th[kChirp] = 0.0;
  th[kCenter] = tc;

  ceres::Problem problem;
  for (std::size_t k = 0; k < t.size(); ++k) {
    if (!(wt[k] > 0)) continue;
    problem.AddResidualBlock(new ceres::AutoDiffCostFunction<GaussianResidual, 1, kCount>(
                                 new GaussianResidual{t[k], A[k], std::sqrt(wt[k])}),
                             nullptr, th.data());
  }
  problem.SetParameterLowerBound(th.data(), kFwhm, 0.25 * units::period_au(omega_guess));
  problem.SetParameterLowerBound(th.data(), kOmega, 0.5 * omega_guess);
  problem.SetParameterUpperBound(th.data(), kOmega, 2.0 * omega_guess);
  ceres::Solver::Options o;
  o.max_num_iterations = 200;
  o.function_tolerance = 1e-14;
  o.parameter_tolerance = 1e-14;
  o.gradient_tolerance = 1e-16;
  o.logging_type = ceres::SILENT;
  o.linear_solver_type = ceres::DENSE_QR;
  ceres::Solver::Summary summary;
  ceres::Solve(o, &problem, &summary);
  normalise(th);
  return th;
}

std::vector<double> GaussianIrParametrization::fit(const IrField& ir) const {
  std::vector<double> t(sampling_.size), A(sampling_.size), w(sampling_.size, 1.0);
  for (std::size_t i = 0; i < sampling_.size; ++i) {
    t[i] = sampling_.time(i);
    A[i] = ir.vector_potential_at(t[i]);
  }
  // Carrier guess: mean zero-crossing rate of A (two crossings per period) where the field is
  // above 10 % of its peak.
  double peak = 0;
  for (double a : A) peak = std::max(peak, std::abs(a));
  int crossings = 0;
  double first = 0, last = 0;
  for (std::size_t i = 1; i < A.size(); ++i) {
    if (std::abs(A[i]) < 0.1 * peak && std::abs(A[i - 1]) < 0.1 * peak) continue;
    if ((A[i - 1] < 0) != (A[i] < 0)) {
      if (crossings == 0) first = t[i];
      last = t[i];
      ++crossings;
    }
  }
  const double omega = crossings >= 3
                           ? units::kPi * (crossings - 1) / (last - first)
                           : units::wavelength_nm_to_omega_au(800.0);  // common Ti:sapphire default
  return fit_samples(t, A, w, omega);
}

// --- cubic B-spline ---------------------------------------------------------------------------

SplineIrParametrization::SplineIrParametrization(IrSampling s, double h)
    : IrParametrization(s), h_(h) {
  if (!(h > 0) || s.size < 5)
    throw std::invalid_argument("SplineIrParametrization: knot spacing must be > 0, >= 5 samples");
  const double L = s.last_time() - s.t0_au;
  const auto intervals = static_cast<std::size_t>(std::ceil(L / h - 1e-12));
  num_coeffs_ = intervals + 3;
  first_.resize(s.size);
  weight_.resize(4 * s.size);
  for (std::size_t i = 0; i < s.size; ++i) {
    const double u = (s.time(i) - s.t0_au) / h;  // in [0, intervals]
    std::size_t k = static_cast<std::size_t>(std::floor(u));
    if (k >= intervals) k = intervals - 1;
    const double f = u - static_cast<double>(k);
    const double g = 1.0 - f;
    first_[i] = k;  // coefficients k .. k+3 (knot k+1 is the interval start)
    weight_[4 * i + 0] = g * g * g / 6.0;
    weight_[4 * i + 1] = (3.0 * f * f * f - 6.0 * f * f + 4.0) / 6.0;
    weight_[4 * i + 2] = (-3.0 * f * f * f + 3.0 * f * f + 3.0 * f + 1.0) / 6.0;
    weight_[4 * i + 3] = f * f * f / 6.0;
  }
}

void SplineIrParametrization::samples(const double* c, std::vector<double>* A) const {
  A->resize(sampling_.size);
  for (std::size_t i = 0; i < sampling_.size; ++i) {
    const double* wv = &weight_[4 * i];
    const double* cc = c + first_[i];
    (*A)[i] = wv[0] * cc[0] + wv[1] * cc[1] + wv[2] * cc[2] + wv[3] * cc[3];
  }
}

void SplineIrParametrization::pullback(const double*, const std::vector<double>& Ab,
                                       double* cb) const {
  std::fill(cb, cb + num_coeffs_, 0.0);
  for (std::size_t i = 0; i < sampling_.size; ++i)
    for (int r = 0; r < 4; ++r)
      cb[first_[i] + static_cast<std::size_t>(r)] += weight_[4 * i + r] * Ab[i];
}

std::vector<double> SplineIrParametrization::scales(const double*) const {
  return std::vector<double>(num_coeffs_, amplitude_scale_);
}

std::vector<double> SplineIrParametrization::fit_samples(const std::vector<double>& A) const {
  if (A.size() != sampling_.size)
    throw std::invalid_argument("SplineIrParametrization::fit_samples: size mismatch");
  const auto K = static_cast<Eigen::Index>(num_coeffs_);
  Eigen::MatrixXd N = Eigen::MatrixXd::Zero(K, K);
  Eigen::VectorXd r = Eigen::VectorXd::Zero(K);
  for (std::size_t i = 0; i < sampling_.size; ++i)
    for (int a = 0; a < 4; ++a) {
      const auto ia = static_cast<Eigen::Index>(first_[i]) + a;
      r(ia) += weight_[4 * i + a] * A[i];
      for (int b = 0; b < 4; ++b)
        N(ia, static_cast<Eigen::Index>(first_[i]) + b) += weight_[4 * i + a] * weight_[4 * i + b];
    }
  const double ridge = 1e-10 * std::max(N.diagonal().maxCoeff(), 1e-300);
  N.diagonal().array() += ridge;
  const Eigen::VectorXd c = N.ldlt().solve(r);
  return std::vector<double>(c.data(), c.data() + K);
}

std::vector<double> SplineIrParametrization::fit(const IrField& ir) const {
  std::vector<double> A(sampling_.size);
  for (std::size_t i = 0; i < sampling_.size; ++i) A[i] = ir.vector_potential_at(sampling_.time(i));
  return fit_samples(A);
}

}  // namespace sw
