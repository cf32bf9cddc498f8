#pragma once
// The IR quantities of the Volkov phase for the synthetic generator, computed independently of
// retrieval/physics/ir_field.cpp (DESIGN.md: no inverse crime):
//
//   phi_V(p, t) = -p I1(t) - I2(t)/2,   I1(t) = Int_t^inf A dt',   I2(t) = Int_t^inf A^2 dt',
//
// for a Gaussian IR pulse A(t) = -(E0/w) f(t) sin(w t + b t^2 + cep)
// (retrieval/physics/ir_field.h). A(t) itself is always the analytic
// sw::gaussian_ir_vector_potential. The integrals are tabulated on a fine grid (step = optical
// period / 256 at the highest instantaneous frequency) covering +-5.5 intensity FWHM about the
// pulse centre (where the envelope has fallen below 1e-18), accumulated from the right with 4-point
// Gauss-Legendre quadrature per step (exact for polynomials of degree 7; error ~ (w h)^8 / 8! per
// step), and evaluated between nodes by cubic Hermite interpolation with the exact derivatives
// dI1/dt = -A, dI2/dt = -A^2 (error
// <= h^4 max|A'''| / 384, ~1e-9 A0/w).
//
// Per-row fluctuations of intensity and CEP are exact linear combinations of two tables: with
// A_a the pulse at its nominal CEP and A_b the same pulse at CEP + pi/2,
//   A(t; cep + d, intensity x k) = sqrt(k) (cos d A_a + sin d A_b),
// so I1 and I2 follow from the integrals of A_a, A_b, A_a^2, A_a A_b and A_b^2.

#include <vector>

#include "retrieval/physics/ir_field.h"

namespace sw::synthetic {

/// Per-row IR modification: intensity x factor, CEP + offset.
struct IrModifier {
  double intensity_factor = 1.0;
  double cep_offset_rad = 0.0;
};

/// A, I1, I2 at one time (a.u.).
struct VolkovValues {
  double A = 0.0;
  double I1 = 0.0;
  double I2 = 0.0;
};

class VolkovTable {
 public:
  /// Builds the tables of the nominal pulse. samples_per_period >= 16.
  explicit VolkovTable(const GaussianIrPulse& pulse, int samples_per_period = 256);

  /// Coefficients of one row's modified pulse (computed once per row).
  struct Mix {
    double ka = 1.0, kb = 0.0;  // A = ka A_a + kb A_b
  };
  static Mix mix(const IrModifier& m);

  /// Values at time t (a.u.) for the modified pulse.
  VolkovValues at(double t_au, const Mix& m) const;
  VolkovValues at(double t_au) const { return at(t_au, Mix{}); }

  /// max |A(t)| of the nominal pulse (a.u.), parabola-refined on the table nodes.
  double peak_vector_potential() const { return peak_A_; }
  /// Time span of the tables (outside, A = 0 to 1e-18 of its peak).
  double t_first() const { return t0_; }
  double t_last() const { return t0_ + h_ * static_cast<double>(Aa_.size() - 1); }
  double step() const { return h_; }
  /// Largest instantaneous angular frequency of the carrier over the tabulated span (a.u.).
  double max_frequency() const { return w_max_; }

 private:
  GaussianIrPulse a_, b_;
  double t0_ = 0.0, h_ = 1.0, peak_A_ = 0.0, w_max_ = 0.0;
  std::vector<double> Aa_, Ab_, I1a_, I1b_, I2aa_, I2ab_, I2bb_;
};

}  // namespace sw::synthetic
