// Atomic delays: complex Gamma and digamma, Coulomb phases, Wigner and continuum-continuum
// delays of RABBITT sidebands.
#include <catch2/catch.hpp>

#include <cmath>
#include <complex>

#include "retrieval/core/error.h"
#include "retrieval/core/units.h"
#include "retrieval/physics/atomic_delay.h"
#include "retrieval/physics/gas.h"

using namespace sw;
using cplx = std::complex<double>;

namespace {
constexpr double kEulerGamma = 0.57721566490153286061;  // Euler-Mascheroni constant

// arg Gamma(1 + iy) from the Weierstrass product: -gamma y + sum_n (y/n - atan(y/n))
// (Abramowitz and Stegun 6.1.3 with z = 1 + iy), summed to N terms plus the tail
// sum_{n>N} y^3 / (3 n^3) ~ y^3 / (6 N^2).
double arg_gamma_series(double y) {
  const int N = 200000;
  double s = -kEulerGamma * y;
  for (int n = 1; n <= N; ++n) s += y / n - std::atan(y / n);
  return s + y * y * y / (6.0 * N * static_cast<double>(N));
}

// Coulomb-laser coupling delay of streaking, t_CLC = (Z / k^3) [2 - ln(E T_IR)] (from memory:
// S. Nagele et al., J. Phys. B 44, 081001 (2011); R. Pazourek, S. Nagele and J. Burgdorfer,
// Rev. Mod. Phys. 87, 765 (2015)): a classical-trajectory estimate of the same
// measurement-induced delay, derived independently of the asymptotic two-photon formula.
double clc_delay_au(double W, double omega) {
  const double k = std::sqrt(2.0 * W);
  return (2.0 - std::log(W * units::period_au(omega))) / (k * k * k);
}
}  // namespace

TEST_CASE("arg Gamma(1 + i) from three independent evaluations", "[atomic_delay]") {
  // -0.301640320467534: from memory / standard tables (Abramowitz and Stegun, Table 6.7).
  const double table = -0.301640320467534;
  CHECK(log_gamma(cplx(1, 1)).imag() == Approx(table).margin(1e-13));
  CHECK(log_gamma_stirling(cplx(1, 1)).imag() == Approx(table).margin(1e-13));
  CHECK(arg_gamma_series(1.0) == Approx(table).margin(1e-9));
}

TEST_CASE("log Gamma: Lanczos against Stirling, exact values and the modulus identity",
          "[atomic_delay]") {
  // Gamma(1/2) = sqrt(pi), Gamma(5) = 24 (exact).
  CHECK(log_gamma(cplx(0.5, 0)).real() == Approx(0.5 * std::log(units::kPi)).margin(1e-13));
  CHECK(log_gamma(cplx(5, 0)).real() == Approx(std::log(24.0)).margin(1e-13));
  // |Gamma(1 + iy)|^2 = pi y / sinh(pi y) (Abramowitz and Stegun 6.1.31).
  for (double y : {0.3, 2.0, 6.0}) {
    const double expect = 0.5 * std::log(units::kPi * y / std::sinh(units::kPi * y));
    CHECK(log_gamma(cplx(1, y)).real() == Approx(expect).margin(1e-12));
  }
  // Two methods over the region the Coulomb phases use (Re z = 1..4, |Im z| up to 8), and a
  // point that goes through the reflection formula (Re z < 1/2).
  for (double re : {0.25, 1.0, 2.0, 3.0, 4.0})
    for (double im : {-8.0, -3.0, -0.7, 0.4, 5.0}) {
      const cplx a = log_gamma(cplx(re, im)), b = log_gamma_stirling(cplx(re, im));
      CHECK(a.real() == Approx(b.real()).margin(1e-11));
      CHECK(a.imag() == Approx(b.imag()).margin(1e-11));
    }
  CHECK_THROWS_AS(log_gamma_stirling(cplx(-1.0, 0.5)), Error);
}

TEST_CASE("digamma: exact values, the imaginary-part identity and d log Gamma / dz",
          "[atomic_delay]") {
  // psi(1) = -gamma, psi(1/2) = -gamma - 2 ln 2 (Abramowitz and Stegun 6.3.2, 6.3.3).
  CHECK(digamma(cplx(1, 0)).real() == Approx(-kEulerGamma).margin(1e-13));
  CHECK(digamma(cplx(0.5, 0)).real() == Approx(-kEulerGamma - 2 * std::log(2.0)).margin(1e-13));
  // Im psi(1 + iy) = -1/(2y) + (pi/2) coth(pi y) (Abramowitz and Stegun 6.3.13).
  for (double y : {0.4, 1.7}) {
    const double expect = -0.5 / y + 0.5 * units::kPi / std::tanh(units::kPi * y);
    CHECK(digamma(cplx(1, y)).imag() == Approx(expect).margin(1e-12));
  }
  // Derivative of log Gamma by a central difference.
  const cplx z(2.0, -0.8);
  const double h = 1e-5;
  const cplx fd = (log_gamma(z + h) - log_gamma(z - h)) / (2 * h);
  CHECK(digamma(z).real() == Approx(fd.real()).margin(1e-8));
  CHECK(digamma(z).imag() == Approx(fd.imag()).margin(1e-8));
}

