#include "synthetic/truth.h"

#include <algorithm>
#include <climits>
#include <cmath>
#include <complex>
#include <sstream>

#include "retrieval/core/units.h"
#include "retrieval/physics/gas.h"
#include "retrieval/physics/xuv_builders.h"
#include "synthetic/config_fields.h"

namespace sw::synthetic {

VerdictSection classify_bursts(const BurstStructure& b, const VerdictThresholds& t) {
  VerdictSection v;
  v.satellite_intensity_ratio = b.satellite_intensity_ratio;
  v.main_burst_energy_fraction = b.main_burst_energy_fraction;
  v.evidence.push_back({"comparable_bursts", static_cast<long long>(b.comparable_bursts)});
  v.evidence.push_back({"satellite_intensity_ratio", b.satellite_intensity_ratio});
  v.evidence.push_back({"main_burst_energy_fraction", b.main_burst_energy_fraction});
  std::ostringstream r;
  if (b.comparable_bursts >= t.train_min_bursts) {
    v.pulse_class = PulseClass::kTrain;
    r << b.comparable_bursts << " bursts spaced by half the driver period reach >= 50 % of the "
      << "main burst's peak intensity (train threshold " << t.train_min_bursts << ")";
  } else if (b.satellite_intensity_ratio <= t.isolated_max_satellite) {
    v.pulse_class = PulseClass::kIsolated;
    r << "largest satellite at about +-T/2 has " << 100 * b.satellite_intensity_ratio
      << " % of the main burst's peak intensity (isolated threshold "
      << 100 * t.isolated_max_satellite << " %)";
  } else if (b.satellite_intensity_ratio < t.satellites_max_ratio) {
    v.pulse_class = PulseClass::kIsolatedWithSatellites;
    r << "largest satellite at about +-T/2 has " << 100 * b.satellite_intensity_ratio
      << " % of the main burst's peak intensity (between " << 100 * t.isolated_max_satellite
      << " % and " << 100 * t.satellites_max_ratio << " %)";
  } else {
    v.pulse_class = PulseClass::kUndetermined;
    r << "a satellite reaches " << 100 * b.satellite_intensity_ratio
      << " % of the main burst but fewer than " << t.train_min_bursts
      << " bursts are comparable: neither one dominant burst nor a train";
  }
  v.reason = "true field of the generator: " + r.str();
  return v;
}

double truth_driver_period_au(const ScanConfig& c) {
  double nm = 800.0;
  if (c.xuv.kind == XuvKind::kTrain)
    nm = c.xuv.train.driver_wavelength_nm;
  else if (c.xuv.kind == XuvKind::kSatellites)
    nm = c.xuv.satellites.driver_wavelength_nm;
  else if (c.ir.kind == IrKind::kGaussian)
    nm = c.ir.pulse.wavelength_nm;
  return driver_period_au(nm);
}

double comb_burst_fwhm_as(const std::vector<int>& orders,
                          const std::vector<std::complex<double>>& amplitudes, double omega_au,
                          bool flat_phase) {
  // |E(t)|^2 of E = sum_q a_q exp(-i q omega t) over one half period (its period for odd q).
  const int n = 4096;
  const double T2 = 0.5 * units::period_au(omega_au);
  std::vector<double> I(n);
  for (int i = 0; i < n; ++i) {
    const double t = T2 * i / n;
    std::complex<double> e = 0.0;
    for (std::size_t k = 0; k < orders.size(); ++k)
      e += (flat_phase ? std::complex<double>(std::abs(amplitudes[k]), 0.0) : amplitudes[k]) *
           std::polar(1.0, -orders[k] * omega_au * t);
    I[i] = std::norm(e);
  }
  return units::au_to_as(periodic_main_peak_fwhm(I, T2 / n));
}

bool measurable_train_burst_fwhm_as(const ScanConfig& c, const XuvField& one, double* fwhm_as,
                                    double* tl_fwhm_as) {
  const double w = units::wavelength_nm_to_omega_au(c.xuv.train.driver_wavelength_nm);
  const double ip = units::eV_to_au(find_gas(c.gas).ionization_energy_eV);
  const std::vector<double> axis = c.geometry.energies_eV();
  if (axis.size() < 2) return false;
  const double lo = units::eV_to_au(axis.front()) + 0.5 * w;
  const double hi = units::eV_to_au(axis.back()) - 0.5 * w;
  // Complex spectrum of one burst, linearly interpolated at the harmonic photon energies.
  const CVec spec = one.spectrum();
  const std::vector<double> om = one.photon_energies_au();
  std::vector<int> orders;
  std::vector<std::complex<double>> amp;
  for (int q = 1; q * w - ip <= hi; q += 2) {
    if (q * w - ip < lo) continue;
    const double x = q * w;
    if (x <= om.front() || x >= om.back()) continue;
    const std::size_t j =
        static_cast<std::size_t>(std::upper_bound(om.begin(), om.end(), x) - om.begin());
    const double u = (x - om[j - 1]) / (om[j] - om[j - 1]);
    orders.push_back(q);
    amp.push_back((1.0 - u) * spec[j - 1] + u * spec[j]);
  }
  if (orders.size() < 2) return false;
  *fwhm_as = comb_burst_fwhm_as(orders, amp, w, false);
  *tl_fwhm_as = comb_burst_fwhm_as(orders, amp, w, true);
  return *fwhm_as > 0.0 && *tl_fwhm_as > 0.0;
}

AnalysisResult make_truth(const ScanConfig& c, const XuvField& f, const VolkovTable* ir) {
  AnalysisResult r;
  r.analysis = "simulate";

  XuvSection x;
  x.fwhm_as = units::au_to_as(intensity_fwhm(f));
  x.transform_limited_fwhm_as = units::au_to_as(transform_limited_fwhm(f));
  x.rms_duration_as = units::au_to_as(rms_width(f.grid().times(), f.intensity()));
  const SpectralPhaseFit fit = fit_spectral_phase(f, 0.05, 3);
  x.gdd_as2 = units::au_to_as2(fit.gdd);
  x.tod_as3 = units::au_to_as3(fit.tod);
  x.center_photon_energy_eV = units::au_to_eV(fit.center_photon_energy);
  x.bandwidth_fwhm_eV = units::au_to_eV(fit.bandwidth_fwhm);
  r.xuv = x;

  if (ir && c.ir.kind == IrKind::kGaussian) {
    IrSection s;
    s.peak_vector_potential_au = ir->peak_vector_potential();
    s.peak_intensity_Wcm2 = c.ir.pulse.peak_intensity_Wcm2;
    s.wavelength_nm = c.ir.pulse.wavelength_nm;
    s.fwhm_fs = c.ir.pulse.fwhm_fs;
    r.ir = s;
  }

  r.verdict = classify_bursts(burst_structure(f, truth_driver_period_au(c)));

  if (c.xuv.kind == XuvKind::kTrain) {
    RabbittSection rb;
    // Attochirp = burst group-delay dispersion per photon energy: GDD / hbar, hbar in eV as
    // (the units.h conversion; equals gdd_as2 / 658.2119569 with CODATA 2018 hbar).
    rb.attochirp_as_per_eV = units::au_to_as_per_eV(units::as2_to_au(c.xuv.train.burst.gdd_as2));
    const XuvField one = make_gaussian_xuv(f.grid(), c.xuv.train.burst);
    // The average burst that the scan can measure: the harmonics whose photoelectron lines
    // q hbar omega - Ip lie on the energy axis (see measurable_train_burst_fwhm_as); the burst
    // of the full spectrum is the xuv section (main burst of the train).
    double fwhm = 0.0, tl = 0.0;
    if (measurable_train_burst_fwhm_as(c, one, &fwhm, &tl)) {
      rb.train_burst_fwhm_as = fwhm;
      rb.transform_limited_burst_fwhm_as = tl;
    } else {
      rb.train_burst_fwhm_as = units::au_to_as(intensity_fwhm(one));
      rb.transform_limited_burst_fwhm_as = units::au_to_as(transform_limited_fwhm(one));
    }
    r.rabbitt = rb;
  }
  return r;
}

std::vector<LineEntry> truth_lines(const std::vector<ResolvedLine>& lines,
                                   const std::vector<double>& totals, double center_photon_eV) {
  std::vector<LineEntry> out;
  for (std::size_t i = 0; i < lines.size(); ++i) {
    LineEntry e;
    e.name = lines[i].name;
    e.gas = lines[i].gas;
    e.ionization_energy_eV = lines[i].ionization_energy_eV;
    if (i < totals.size() && totals.front() > 0) e.relative_strength = totals[i] / totals.front();
    e.relative_delay_as = lines[i].delay_as - lines.front().delay_as;
    e.kinetic_energy_eV = center_photon_eV - lines[i].ionization_energy_eV;
    e.reference = i == 0;
    e.source = "generator";
    out.push_back(e);
  }
  return out;
}

std::vector<Param> generator_parameters(const ScanConfig& c, unsigned long long seed, double h,
                                        std::size_t nodes, double window,
                                        const std::vector<RowPerturbation>& rows) {
  std::vector<Param> p = config_parameters(c, "generator.");
  // The seed as an integer when it fits a signed 64-bit value, else as its decimal text.
  if (seed <= static_cast<unsigned long long>(LLONG_MAX))
    p.push_back({"generator.seed", static_cast<long long>(seed)});
  else
    p.push_back({"generator.seed", std::to_string(seed)});
  p.push_back({"generator.numerics.quadrature_step_as", units::au_to_as(h)});
  p.push_back({"generator.numerics.quadrature_nodes", static_cast<long long>(nodes)});
  p.push_back({"generator.numerics.window_fs", units::au_to_fs(window)});
  if (has_row_perturbations(c.noise)) {
    std::vector<double> d, k, e;
    for (const RowPerturbation& r : rows) {
      d.push_back(r.delay_offset_fs);
      k.push_back(r.intensity_factor);
      e.push_back(r.cep_offset_rad);
    }
    p.push_back({"generator.realized.delay_offset_fs", d});
    p.push_back({"generator.realized.ir_intensity_factor", k});
    p.push_back({"generator.realized.cep_offset_rad", e});
  }
  return p;
}

}  // namespace sw::synthetic
