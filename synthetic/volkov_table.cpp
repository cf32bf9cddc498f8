#include "synthetic/volkov_table.h"

#include <algorithm>
#include <cmath>

#include "retrieval/core/error.h"
#include "retrieval/core/units.h"

namespace sw::synthetic {

namespace {
// 4-point Gauss-Legendre nodes and weights on [-1, 1] (Abramowitz and Stegun, Table 25.4).
constexpr double kGlX[4] = {-0.8611363115940526, -0.3399810435848563, 0.3399810435848563,
                            0.8611363115940526};
constexpr double kGlW[4] = {0.3478548451374538, 0.6521451548625461, 0.6521451548625461,
                            0.3478548451374538};

inline double hermite(double s, double y0, double y1, double m0, double m1) {
  const double s2 = s * s, s3 = s2 * s;
  return (2 * s3 - 3 * s2 + 1) * y0 + (s3 - 2 * s2 + s) * m0 + (-2 * s3 + 3 * s2) * y1 +
         (s3 - s2) * m1;
}
}  // namespace

VolkovTable::VolkovTable(const GaussianIrPulse& pulse, int samples_per_period)
    : a_(pulse), b_(pulse) {
  if (samples_per_period < 16)
    throw Error(ErrorKind::kInternal, "VolkovTable: samples_per_period must be >= 16");
  b_.cep_rad = pulse.cep_rad + 0.5 * units::kPi;
  const double fwhm = units::fs_to_au(pulse.fwhm_fs);
  const double tc = units::fs_to_au(pulse.center_fs);
  const double half = 5.5 * fwhm;
  const double w = units::wavelength_nm_to_omega_au(pulse.wavelength_nm);
  const double fs = units::fs_to_au(1.0);
  const double b = pulse.chirp_rad_per_fs2 / (fs * fs);
  w_max_ = w + 2.0 * std::abs(b) * half;
  h_ = units::kTwoPi / (w_max_ * samples_per_period);
  const std::size_t n = static_cast<std::size_t>(std::ceil(2.0 * half / h_)) + 1;
  t0_ = tc - half;

  Aa_.resize(n);
  Ab_.resize(n);
  for (std::size_t i = 0; i < n; ++i) {
    const double t = t0_ + h_ * static_cast<double>(i);
    Aa_[i] = gaussian_ir_vector_potential(a_, t);
    Ab_[i] = gaussian_ir_vector_potential(b_, t);
  }
  I1a_.assign(n, 0.0);
  I1b_.assign(n, 0.0);
  I2aa_.assign(n, 0.0);
  I2ab_.assign(n, 0.0);
  I2bb_.assign(n, 0.0);
  for (std::size_t i = n - 1; i-- > 0;) {
    const double mid = t0_ + h_ * (static_cast<double>(i) + 0.5);
    double s1a = 0, s1b = 0, saa = 0, sab = 0, sbb = 0;
    for (int k = 0; k < 4; ++k) {
      const double t = mid + 0.5 * h_ * kGlX[k];
      const double xa = gaussian_ir_vector_potential(a_, t);
      const double xb = gaussian_ir_vector_potential(b_, t);
      s1a += kGlW[k] * xa;
      s1b += kGlW[k] * xb;
      saa += kGlW[k] * xa * xa;
      sab += kGlW[k] * xa * xb;
      sbb += kGlW[k] * xb * xb;
    }
    const double hh = 0.5 * h_;
    I1a_[i] = I1a_[i + 1] + hh * s1a;
    I1b_[i] = I1b_[i + 1] + hh * s1b;
    I2aa_[i] = I2aa_[i + 1] + hh * saa;
    I2ab_[i] = I2ab_[i + 1] + hh * sab;
    I2bb_[i] = I2bb_[i + 1] + hh * sbb;
  }
  // Peak |A| of the nominal pulse: node maximum refined by a parabola through its neighbours.
  std::size_t im = 0;
  for (std::size_t i = 0; i < n; ++i)
    if (std::abs(Aa_[i]) > std::abs(Aa_[im])) im = i;
  peak_A_ = std::abs(Aa_[im]);
  if (im > 0 && im + 1 < n) {
    const double ym = std::abs(Aa_[im - 1]), y0 = peak_A_, yp = std::abs(Aa_[im + 1]);
    const double den = ym - 2 * y0 + yp;
    if (den < 0) {
      const double off = 0.5 * (ym - yp) / den;
      peak_A_ = y0 - 0.25 * (ym - yp) * off;
    }
  }
}

VolkovTable::Mix VolkovTable::mix(const IrModifier& m) {
  const double k = std::sqrt(std::max(m.intensity_factor, 0.0));
  return {k * std::cos(m.cep_offset_rad), k * std::sin(m.cep_offset_rad)};
}

VolkovValues VolkovTable::at(double t, const Mix& m) const {
  VolkovValues v;
  const double Aa = gaussian_ir_vector_potential(a_, t);
  const double Ab = m.kb != 0.0 ? gaussian_ir_vector_potential(b_, t) : 0.0;
  v.A = m.ka * Aa + m.kb * Ab;
  const double x = (t - t0_) / h_;
  const std::size_t n = Aa_.size();
  double i1a, i1b, iaa, iab, ibb;
  if (x <= 0) {
    i1a = I1a_[0];
    i1b = I1b_[0];
    iaa = I2aa_[0];
    iab = I2ab_[0];
    ibb = I2bb_[0];
  } else if (x >= static_cast<double>(n - 1)) {
    return v;  // the pulse is over: I1 = I2 = 0
  } else {
    const std::size_t i = static_cast<std::size_t>(x);
    const double s = x - static_cast<double>(i);
    const double a0 = Aa_[i], a1 = Aa_[i + 1], b0 = Ab_[i], b1 = Ab_[i + 1];
    i1a = hermite(s, I1a_[i], I1a_[i + 1], -a0 * h_, -a1 * h_);
    i1b = hermite(s, I1b_[i], I1b_[i + 1], -b0 * h_, -b1 * h_);
    iaa = hermite(s, I2aa_[i], I2aa_[i + 1], -a0 * a0 * h_, -a1 * a1 * h_);
    iab = hermite(s, I2ab_[i], I2ab_[i + 1], -a0 * b0 * h_, -a1 * b1 * h_);
    ibb = hermite(s, I2bb_[i], I2bb_[i + 1], -b0 * b0 * h_, -b1 * b1 * h_);
  }
  v.I1 = m.ka * i1a + m.kb * i1b;
  v.I2 = m.ka * m.ka * iaa + 2.0 * m.ka * m.kb * iab + m.kb * m.kb * ibb;
  return v;
}

}  // namespace sw::synthetic
