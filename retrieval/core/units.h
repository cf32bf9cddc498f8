#pragma once
// Physical constants and unit conversions. The engine works in Hartree atomic units
// (hbar = e = m_e = 4*pi*eps0 = 1); every boundary (files, CLI, reports) speaks eV, fs, as,
// nm and W/cm^2. All conversions in the project go through this header.
//
// Values: CODATA 2018 recommended values (E. Tiesinga, P. J. Mohr, D. B. Newell and
// B. N. Taylor, Rev. Mod. Phys. 93, 025010 (2021)), each named at its use below.

#include <cmath>
#include <numbers>

namespace sw::units {

// --- CODATA 2018 -----------------------------------------------------------------------
/// Hartree energy E_h in eV (CODATA 2018: 27.211 386 245 988 eV).
inline constexpr double kHartree_eV = 27.211386245988;
/// Atomic unit of time hbar/E_h in seconds (CODATA 2018: 2.418 884 326 5857e-17 s).
inline constexpr double kAtomicTime_s = 2.4188843265857e-17;
/// Atomic unit of time in attoseconds and femtoseconds (same CODATA 2018 value).
inline constexpr double kAtomicTime_as = 24.188843265857;
inline constexpr double kAtomicTime_fs = 0.024188843265857;
/// Atomic unit of electric field E_h/(e a0) in V/m (CODATA 2018: 5.142 206 747 63e11 V/m).
inline constexpr double kAtomicField_V_per_m = 5.14220674763e11;
/// Bohr radius a0 in metres (CODATA 2018: 5.291 772 109 03e-11 m).
inline constexpr double kBohrRadius_m = 5.29177210903e-11;
/// Speed of light in vacuum (exact, SI 2019) in m/s.
inline constexpr double kSpeedOfLight_m_per_s = 299792458.0;
/// Electron mass m_e in kg (CODATA 2018: 9.109 383 7015e-31 kg).
inline constexpr double kElectronMass_kg = 9.1093837015e-31;
/// Elementary charge e in C (exact, SI 2019: 1.602 176 634e-19 C).
inline constexpr double kElementaryCharge_C = 1.602176634e-19;
/// Inverse fine-structure constant (CODATA 2018: 137.035 999 084) = c in atomic units.
inline constexpr double kSpeedOfLight_au = 137.035999084;
/// Vacuum permittivity eps0 in F/m (CODATA 2018: 8.854 187 8128e-12 F/m).
inline constexpr double kVacuumPermittivity_F_per_m = 8.8541878128e-12;
/// h*c/e in eV*nm, from the exact SI values of h, c and e (CODATA 2018): 1239.841 984 eV nm.
inline constexpr double kPlanckC_eV_nm = 1239.8419843320025;
/// Cycle-averaged intensity of a linearly polarised field of peak amplitude 1 a.u.:
/// I = (1/2) c eps0 E^2 with the CODATA 2018 values above = 3.509 445e16 W/cm^2.
inline constexpr double kAtomicIntensity_W_per_cm2 =
    0.5 * kSpeedOfLight_m_per_s * kVacuumPermittivity_F_per_m * kAtomicField_V_per_m *
    kAtomicField_V_per_m * 1e-4;

inline constexpr double kPi = std::numbers::pi;
inline constexpr double kTwoPi = 2.0 * std::numbers::pi;
/// 2*sqrt(2*ln 2): ratio of a Gaussian's FWHM to its standard deviation.
inline constexpr double kFwhmPerSigma = 2.3548200450309493;

// --- energy -----------------------------------------------------------------------------
constexpr double eV_to_au(double eV) { return eV / kHartree_eV; }
constexpr double au_to_eV(double au) { return au * kHartree_eV; }

// --- time -------------------------------------------------------------------------------
constexpr double fs_to_au(double fs) { return fs / kAtomicTime_fs; }
constexpr double au_to_fs(double au) { return au * kAtomicTime_fs; }
constexpr double as_to_au(double as) { return as / kAtomicTime_as; }
constexpr double au_to_as(double au) { return au * kAtomicTime_as; }

// --- spectral-phase coefficients (GDD in as^2, TOD in as^3) ----------------------------
constexpr double as2_to_au(double as2) { return as2 / (kAtomicTime_as * kAtomicTime_as); }
constexpr double au_to_as2(double au) { return au * kAtomicTime_as * kAtomicTime_as; }
constexpr double as3_to_au(double as3) {
  return as3 / (kAtomicTime_as * kAtomicTime_as * kAtomicTime_as);
}
constexpr double au_to_as3(double au) {
  return au * kAtomicTime_as * kAtomicTime_as * kAtomicTime_as;
}
/// Group delay per photon energy (attochirp) in as/eV <-> atomic units (time/energy).
constexpr double as_per_eV_to_au(double v) { return as_to_au(v) / eV_to_au(1.0); }
constexpr double au_to_as_per_eV(double v) { return au_to_as(v) * eV_to_au(1.0); }

// --- light ------------------------------------------------------------------------------
/// Photon energy (a.u., = angular frequency in a.u.) of vacuum wavelength lambda in nm.
constexpr double wavelength_nm_to_omega_au(double nm) { return eV_to_au(kPlanckC_eV_nm / nm); }
constexpr double omega_au_to_wavelength_nm(double w) { return kPlanckC_eV_nm / au_to_eV(w); }
/// Optical period in a.u. of a field of angular frequency omega (a.u.).
constexpr double period_au(double omega_au) { return kTwoPi / omega_au; }

/// Delay (fs) produced by travel x (um) of a retro-reflecting delay stage: the path changes by
/// 2 x, so dt = 2 x / c with c exact (SI 2019); 1 um -> 6.671 fs.
constexpr double stage_travel_um_to_fs(double um) {
  return 2.0 * um * 1e-6 / kSpeedOfLight_m_per_s * 1e15;
}

// --- intensity and field ----------------------------------------------------------------
/// Peak field (a.u.) of a linearly polarised pulse of peak cycle-averaged intensity I (W/cm^2).
inline double intensity_to_peak_field_au(double I_W_cm2) {
  return std::sqrt(I_W_cm2 / kAtomicIntensity_W_per_cm2);
}
inline double peak_field_au_to_intensity(double E0_au) {
  return E0_au * E0_au * kAtomicIntensity_W_per_cm2;
}
/// Ponderomotive energy Up = E0^2 / (4 omega^2) (a.u.), linear polarisation.
inline double ponderomotive_energy_au(double I_W_cm2, double omega_au) {
  double E0 = intensity_to_peak_field_au(I_W_cm2);
  return E0 * E0 / (4.0 * omega_au * omega_au);
}

// --- momentum ---------------------------------------------------------------------------
/// Free-electron momentum (a.u.) of kinetic energy W (a.u.): p = sqrt(2 W).
inline double momentum_au(double W_au) { return W_au > 0 ? std::sqrt(2.0 * W_au) : 0.0; }

}  // namespace sw::units
