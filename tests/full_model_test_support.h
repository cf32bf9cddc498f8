#pragma once
// Helpers shared by the full-model tests (test_full_model_engine.cpp, test_joint_lines.cpp):
// a counted scan handed to the engines the way preprocess() does, and the central-difference
// check of an objective's gradient.

#include <catch2/catch.hpp>

#include <Eigen/Dense>
#include <algorithm>
#include <cmath>
#include <complex>
#include <memory>
#include <random>
#include <vector>

#include "retrieval/core/units.h"
#include "retrieval/engines/problem.h"
#include "retrieval/physics/ir_field.h"
#include "retrieval/physics/ir_parametrization.h"

namespace sw::test {

/// Fills R's intensity and variance from the density p |a|^2 `dens` (delays x energies `W`, a.u.)
/// scaled by `k` counts per unit: counts per bin ~ Poisson(k dens) when `poisson` (else the
/// expectation itself), intensity = counts / p, Poisson variance max(counts, 1) / p^2.
inline void fill_counts(RetrievalProblem& R, const Eigen::MatrixXd& dens,
                        const std::vector<double>& W, double k, bool poisson, std::mt19937& rng) {
  const Eigen::Index nD = dens.rows(), nW = dens.cols();
  R.intensity.resize(nD, nW);
  R.variance.resize(nD, nW);
  for (Eigen::Index i = 0; i < nD; ++i)
    for (Eigen::Index j = 0; j < nW; ++j) {
      const double p = std::sqrt(2 * W[static_cast<std::size_t>(j)]);
      const double lam = k * dens(i, j);
      const double c =
          poisson ? static_cast<double>(std::poisson_distribution<long>(lam)(rng)) : lam;
      R.intensity(i, j) = c / p;
      R.variance(i, j) = std::max(c, 1.0) / (p * p);
    }
}

/// Sets R's field-free spectrum k ff / p from the field-free density `ff` (one row over `W`),
/// its energy axis and the central momentum sqrt(2 <W>) of that spectrum's mean energy.
inline void fill_field_free(RetrievalProblem& R, const Eigen::MatrixXd& ff,
                            const std::vector<double>& W, double k) {
  const std::size_t nW = W.size();
  R.field_free_spectrum.resize(nW);
  double num = 0, den = 0;
  for (std::size_t j = 0; j < nW; ++j) {
    const Eigen::Index jj = static_cast<Eigen::Index>(j);
    const double p = std::sqrt(2 * W[j]);
    R.field_free_spectrum[j] = k * ff(0, jj) / p;
    num += ff(0, jj) * W[j];
    den += ff(0, jj);
  }
  R.energy_au = W;
  R.central_momentum_au = std::sqrt(2 * num / den);
}

/// The IR sampling of the gradient checks: the scanned delays +- 150 a.u. at a 64th of the IR
/// period.
inline IrSampling gradient_check_sampling(const RetrievalProblem& P) {
  const double T = units::period_au(P.ir_omega_au);
  return IrSampling::covering(P.delay_au.front() - 150, P.delay_au.back() + 150, T / 64);
}

/// A perturbed start spectrum on `energy_au`: a Gaussian of 12 eV rms at 108 eV with a quadratic
/// and a linear spectral phase, so that no gradient component vanishes.
inline std::vector<cdouble> perturbed_spectrum(const std::vector<double>& energy_au) {
  std::vector<cdouble> spec(energy_au.size());
  for (std::size_t j = 0; j < spec.size(); ++j) {
    const double x = units::au_to_eV(energy_au[j]) - 108.0;
    spec[j] = std::exp(-x * x / (2 * 12.0 * 12.0)) * std::polar(1.0, 0.002 * x * x + 0.01 * x);
  }
  return spec;
}

/// A perturbed start of the IR: 8e12 W/cm^2 (field ~10 % below the scans' 1e13 W/cm^2), CEP 0.7
/// rad, centred at +0.2 fs, 800 nm 5 fs (GaussianIrPulse defaults).
inline GaussianIrPulse perturbed_ir_pulse() {
  GaussianIrPulse ip;
  ip.peak_intensity_Wcm2 = 0.8e13;
  ip.cep_rad = 0.7;
  ip.center_fs = 0.2;
  return ip;
}

/// A spline IR and its coefficients.
struct FittedSplineIr {
  std::unique_ptr<SplineIrParametrization> ir;
  std::vector<double> coef;
};

/// A spline IR on `smp` with knots every `knot_spacing_au`, its coefficients fitted to the
/// Gaussian IR of parameters `theta` sampled on `smp`; the coefficients' amplitude scale is then
/// set to 0.1 a.u.
inline FittedSplineIr fitted_spline_ir(const IrSampling& smp, double knot_spacing_au,
                                       const std::vector<double>& theta) {
  FittedSplineIr s{std::make_unique<SplineIrParametrization>(smp, knot_spacing_au), {}};
  std::vector<double> A(smp.size);
  for (std::size_t i = 0; i < A.size(); ++i)
    A[i] = GaussianIrParametrization::value(theta.data(), smp.time(i));
  s.coef = s.ir->fit_samples(A);
  s.ir->set_amplitude_scale(0.1);
  return s;
}

/// Central differences of `f.evaluate(x, g)` (g = nullptr: value only) along each coordinate of
/// `coords` (step 1e-5 max(1, |x_k|)) against its hand-written gradient, relative to the
/// gradient's largest component: the worst over the coordinates (the standard check of
/// reverse-mode derivatives; J. Nocedal and S. J. Wright, Numerical Optimization, 2nd ed.
/// (2006), Sec. 8.1).
template <class Objective>
double worst_relative_gradient_error(const Objective& f, std::vector<double> x,
                                     const std::vector<std::size_t>& coords) {
  std::vector<double> g(x.size());
  f.evaluate(x.data(), g.data());
  double gmax = 0;
  for (double v : g) gmax = std::max(gmax, std::abs(v));
  double worst = 0;
  for (std::size_t k : coords) {
    const double h = 1e-5 * std::max(1.0, std::abs(x[k]));
    const double x0 = x[k];
    x[k] = x0 + h;
    const double fp = f.evaluate(x.data(), nullptr);
    x[k] = x0 - h;
    const double fm = f.evaluate(x.data(), nullptr);
    x[k] = x0;
    worst = std::max(worst, std::abs((fp - fm) / (2 * h) - g[k]) / gmax);
  }
  return worst;
}

}  // namespace sw::test
