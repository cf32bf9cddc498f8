#include "retrieval/physics/ir_field.h"

#include <algorithm>
#include <cmath>
#include <limits>
#include <stdexcept>

#include "retrieval/core/units.h"

namespace sw {

IrField::IrField(double t0_au, double dt_au, std::vector<double> A)
    : t0_(t0_au), dt_(dt_au), A_(std::move(A)) {
  if (A_.size() < 5 || !(dt_ > 0))
    throw std::invalid_argument("IrField needs >= 5 samples, dt > 0");
  integrate();
}

std::vector<double> IrField::electric_field() const {
  std::vector<double> E(dA_.size());
  for (std::size_t i = 0; i < E.size(); ++i) E[i] = -dA_[i];
  return E;
}

void IrField::integrate() {
  const std::size_t n = A_.size();
  dA_.assign(n, 0.0);
  for (std::size_t i = 2; i + 2 < n; ++i)
    dA_[i] = (-A_[i + 2] + 8 * A_[i + 1] - 8 * A_[i - 1] + A_[i - 2]) / (12 * dt_);
  dA_[1] = (A_[2] - A_[0]) / (2 * dt_);
  dA_[n - 2] = (A_[n - 1] - A_[n - 3]) / (2 * dt_);
  dA_[0] = (A_[1] - A_[0]) / dt_;
  dA_[n - 1] = (A_[n - 1] - A_[n - 2]) / dt_;
  // Integrals from the right end (A = 0 beyond it), Hermite-corrected trapezoid (exact for cubics).
  I1_.assign(n, 0.0);
  I2_.assign(n, 0.0);
  for (std::size_t i = n - 1; i-- > 0;) {
    const double a0 = A_[i], a1 = A_[i + 1], d0 = dA_[i], d1 = dA_[i + 1];
    I1_[i] = I1_[i + 1] + dt_ * (a0 + a1) / 2 + dt_ * dt_ * (d0 - d1) / 12;
    const double q0 = a0 * a0, q1 = a1 * a1, e0 = 2 * a0 * d0, e1 = 2 * a1 * d1;
    I2_[i] = I2_[i + 1] + dt_ * (q0 + q1) / 2 + dt_ * dt_ * (e0 - e1) / 12;
  }
}

namespace {
// Cubic Hermite on [0,1] with values y0,y1 and derivatives (already scaled by h) m0,m1.
inline double hermite(double s, double y0, double y1, double m0, double m1) {
  const double s2 = s * s, s3 = s2 * s;
  return (2 * s3 - 3 * s2 + 1) * y0 + (s3 - 2 * s2 + s) * m0 + (-2 * s3 + 3 * s2) * y1 +
         (s3 - s2) * m1;
}

// IrField::at on the stored samples (inline, so that IrField::sample's loop has no call).
struct Samples {
  double t0, dt;
  const std::vector<double>&A, &dA, &I1, &I2;
};
inline VolkovIntegrals interpolate(const Samples& f, double t) {
  const double x = (t - f.t0) / f.dt;
  const std::size_t n = f.A.size();
  if (std::isnan(x)) {  // a time that is not a number: no sample to read
    const double nan = std::numeric_limits<double>::quiet_NaN();
    return {nan, nan, nan};
  }
  if (x <= 0) return {0.0, f.I1.front(), f.I2.front() + 0.0};
  if (x >= static_cast<double>(n - 1)) return {0.0, 0.0, 0.0};
  const std::size_t i = static_cast<std::size_t>(x);
  const double s = x - static_cast<double>(i), dt = f.dt;
  const std::vector<double>& A = f.A;
  VolkovIntegrals v;
  v.A = hermite(s, A[i], A[i + 1], f.dA[i] * dt, f.dA[i + 1] * dt);
  v.I1 = hermite(s, f.I1[i], f.I1[i + 1], -A[i] * dt, -A[i + 1] * dt);
  v.I2 = hermite(s, f.I2[i], f.I2[i + 1], -A[i] * A[i] * dt, -A[i + 1] * A[i + 1] * dt);
  return v;
}
}  // namespace

VolkovIntegrals IrField::at(double t) const {
  return interpolate({t0_, dt_, A_, dA_, I1_, I2_}, t);
}

void IrField::sample(const double* t, std::size_t n, double shift, double* A, double* I1,
                     double* I2) const {
  const Samples f{t0_, dt_, A_, dA_, I1_, I2_};
  for (std::size_t k = 0; k < n; ++k) {
    const VolkovIntegrals v = interpolate(f, t[k] + shift);
    A[k] = v.A;
    I1[k] = v.I1;
    I2[k] = v.I2;
  }
}

double IrField::peak_vector_potential() const {
  double m = 0;
  for (double a : A_) m = std::max(m, std::abs(a));
  return m;
}

double IrField::peak_electric_field() const {
  double m = 0;
  for (double d : dA_) m = std::max(m, std::abs(d));
  return m;
}

double gaussian_ir_vector_potential(const GaussianIrPulse& p, double t_au) {
  const double w = units::wavelength_nm_to_omega_au(p.wavelength_nm);
  const double E0 = units::intensity_to_peak_field_au(p.peak_intensity_Wcm2);
  const double fwhm = units::fs_to_au(p.fwhm_fs);
  const double b = p.chirp_rad_per_fs2 / (units::fs_to_au(1.0) * units::fs_to_au(1.0));
  const double t = t_au - units::fs_to_au(p.center_fs);
  const double f = std::exp(-2.0 * std::log(2.0) * t * t / (fwhm * fwhm));
  return -(E0 / w) * f * std::sin(w * t + b * t * t + p.cep_rad);
}

IrField make_gaussian_ir(const GaussianIrPulse& p, double t_first_au, double t_last_au,
                         double dt_au) {
  if (!(t_last_au > t_first_au) || !(dt_au > 0))
    throw std::invalid_argument("make_gaussian_ir: empty window");
  const std::size_t n = static_cast<std::size_t>(std::ceil((t_last_au - t_first_au) / dt_au)) + 1;
  std::vector<double> A(n);
  for (std::size_t i = 0; i < n; ++i)
    A[i] = gaussian_ir_vector_potential(p, t_first_au + static_cast<double>(i) * dt_au);
  return IrField(t_first_au, dt_au, std::move(A));
}

}  // namespace sw
