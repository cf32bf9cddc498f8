// Forward model: classical streaking, CMA vs full model, FFT model vs direct quadrature.
#include <catch2/catch.hpp>

#include <cmath>

#include "retrieval/forward_model.h"
#include "retrieval/units.h"

using namespace sw;

namespace {
XuvField gaussian_xuv(const TimeGrid& g, double carrier_eV, double fwhm_as, double chirp = 0.0) {
  CVec env(g.size());
  const double tf = units::as_to_au(fwhm_as);
  for (std::size_t i = 0; i < g.size(); ++i) {
    const double t = g.time(i);
    env[i] = std::exp(-2 * std::log(2.) * t * t / (tf * tf)) * std::polar(1.0, chirp * t * t / (tf * tf));
  }
  return XuvField(g, units::eV_to_au(carrier_eV), env);
}
std::vector<double> axis(double first, double step, int n) {
  std::vector<double> v(n);
  for (int i = 0; i < n; ++i) v[i] = first + step * i;
  return v;
}
}  // namespace

TEST_CASE("energy centroid follows W0 - p0 A(tau)", "[forward]") {
  // Classical streaking: final momentum p_f = p_i - A(t_i) (DESIGN.md; Itatani et al.,
  // PRL 88, 173903 (2002)); to first order in A the centroid is W0 - p0 A(tau). Tolerance,
  // derived rather than tuned: the neglected second-order term A^2/2 is at most A0^2/2
  // (0.57 eV here), the p-weighted (Jacobian) spectrum's mean sits sigma_W^2/(2 W0) above W0
  // (0.18 eV for 12 eV FWHM at 73 eV), and averaging A over the 150 as pulse moves the shift by
  // ~1 % of p0 A0 (0.1 eV).
  const double ip = units::eV_to_au(21.5645);
  const TimeGrid g = TimeGrid::for_energy_step(1024, units::eV_to_au(0.25));
  const XuvField x = gaussian_xuv(g, 95.0, 150.0);
  GaussianIrPulse P;
  P.peak_intensity_Wcm2 = 5e12;
  const IrField ir = make_gaussian_ir(P, units::fs_to_au(-20), units::fs_to_au(20), units::as_to_au(20));
  const auto W = axis(units::eV_to_au(40), units::eV_to_au(0.25), 300);
  const auto D = axis(units::fs_to_au(-6), units::fs_to_au(0.1), 121);
  const double W0 = units::eV_to_au(95.0) - ip, p0 = std::sqrt(2 * W0);
  ForwardModelOptions o;
  o.central_momentum_au = p0;
  const Eigen::MatrixXd S = ForwardModel(ip, DipoleModel(), o).trace(x, ir, D, W);
  double max_shift = 0;
  for (std::size_t i = 0; i < D.size(); ++i) {
    double num = 0, den = 0;
    for (std::size_t j = 0; j < W.size(); ++j) {
      num += S(i, j) * W[j];
      den += S(i, j);
    }
    const double classical = W0 - p0 * ir.vector_potential_at(D[i]);
    max_shift = std::max(max_shift, std::abs(classical - W0));
    const double A0 = ir.peak_vector_potential(), sW = units::eV_to_au(12.2 / units::kFwhmPerSigma);
    const double tol = 0.5 * A0 * A0 + sW * sW / (2 * W0) + 0.01 * p0 * A0;
    CHECK(std::abs(num / den - classical) < tol);
  }
  CHECK(units::au_to_eV(max_shift) > 9.0);  // the sweep really streaks by ~ +-p0 A0
}

TEST_CASE("full model equals direct quadrature of the SFA integral", "[forward]") {
  // Independent path: brute-force Riemann sum of DESIGN.md's amplitude with the exact p
  // dependence and the hydrogenic dipole (Lewenstein et al., PRA 49, 2117 (1994)).
  const double ip = units::eV_to_au(21.5645);
  const TimeGrid g = TimeGrid::for_energy_step(1024, units::eV_to_au(0.25));
  const double tf = units::as_to_au(100), wc = units::eV_to_au(95.0);
  const XuvField x = gaussian_xuv(g, 95.0, 100.0, 0.3);
  GaussianIrPulse P;
  P.peak_intensity_Wcm2 = 1e13;
  const IrField ir = make_gaussian_ir(P, units::fs_to_au(-20), units::fs_to_au(20), units::as_to_au(10));
  const DipoleModel d(DipoleKind::kHydrogenic, ip, 2.3);
  const auto W = axis(units::eV_to_au(40), units::eV_to_au(0.25), 300);
  const std::vector<double> D = {units::fs_to_au(-0.7), units::fs_to_au(0.33)};
  ForwardModelOptions o;
  o.momentum = MomentumModel::kFull;
  const Eigen::MatrixXcd a = ForwardModel(ip, d, o).amplitude(x, ir, D, W);
  double err = 0, amax = 0;
  for (std::size_t i = 0; i < D.size(); ++i)
    for (std::size_t j = 0; j < W.size(); j += 7) {
      const double p = std::sqrt(2 * W[j]);
      std::complex<double> acc = 0;
      const double h = 0.05;
      for (double s = -300; s <= 300; s += h) {
        const auto v = ir.at(s + D[i]);
        const auto ex = std::exp(-2 * std::log(2.) * s * s / (tf * tf)) *
                        std::polar(1.0, 0.3 * s * s / (tf * tf) - wc * s);
        acc += ex * d(p + v.A) * std::polar(1.0, -p * v.I1 - 0.5 * v.I2 + (W[j] + ip) * (s + D[i])) * h;
      }
      acc *= std::complex<double>(0, -1);
      err = std::max(err, std::abs(acc - a(i, j)));
      amax = std::max(amax, std::abs(acc));
    }
  CHECK(err / amax < 1e-5);
}
