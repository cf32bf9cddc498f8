#include "retrieval/physics/atomic_delay.h"

#include <cmath>
#include <sstream>

#include "retrieval/core/enum_names.h"
#include "retrieval/core/error.h"
#include "retrieval/core/format.h"
#include "retrieval/core/units.h"

namespace sw {

namespace {

using cplx = std::complex<double>;

constexpr double kHalfLog2Pi = 0.91893853320467274178;  // ln(2 pi) / 2

// Lanczos coefficients for g = 7, n = 9.
constexpr double kLanczosG = 7.0;
constexpr double kLanczos[9] = {0.99999999999980993,  676.5203681218851,     -1259.1392167224028,
                                771.32342877765313,   -176.61502916214059,   12.507343278686905,
                                -0.13857109526572012, 9.9843695780195716e-6, 1.5056327351493116e-7};

// Bernoulli numbers B_2 .. B_20.
constexpr double kBernoulli[10] = {1.0 / 6.0,       -1.0 / 30.0,      1.0 / 42.0, -1.0 / 30.0,
                                   5.0 / 66.0,      -691.0 / 2730.0,  7.0 / 6.0,  -3617.0 / 510.0,
                                   43867.0 / 798.0, -174611.0 / 330.0};

constexpr double kShiftTarget = 20.0;

}  // namespace

std::complex<double> log_gamma(std::complex<double> z) {
  if (z.real() < 0.5) {
    // Reflection: Gamma(z) Gamma(1 - z) = pi / sin(pi z).
    return std::log(units::kPi) - std::log(std::sin(units::kPi * z)) - log_gamma(1.0 - z);
  }
  z -= 1.0;
  cplx a = kLanczos[0];
  for (int k = 1; k < 9; ++k) a += kLanczos[k] / (z + static_cast<double>(k));
  const cplx t = z + kLanczosG + 0.5;
  return kHalfLog2Pi + (z + 0.5) * std::log(t) - t + std::log(a);
}

std::complex<double> log_gamma_stirling(std::complex<double> z) {
  if (!(z.real() > 0.0))
    throw usage_error("log_gamma_stirling: Re z = " + format_g(z.real()) +
                      " is invalid: the Stirling evaluation needs Re z > 0.");
  cplx shift = 0.0;
  while (z.real() < kShiftTarget) {
    shift += std::log(z);
    z += 1.0;
  }
  const cplx inv = 1.0 / z, inv2 = inv * inv;
  cplx series = 0.0, pw = inv;  // z^{-(2n-1)}
  for (int n = 1; n <= 10; ++n) {
    series += kBernoulli[n - 1] / (2.0 * n * (2.0 * n - 1.0)) * pw;
    pw *= inv2;
  }
  return (z - 0.5) * std::log(z) - z + kHalfLog2Pi + series - shift;
}

std::complex<double> digamma(std::complex<double> z) {
  if (!(z.real() > 0.0))
    throw usage_error("digamma: Re z = " + format_g(z.real()) + " is invalid: it must be > 0.");
  cplx shift = 0.0;
  while (z.real() < kShiftTarget) {
    shift += 1.0 / z;
    z += 1.0;
  }
  const cplx inv2 = 1.0 / (z * z);
  cplx series = 0.0, pw = inv2;  // z^{-2n}
  for (int n = 1; n <= 10; ++n) {
    series += kBernoulli[n - 1] / (2.0 * n) * pw;
    pw *= inv2;
  }
  return std::log(z) - 0.5 / z - series - shift;
}

double coulomb_phase(int l, double k_au, double charge) {
  return log_gamma(cplx(l + 1.0, -charge / k_au)).imag();
}

double coulomb_wigner_delay_derivative_au(int l, double kinetic_energy_au, double charge) {
  const double k = std::sqrt(2.0 * kinetic_energy_au);
  return charge * digamma(cplx(l + 1.0, -charge / k)).real() / (k * k * k);
}

double continuum_continuum_phase(double k, double kappa, double Z) {
  if (!(k > 0.0) || !(kappa > 0.0) || k == kappa)
    throw usage_error("continuum_continuum_phase: momenta k = " + format_g(k) + ", kappa = " +
                      format_g(kappa) + " are invalid: both must be > 0 a.u. and differ.");
  const double eta = Z * (1.0 / kappa - 1.0 / k);
  double phase = Z / kappa * std::log(2.0 * kappa) - Z / k * std::log(2.0 * k);
  phase += log_gamma(cplx(2.0, eta)).imag();
  phase -= eta * std::log(std::abs(kappa - k));
  // Long-range amplitude correction (first 1/r term of the asymptotic Coulomb waves).
  const cplx gamma_corr = 1.0 + cplx(0.0, 0.5 * Z) * (kappa - k) *
                                    (1.0 / (kappa * kappa) + 1.0 / (k * k)) / cplx(1.0, eta);
  return phase + std::arg(gamma_corr);
}

double continuum_continuum_delay_au(double W, double omega, double Z) {
  if (!(omega > 0.0) || !(W > omega))
    throw usage_error("continuum_continuum_delay_au: sideband kinetic energy " +
                      format_g(units::au_to_eV(W)) + " eV must exceed the IR photon energy " +
                      format_g(units::au_to_eV(omega)) +
                      " eV (both intermediate states must be in the continuum).");
  const double k = std::sqrt(2.0 * W);
  const double kp = std::sqrt(2.0 * (W + omega)), km = std::sqrt(2.0 * (W - omega));
  return (continuum_continuum_phase(k, kp, Z) - continuum_continuum_phase(k, km, Z)) /
         (2.0 * omega);
}

double coulomb_wigner_delay_au(int l, double W, double omega, double Z) {
  if (!(omega > 0.0) || !(W > omega))
    throw usage_error("coulomb_wigner_delay_au: sideband kinetic energy " +
                      format_g(units::au_to_eV(W)) + " eV must exceed the IR photon energy " +
                      format_g(units::au_to_eV(omega)) + " eV.");
  const double kp = std::sqrt(2.0 * (W + omega)), km = std::sqrt(2.0 * (W - omega));
  return (coulomb_phase(l, kp, Z) - coulomb_phase(l, km, Z)) / (2.0 * omega);
}

constexpr EnumNames<AtomicDelayMode, 2> kAtomicDelayModeNames{
    {{{AtomicDelayMode::kAuto, "auto"}, {AtomicDelayMode::kNone, "none"}}}};

SW_ENUM_NAME_FUNCTIONS(AtomicDelayMode, parse_atomic_delay_mode, kAtomicDelayModeNames)

std::string AtomicDelayOptions::validate() const {
  if (channel_l < -1 || channel_l > 6)
    return "channel_l = " + std::to_string(channel_l) +
           " is invalid: it must be -1 (automatic) or an angular momentum 0..6.";
  if (!(charge > 0.0) || !std::isfinite(charge))
    return "charge = " + format_g(charge) + " is invalid: it must be a finite ion charge > 0.";
  return {};
}

AtomicDelay sideband_atomic_delay(const Gas& gas, double W, double omega,
                                  const AtomicDelayOptions& o) {
  const std::string bad = o.validate();
  if (!bad.empty()) throw usage_error("atomic delay options: " + bad);
  AtomicDelay d;
  d.channel_l = o.channel_l >= 0 ? o.channel_l : gas.valence_l + 1;
  if (o.mode == AtomicDelayMode::kNone) {
    d.description = "none (atomic delays not subtracted)";
    return d;
  }
  if (!(W > omega)) {
    d.description = "not applied: sideband within one IR photon of threshold";
    return d;
  }
  std::ostringstream os;
  if (o.include_wigner) {
    d.wigner_as = units::au_to_as(coulomb_wigner_delay_au(d.channel_l, W, omega, o.charge));
    os << "Wigner delay of the hydrogenic Coulomb phase (l = " << d.channel_l
       << ", Z = " << o.charge << ")";
  }
  if (o.include_continuum_continuum) {
    d.continuum_continuum_as = units::au_to_as(continuum_continuum_delay_au(W, omega, o.charge));
    os << (o.include_wigner ? " + " : "")
       << "continuum-continuum delay (asymptotic formula, Dahlstrom et al. 2012)";
  }
  d.total_as = d.wigner_as + d.continuum_continuum_as;
  d.applied = o.include_wigner || o.include_continuum_continuum;
  d.description = d.applied ? os.str() : "none (both parts excluded)";
  return d;
}

}  // namespace sw
