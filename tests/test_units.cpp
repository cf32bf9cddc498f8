// Unit conversions (retrieval/core/units.h) against CODATA 2018 and textbook strong-field numbers.
#include <catch2/catch.hpp>

#include <cmath>
#include <numbers>

#include "retrieval/core/units.h"
#include "retrieval/physics/gas.h"

using namespace sw;

namespace {
// Exact SI defining constants (SI 2019, CODATA 2018), written out here so that the checks
// below do not reuse the header's derived numbers.
constexpr double kH = 6.62607015e-34;  // Planck constant, J s (exact)
constexpr double kHbar = kH / (2.0 * std::numbers::pi);
constexpr double kE = 1.602176634e-19;      // elementary charge, C (exact)
constexpr double kC = 299792458.0;          // speed of light, m/s (exact)
constexpr double kMe = 9.1093837015e-31;    // electron mass, kg (CODATA 2018)
constexpr double kEps0 = 8.8541878128e-12;  // vacuum permittivity, F/m (CODATA 2018)
}  // namespace

TEST_CASE("atomic units of energy and time match CODATA 2018", "[units]") {
  // CODATA 2018: E_h = 27.211 386 245 988 eV, hbar/E_h = 2.418 884 326 5857e-17 s.
  CHECK(units::au_to_eV(1.0) == Approx(27.211386245988).epsilon(1e-13));
  CHECK(units::eV_to_au(27.211386245988) == Approx(1.0).epsilon(1e-13));
  CHECK(units::au_to_fs(1.0) * 1e-15 == Approx(2.4188843265857e-17).epsilon(1e-13));
  // CODATA 2018: 1 fs = 1e-15 s / 2.4188843265857e-17 s = 41.341 373 335 au.
  CHECK(units::fs_to_au(1.0) == Approx(41.341373335).epsilon(1e-9));
  CHECK(units::as_to_au(1000.0) == Approx(units::fs_to_au(1.0)).epsilon(1e-13));
  // hbar / E_h from the exact SI constants and the CODATA 2018 Hartree energy in eV.
  CHECK(kHbar / (units::kHartree_eV * kE) == Approx(units::kAtomicTime_s).epsilon(1e-10));
  // Atomic unit of field E_h / (e a0) (CODATA 2018: 5.142 206 747 63e11 V/m).
  CHECK(units::kHartree_eV / units::kBohrRadius_m ==
        Approx(units::kAtomicField_V_per_m).epsilon(1e-10));
  // c in atomic units = 1/alpha (CODATA 2018: alpha^-1 = 137.035 999 084):
  // c * t_au / a0 from the SI values.
  CHECK(kC * units::kAtomicTime_s / units::kBohrRadius_m ==
        Approx(units::kSpeedOfLight_au).epsilon(1e-10));
}

TEST_CASE("Bohr orbit period is 2 pi a.u. ~ 152 as", "[units]") {
  // Bohr model (from memory, standard textbook value): the n = 1 orbital period of hydrogen is
  // 2 pi hbar^3 (4 pi eps0)^2 / (m e^4) = 2 pi a.u. of time ~ 152.0 as.
  CHECK(units::au_to_as(units::kTwoPi) == Approx(152.0).margin(0.05));
  // Same from SI: T = 2 pi a0 / v with v = alpha c, a0 from CODATA 2018.
  const double v = kC / units::kSpeedOfLight_au;
  CHECK(units::au_to_as(units::kTwoPi) ==
        Approx(2.0 * std::numbers::pi * units::kBohrRadius_m / v * 1e18).epsilon(1e-9));
}

TEST_CASE("photon energy and period of an 800 nm driver", "[units]") {
  // E = h c / lambda with the exact SI 2019 constants: 1.5498 eV at 800 nm.
  const double expected_eV = kH * kC / (800e-9 * kE);
  CHECK(expected_eV == Approx(1.5498).margin(1e-4));
  const double w = units::wavelength_nm_to_omega_au(800.0);
  CHECK(units::au_to_eV(w) == Approx(expected_eV).epsilon(1e-10));
  CHECK(units::omega_au_to_wavelength_nm(w) == Approx(800.0).epsilon(1e-12));
  // Optical period T = lambda / c = 2.6685 fs (exact c).
  CHECK(units::au_to_fs(units::period_au(w)) == Approx(800e-9 / kC * 1e15).epsilon(1e-10));
}

