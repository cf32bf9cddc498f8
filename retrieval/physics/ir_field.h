#pragma once
// The IR streaking field, described by its vector potential A(t) (a.u.) sampled on a uniform
// time grid of its own (usually coarser and longer than the XUV grid). E(t) = -dA/dt is derived,
// never stored. Outside the sampled window A = 0 (the field has ended).
//
// Also provides the time integrals that enter the Volkov phase (DESIGN.md):
//   phi_V(p, t) = -Int_t^inf [p A(t') + A(t')^2 / 2] dt' = -p * I1(t) - I2(t) / 2,
//   I1(t) = Int_t^inf A dt',  I2(t) = Int_t^inf A^2 dt',
// evaluated at arbitrary times by cubic Hermite interpolation with the exact derivatives
// (dI1/dt = -A, dI2/dt = -A^2, dA/dt = -E), so delays need not fall on any grid.

#include <vector>

#include "retrieval/core/grid.h"

namespace sw {

/// A, I1 and I2 at one instant.
struct VolkovIntegrals {
  double A = 0.0;
  double I1 = 0.0;
  double I2 = 0.0;
};

class IrField {
 public:
  IrField() = default;
  /// Samples A(t_i), t_i = t0_au + i dt_au.
  IrField(double t0_au, double dt_au, std::vector<double> vector_potential_au);

  double t0() const { return t0_; }
  double dt() const { return dt_; }
  std::size_t size() const { return A_.size(); }
  double time(std::size_t i) const { return t0_ + static_cast<double>(i) * dt_; }
  const std::vector<double>& vector_potential() const { return A_; }

  /// E(t_i) = -dA/dt by fourth-order central differences (second-order at the ends).
  std::vector<double> electric_field() const;
  /// A, I1, I2 at an arbitrary time t (a.u.).
  VolkovIntegrals at(double t_au) const;
  /// at(t_au[k] + shift_au) for k < n into A, I1, I2 (the same numbers, one call for a whole
  /// grid: what the forward model evaluates per delay).
  void sample(const double* t_au, std::size_t n, double shift_au, double* A, double* I1,
              double* I2) const;
  /// A(t) at arbitrary t (cubic Hermite).
  double vector_potential_at(double t_au) const { return at(t_au).A; }
  /// max |A(t)| over the samples (a.u.).
  double peak_vector_potential() const;
  /// max |E(t)| over the samples (a.u.).
  double peak_electric_field() const;

 private:
  void integrate();
  double t0_ = 0.0;
  double dt_ = 1.0;
  std::vector<double> A_;
  std::vector<double> dA_;  // dA/dt samples
  std::vector<double> I1_;  // Int_t^inf A
  std::vector<double> I2_;  // Int_t^inf A^2
};

/// Parameters of a Gaussian-envelope IR pulse. Boundary units in the names.
struct GaussianIrPulse {
  double wavelength_nm = 800.0;       ///< central vacuum wavelength
  double fwhm_fs = 5.0;               ///< intensity FWHM of the envelope
  double peak_intensity_Wcm2 = 1e12;  ///< peak cycle-averaged intensity
  double cep_rad = 0.0;               ///< carrier-envelope phase of E(t) (cosine pulse at 0)
  double chirp_rad_per_fs2 = 0.0;     ///< b in the carrier phase w t + b t^2 (t in fs)
  double center_fs = 0.0;             ///< envelope centre (IR reference time)
};

/// Sample A(t) = -(E0/w) f(t) sin(w t + b t^2 + cep), f = exp(-2 ln2 t^2 / fwhm^2), so that
/// E = -dA/dt ~ E0 f(t) cos(w t + b t^2 + cep) with E0 from the peak intensity. Defining A
/// (not E) first guarantees a field with no zero-frequency component. The samples span
/// [t_first_au, t_last_au] with step dt_au.
IrField make_gaussian_ir(const GaussianIrPulse& pulse, double t_first_au, double t_last_au,
                         double dt_au);

/// Analytic value of the same pulse's A(t) at one time (a.u.), for direct-quadrature use.
double gaussian_ir_vector_potential(const GaussianIrPulse& pulse, double t_au);

}  // namespace sw