TEST_CASE("Coulomb phases: l recurrence and the Wigner delay derivative", "[atomic_delay]") {
  // sigma_{l+1} - sigma_l = arg(l + 1 + i eta) with eta = -Z/k (from Gamma(z + 1) = z Gamma(z);
  // DLMF 33.2.10 defines sigma_l = arg Gamma(l + 1 + i eta)).
  for (double k : {0.3, 0.9, 2.0})
    for (int l : {0, 1, 2}) {
      const double diff = coulomb_phase(l + 1, k) - coulomb_phase(l, k);
      CHECK(diff == Approx(-std::atan(1.0 / (k * (l + 1)))).margin(1e-12));
    }
  // d sigma / dE against a finite difference in energy.
  for (double E_eV : {3.0, 10.0, 40.0}) {
    const double W = units::eV_to_au(E_eV), h = 1e-5;
    const double fd =
        (coulomb_phase(2, std::sqrt(2 * (W + h))) - coulomb_phase(2, std::sqrt(2 * (W - h)))) /
        (2 * h);
    CHECK(coulomb_wigner_delay_derivative_au(2, W) == Approx(fd).epsilon(1e-6));
  }
  // The RABBITT finite difference over 2 omega approaches the derivative at high energy.
  const double w = units::wavelength_nm_to_omega_au(800.0);
  const double W = units::eV_to_au(40.0);
  CHECK(coulomb_wigner_delay_au(1, W, w) ==
        Approx(coulomb_wigner_delay_derivative_au(1, W)).epsilon(0.02));
  // An attractive Coulomb tail delays p waves (positive delay, decreasing with energy).
  CHECK(coulomb_wigner_delay_au(1, units::eV_to_au(5.0), w) >
        coulomb_wigner_delay_au(1, units::eV_to_au(20.0), w));
  CHECK(coulomb_wigner_delay_au(1, units::eV_to_au(20.0), w) > 0.0);
}

TEST_CASE("continuum-continuum delay against the Coulomb-laser coupling estimate",
          "[atomic_delay]") {
  // The asymptotic two-photon formula (Dahlstrom, L'Huillier and Maquet, J. Phys. B 45, 183001
  // (2012)) and the classical t_CLC estimate describe the same measurement-induced delay; they
  // agree to a few per cent when the lower intermediate state is well above threshold
  // (W > 2.5 hbar omega; both are asymptotic, large-k approximations). Tolerance
  // 10 %: a wrong sign of the long-range amplitude correction would move tau_cc by more than 50 %
  // at 10 eV.
  for (double lambda : {800.0, 400.0}) {
    const double w = units::wavelength_nm_to_omega_au(lambda);
    for (double E_eV : {5.0, 10.0, 20.0, 40.0}) {
      if (units::eV_to_au(E_eV) <= 2.5 * w) continue;
      const double W = units::eV_to_au(E_eV);
      const double cc = continuum_continuum_delay_au(W, w);
      INFO("lambda " << lambda << " nm, E " << E_eV << " eV: tau_cc " << units::au_to_as(cc)
                     << " as, t_CLC " << units::au_to_as(clc_delay_au(W, w)) << " as");
      CHECK(cc == Approx(clc_delay_au(W, w)).epsilon(0.10));
      CHECK(cc < 0.0);  // the probing process advances the apparent emission
    }
  }
  // Universal: it shrinks with energy and grows with the IR period (fixed energy).
  const double w800 = units::wavelength_nm_to_omega_au(800.0);
  CHECK(std::abs(continuum_continuum_delay_au(units::eV_to_au(30), w800)) <
        std::abs(continuum_continuum_delay_au(units::eV_to_au(10), w800)));
  CHECK(continuum_continuum_delay_au(units::eV_to_au(20), w800) <
        continuum_continuum_delay_au(units::eV_to_au(20), units::wavelength_nm_to_omega_au(400)));
  CHECK_THROWS_AS(continuum_continuum_delay_au(0.5 * w800, w800), Error);
}

TEST_CASE("sideband atomic delay: channel choice, modes and option validation", "[atomic_delay]") {
  const double w = units::wavelength_nm_to_omega_au(800.0);
  const double W = units::eV_to_au(15.0);
  AtomicDelayOptions o;
  CHECK(o.validate().empty());
  const AtomicDelay ar = sideband_atomic_delay(find_gas("Ar"), W, w, o);
  CHECK(ar.applied);
  CHECK(ar.channel_l == 2);  // 3p -> d (Fano's propensity rule, Phys. Rev. A 32, 617 (1985))
  CHECK(sideband_atomic_delay(find_gas("He"), W, w, o).channel_l == 1);  // 1s -> p
  CHECK(ar.total_as == Approx(ar.wigner_as + ar.continuum_continuum_as));
  CHECK(ar.continuum_continuum_as == Approx(units::au_to_as(continuum_continuum_delay_au(W, w))));
  CHECK(ar.wigner_as == Approx(units::au_to_as(coulomb_wigner_delay_au(2, W, w))));

  o.include_wigner = false;
  CHECK(sideband_atomic_delay(find_gas("Ar"), W, w, o).wigner_as == 0.0);
  o.mode = AtomicDelayMode::kNone;
  const AtomicDelay none = sideband_atomic_delay(find_gas("Ar"), W, w, o);
  CHECK_FALSE(none.applied);
  CHECK(none.total_as == 0.0);
  o.mode = AtomicDelayMode::kAuto;
  CHECK_FALSE(sideband_atomic_delay(find_gas("Ar"), 0.8 * w, w, o).applied);

  AtomicDelayMode m;
  CHECK(parse_atomic_delay_mode("none", &m));
  CHECK(m == AtomicDelayMode::kNone);
  CHECK(std::string(to_string(AtomicDelayMode::kAuto)) == "auto");
  CHECK_FALSE(parse_atomic_delay_mode("maybe", &m));

  o.channel_l = 9;
  CHECK_THAT(o.validate(), Catch::Contains("channel_l = 9"));
  CHECK_THROWS_WITH(sideband_atomic_delay(find_gas("Ar"), W, w, o), Catch::Contains("channel_l"));
  o.channel_l = -1;
  o.charge = 0.0;
  CHECK_THAT(o.validate(), Catch::Contains("charge"));
}