TEST_CASE("intensity <-> peak field: 3.51e16 W/cm^2 per au^2", "[units]") {
  // Atomic unit of intensity (1/2) eps0 c E_au^2 = 3.51e16 W/cm^2 (common practice, e.g. strong-
  // field reviews; three digits given there).
  CHECK(units::peak_field_au_to_intensity(1.0) == Approx(3.51e16).epsilon(5e-4));
  // Independent: (1/2) c eps0 E^2 in SI with E = 5.142 206 747 63e11 V/m (CODATA 2018).
  const double I_SI = 0.5 * kC * kEps0 * 5.14220674763e11 * 5.14220674763e11 * 1e-4;
  CHECK(units::peak_field_au_to_intensity(1.0) == Approx(I_SI).epsilon(1e-12));
  for (double I : {1e12, 3e13, 1e14, 1e15})
    CHECK(units::peak_field_au_to_intensity(units::intensity_to_peak_field_au(I)) ==
          Approx(I).epsilon(1e-12));
  // 1e14 W/cm^2 <-> E0 = sqrt(1e14 / 3.51e16) = 0.0534 a.u. (common practice).
  CHECK(units::intensity_to_peak_field_au(1e14) == Approx(0.0534).margin(1e-4));
}

TEST_CASE("ponderomotive energy follows Up = 9.337e-14 I lambda^2", "[units]") {
  // P. B. Corkum, Phys. Rev. Lett. 71, 1994 (1993): Up[eV] = 9.33e-14 I[W/cm^2] lambda^2[um^2]
  // (coefficient 9.337e-14 with the CODATA constants); checked to 0.1 %.
  struct Case {
    double I, lambda_nm;
  };
  for (Case c : {Case{1e14, 800.0}, Case{1.5e14, 800.0}, Case{5e13, 1800.0}, Case{3e14, 400.0}}) {
    const double w = units::wavelength_nm_to_omega_au(c.lambda_nm);
    const double up_eV = units::au_to_eV(units::ponderomotive_energy_au(c.I, w));
    const double lum = c.lambda_nm * 1e-3;
    CHECK(up_eV == Approx(9.337e-14 * c.I * lum * lum).epsilon(1e-3));
    // Independent SI evaluation Up = e^2 E0^2 / (4 m omega^2), E0 = sqrt(2 I / (c eps0)).
    const double E0 = std::sqrt(2.0 * c.I * 1e4 / (kC * kEps0));
    const double omega = 2.0 * std::numbers::pi * kC / (c.lambda_nm * 1e-9);
    const double up_SI_eV = kE * kE * E0 * E0 / (4.0 * kMe * omega * omega) / kE;
    CHECK(up_eV == Approx(up_SI_eV).epsilon(1e-8));
  }
}

TEST_CASE("HHG cutoff Ip + 3.17 Up for argon at 1.5e14 W/cm^2, 800 nm", "[units]") {
  // J. L. Krause, K. J. Schafer and K. C. Kulander, Phys. Rev. Lett. 68, 3535 (1992):
  // E_cutoff = Ip + 3.17 Up. Closed form with Corkum's Up = 9.337e-14 I lambda^2 (PRL 71, 1994
  // (1993)) and Ip(Ar) = 15.7596 eV (NIST ASD): 15.7596 + 3.17 * 9.337e-14 * 1.5e14 * 0.64.
  const double I = 1.5e14, lambda_um = 0.8;
  const double closed_form = 15.7596 + 3.17 * 9.337e-14 * I * lambda_um * lambda_um;
  const double w = units::wavelength_nm_to_omega_au(800.0);
  const double cutoff_eV = find_gas("Ar").ionization_energy_eV +
                           3.17 * units::au_to_eV(units::ponderomotive_energy_au(I, w));
  // Three significant digits, as many as the 3.17 coefficient carries.
  CHECK(cutoff_eV == Approx(closed_form).epsilon(1e-3));
  // The cutoff harmonic order is (Ip + 3.17 Up) / omega.
  CHECK(cutoff_eV / units::au_to_eV(w) == Approx(closed_form / 1.5498).epsilon(1e-3));
}

TEST_CASE("spectral-phase and attochirp conversions are consistent", "[units]") {
  // Definitions: 1 as^2 = (1 as / t_au)^2 a.u., 1 as/eV = (1 as / t_au) / (1 eV / E_h) a.u.
  const double t_as = units::kAtomicTime_as;
  CHECK(units::as2_to_au(1.0) == Approx(1.0 / (t_as * t_as)).epsilon(1e-13));
  CHECK(units::as3_to_au(1.0) == Approx(1.0 / (t_as * t_as * t_as)).epsilon(1e-13));
  CHECK(units::au_to_as2(units::as2_to_au(1234.5)) == Approx(1234.5).epsilon(1e-13));
  CHECK(units::au_to_as3(units::as3_to_au(-5.0e4)) == Approx(-5.0e4).epsilon(1e-13));
  CHECK(units::as_per_eV_to_au(1.0) == Approx(units::kHartree_eV / t_as).epsilon(1e-13));
  CHECK(units::au_to_as_per_eV(units::as_per_eV_to_au(10.2)) == Approx(10.2).epsilon(1e-13));
  // Free-electron momentum p = sqrt(2 W): 1 Hartree of kinetic energy <-> p = sqrt(2).
  CHECK(units::momentum_au(1.0) == Approx(std::sqrt(2.0)).epsilon(1e-15));
  CHECK(units::momentum_au(-1.0) == 0.0);
}
