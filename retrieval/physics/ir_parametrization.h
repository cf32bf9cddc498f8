#pragma once
// Parametrisations of the IR vector potential for gradient-based reconstruction: maps from a
// parameter vector theta to the samples A(t_i) of an IrField on a fixed uniform grid, with the
// transpose of their Jacobian (pullback) for adjoint gradients.
//
//   GaussianIrParametrization (6 parameters, the form of sw::gaussian_ir_vector_potential):
//     A(t) = -A0 f(t) sin(w t' + b t'^2 + cep),  f = exp(-2 ln2 t'^2 / F^2),  t' = t - t_c,
//     theta = (A0, w, F, cep, b, t_c) in atomic units (A0 = E0 / w, F = intensity FWHM of the
//     envelope, b in rad/a.u.^2). Few parameters: the robust choice from scratch.
//   SplineIrParametrization (free form): A(t) = sum_k c_k B3((t - t_k) / h) on a uniform cubic
//     B-spline with knot spacing h (default 1/6 of the IR period: a band limit well above the
//     laser's bandwidth, C. de Boor, A Practical Guide to Splines (1978)), evaluated at the IR
//     samples: a fixed sparse linear map (4 coefficients per sample). The choice for refining
//     a warm start, where the field need not be Gaussian.
//
// Both give the scale of each parameter (what a change of "1" means physically), which the
// optimiser uses to precondition the problem.

#include <memory>
#include <string>
#include <vector>

#include "retrieval/physics/ir_field.h"

namespace sw {

/// Uniform sample layout of the IR field being fitted (a.u.).
struct IrSampling {
  double t0_au = 0.0;
  double dt_au = 1.0;
  std::size_t size = 0;
  double time(std::size_t i) const { return t0_au + static_cast<double>(i) * dt_au; }
  double last_time() const { return time(size - 1); }
  /// Layout covering [t_first, t_last] with step <= max_dt (at least 5 samples).
  static IrSampling covering(double t_first_au, double t_last_au, double max_dt_au);
};

class IrParametrization {
 public:
  virtual ~IrParametrization() = default;
  /// "parametric" or "spline".
  virtual std::string kind() const = 0;
  virtual std::size_t num_params() const = 0;
  const IrSampling& sampling() const { return sampling_; }
  /// A(t_i) on sampling() for parameters theta (size num_params()).
  virtual void samples(const double* theta, std::vector<double>* A) const = 0;
  /// theta_bar = (dA/dtheta)^T A_bar (A_bar on sampling()).
  virtual void pullback(const double* theta, const std::vector<double>& A_bar,
                        double* theta_bar) const = 0;
  /// Physical scale of each parameter at theta (for preconditioning; all > 0).
  virtual std::vector<double> scales(const double* theta) const = 0;
  /// Parameters whose samples best match A(t) of `ir` on sampling() (least squares).
  virtual std::vector<double> fit(const IrField& ir) const = 0;
  /// The IrField of theta.
  IrField field(const double* theta) const;

 protected:
  explicit IrParametrization(IrSampling s) : sampling_(s) {}
  IrSampling sampling_;
};

class GaussianIrParametrization : public IrParametrization {
 public:
  enum Index { kA0 = 0, kOmega, kFwhm, kCep, kChirp, kCenter, kCount };
  explicit GaussianIrParametrization(IrSampling s) : IrParametrization(s) {}
  std::string kind() const override { return "parametric"; }
  std::size_t num_params() const override { return kCount; }
  void samples(const double* theta, std::vector<double>* A) const override;
  void pullback(const double* theta, const std::vector<double>& A_bar,
                double* theta_bar) const override;
  std::vector<double> scales(const double* theta) const override;
  /// Least-squares fit to the samples of `ir` (omega guessed from its spectrum).
  std::vector<double> fit(const IrField& ir) const override;

  /// A(t) of theta at one time.
  static double value(const double* theta, double t_au);
  /// theta of a GaussianIrPulse (boundary units) and back; to_pulse() normalises A0 >= 0,
  /// F > 0 and cep into (-pi, pi].
  static std::vector<double> from_pulse(const GaussianIrPulse& p);
  static GaussianIrPulse to_pulse(const double* theta);
  /// Weighted least-squares fit of the form to samples A(t_k) (weights >= 0), starting from
  /// envelope moments, the carrier omega_guess_au (> 0) and a linear fit of the carrier
  /// phase, refined by Ceres (Levenberg-Marquardt, automatic derivatives of this 6-parameter
  /// form). Returns normalised theta. Throws sw::Error(kNumeric) when A is identically zero.
  static std::vector<double> fit_samples(const std::vector<double>& t_au,
                                         const std::vector<double>& A,
                                         const std::vector<double>& weight, double omega_guess_au);
};

class SplineIrParametrization : public IrParametrization {
 public:
  /// Knots t_k = t0 + (k - 1) h, k = 0..K-1, K = ceil((t_last - t0) / h) + 3, so every sample
  /// sees four coefficients. h > 0 (a.u.).
  SplineIrParametrization(IrSampling s, double knot_spacing_au);
  std::string kind() const override { return "spline"; }
  std::size_t num_params() const override { return num_coeffs_; }
  double knot_spacing_au() const { return h_; }
  void samples(const double* theta, std::vector<double>* A) const override;
  void pullback(const double* theta, const std::vector<double>& A_bar,
                double* theta_bar) const override;
  /// All coefficients share one scale: `amplitude_scale` (set_amplitude_scale), default 0.1 a.u.
  std::vector<double> scales(const double* theta) const override;
  void set_amplitude_scale(double a_au) { amplitude_scale_ = a_au; }
  /// Least squares on the samples (normal equations of the banded basis, with a 1e-10
  /// relative ridge so coefficients no sample sees stay defined and zero).
  std::vector<double> fit(const IrField& ir) const override;
  /// Same, from samples on sampling().
  std::vector<double> fit_samples(const std::vector<double>& A) const;

 private:
  double h_;
  std::size_t num_coeffs_;
  std::vector<std::size_t> first_;  // first coefficient index per sample
  std::vector<double> weight_;      // 4 basis values per sample
  double amplitude_scale_ = 0.1;
};

}  // namespace sw
