#include "retrieval/analysis/train_burst.h"

#include <algorithm>
#include <cmath>
#include <complex>
#include <random>
#include <sstream>

#include "retrieval/core/enum_names.h"
#include "retrieval/core/error.h"
#include "retrieval/core/format.h"
#include "retrieval/core/units.h"
#include "retrieval/physics/pulse_metrics.h"

namespace sw {

namespace {

// Area of the peak centred at c (a.u.) above the minimum of a 3-bin running mean within
// +-omega/2, summed over |W - c| <= half; -1 when that window is not inside the energy axis.
double peak_area(const std::vector<double>& W, const std::vector<double>& s, double c, double half,
                 double omega) {
  if (W.empty() || c - half < W.front() || c + half > W.back()) return -1.0;
  double base = 1e300;
  std::vector<std::size_t> idx;
  for (std::size_t j = 0; j < W.size(); ++j)
    if (std::abs(W[j] - c) <= 0.5 * omega) idx.push_back(j);
  if (idx.size() < 3) return 0.0;
  for (std::size_t k = 1; k + 1 < idx.size(); ++k)
    base = std::min(base, (s[idx[k - 1]] + s[idx[k]] + s[idx[k + 1]]) / 3.0);
  double area = 0.0;
  for (std::size_t j : idx)
    if (std::abs(W[j] - c) <= half) area += s[j] - base;
  return std::max(area, 0.0);
}

// |E(t)|^2 over one half period (the intensity of a single-parity comb has period T/2),
// from precomputed carriers: table[q][n] = exp(-i q omega t_n).
void half_period_intensity(const std::vector<std::vector<std::complex<double>>>& table,
                           const std::vector<double>& amp, const std::vector<double>& phase,
                           std::vector<double>& out) {
  const std::size_t n = table.front().size();
  out.assign(n, 0.0);
  std::vector<std::complex<double>> c(amp.size());
  for (std::size_t q = 0; q < amp.size(); ++q) c[q] = std::polar(amp[q], phase[q]);
  for (std::size_t i = 0; i < n; ++i) {
    std::complex<double> e = 0.0;
    for (std::size_t q = 0; q < amp.size(); ++q) e += c[q] * table[q][i];
    out[i] = std::norm(e);
  }
}

}  // namespace

constexpr EnumNames<CrossSectionModel, 2> kCrossSectionModelNames{
    {{{CrossSectionModel::kFlat, "flat"}, {CrossSectionModel::kSfaDipole, "sfa_dipole"}}}};

SW_ENUM_NAME_FUNCTIONS(CrossSectionModel, parse_cross_section_model, kCrossSectionModelNames)

std::string TrainBurstOptions::validate() const {
  if (periods != 1 && periods != 2)
    return "periods = " + std::to_string(periods) + " is invalid: it must be 1 or 2.";
  if (samples_per_period < 64)
    return "samples_per_period = " + std::to_string(samples_per_period) +
           " is invalid: it must be >= 64.";
  if (monte_carlo_draws != 0 && monte_carlo_draws < 10)
    return "monte_carlo_draws = " + std::to_string(monte_carlo_draws) +
           " is invalid: it must be 0 (no sigma) or >= 10.";
  if (!(window_half_width_fraction > 0.0 && window_half_width_fraction <= 0.5))
    return "window_half_width_fraction = " + format_g(window_half_width_fraction) +
           " is invalid: it must lie in (0, 0.5] (units of hbar omega).";
  return {};
}

TrainBurst reconstruct_train_burst(const Trace& trace, const RabbittAnalysis& rb,
                                   const TrainBurstOptions& opt, const Trace* xuv_only) {
  {
    const std::string m = opt.validate();
    if (!m.empty()) throw usage_error("train burst options: " + m);
  }
  TrainBurst out;
  const double w = units::eV_to_au(rb.ir_photon_energy_eV);
  const double ip = units::eV_to_au(rb.ionization_energy_eV);
  if (!(w > 0.0))
    throw usage_error("reconstruct_train_burst: the RABBITT analysis has no IR photon energy.");
  const double T = units::period_au(w);

  // Longest chain of sidebands with consecutive orders (step 2).
  const auto& sbs = rb.sidebands;
  std::size_t best_start = 0, best_len = 0;
  for (std::size_t a = 0; a < sbs.size();) {
    std::size_t b = a + 1;
    while (b < sbs.size() && sbs[b].order == sbs[b - 1].order + 2) ++b;
    if (b - a > best_len) {
      best_len = b - a;
      best_start = a;
    }
    a = b;
  }
  if (best_len == 0)
    throw numeric_error(
        "reconstruct_train_burst: no sideband phase is available; the burst "
        "needs at least two harmonics joined by a sideband.");
  if (best_len < sbs.size())
    out.warnings.push_back("sidebands outside the longest run of consecutive orders (" +
                           std::to_string(sbs[best_start].order) + ".." +
                           std::to_string(sbs[best_start + best_len - 1].order) +
                           ") were not used: a missing sideband breaks the phase chain");

  // Spectrum for the harmonic amplitudes.
  std::vector<double> Wsp, spec;
  if (xuv_only) {
    xuv_only->validate(xuv_only->meta.source.empty() ? "xuv-only trace" : xuv_only->meta.source);
    Wsp = xuv_only->energy_au;
    spec = delay_integrated_spectrum(*xuv_only);
    out.spectrum_source = "xuv-only spectrum";
  } else {
    Wsp = trace.energy_au;
    spec = rb.integrated_spectrum.size() == trace.num_energies() ? rb.integrated_spectrum
                                                                 : delay_integrated_spectrum(trace);
    out.spectrum_source = "delay-integrated spectrum";
  }
  const EnergyAxisAlignment& al = rb.alignment;
  auto aligned = [&](int q) {
    const double wp = units::au_to_eV(q * w - ip);
    if (al.peaks_used == 0) return q * w - ip + units::eV_to_au(al.coarse_offset_eV);
    return units::eV_to_au(al.reference_eV + al.offset_eV + al.scale * (wp - al.reference_eV));
  };
  const DipoleModel dip(opt.dipole, ip, 1.0);
  out.cross_section = to_string(opt.cross_section);
  if (opt.cross_section == CrossSectionModel::kSfaDipole)
    out.cross_section += std::string(" (") + to_string(opt.dipole) + ")";

  std::vector<double> te;  // sideband group delays (a.u.) and sigmas along the chain
  std::vector<double> te_sigma;
  for (std::size_t k = 0; k < best_len; ++k) {
    te.push_back(units::as_to_au(sbs[best_start + k].group_delay_as));
    te_sigma.push_back(units::as_to_au(sbs[best_start + k].group_delay_as_sigma));
  }
  const int q0 = sbs[best_start].order - 1;
  const std::size_t nh = best_len + 1;
  std::vector<double> amp(nh);
  double Imax = 0.0;
  for (std::size_t h = 0; h < nh; ++h) {
    const int q = q0 + 2 * static_cast<int>(h);
    const double area = peak_area(Wsp, spec, aligned(q), opt.window_half_width_fraction * w, w);
    double sigma = 1.0;
    if (opt.cross_section == CrossSectionModel::kSfaDipole) {
      const double p = std::sqrt(std::max(2.0 * (q * w - ip), 0.0));
      const double d = dip(p);
      sigma = p * d * d;
    }
    const double I = sigma > 0 && area > 0 ? area / sigma : 0.0;
    if (area < 0.0)
      out.warnings.push_back("harmonic " + std::to_string(q) +
                             " lies outside the energy axis of "
                             "the " +
                             out.spectrum_source + "; its amplitude is set to 0");
    else if (!(area > 0.0))
      out.warnings.push_back("harmonic " + std::to_string(q) +
                             " has no counts above the baseline; its amplitude is 0");
    out.harmonic_orders.push_back(q);
    out.harmonic_photon_energy_eV.push_back(units::au_to_eV(q * w));
    out.harmonic_intensity.push_back(I);
    Imax = std::max(Imax, I);
  }
  if (!(Imax > 0.0))
    throw numeric_error(
        "reconstruct_train_burst: no harmonic peak has counts above the "
        "baseline in the " +
        out.spectrum_source + ".");
  for (std::size_t h = 0; h < nh; ++h) {
    out.harmonic_intensity[h] /= Imax;
    amp[h] = std::sqrt(out.harmonic_intensity[h]);
  }
  auto phases_from = [&](const std::vector<double>& delays) {
    std::vector<double> ph(nh, 0.0);
    for (std::size_t k = 0; k < best_len; ++k) ph[k + 1] = ph[k] + 2.0 * w * delays[k];
    return ph;
  };
  const std::vector<double> phase = phases_from(te);
  out.harmonic_phase_rad = phase;

  // Half-period tables for FWHM evaluations.
  const std::size_t nhalf = static_cast<std::size_t>(opt.samples_per_period / 2);
  const double dt = 0.5 * T / static_cast<double>(nhalf);
  std::vector<std::vector<std::complex<double>>> table(nh,
                                                       std::vector<std::complex<double>>(nhalf));
  for (std::size_t h = 0; h < nh; ++h)
    for (std::size_t i = 0; i < nhalf; ++i)
      table[h][i] = std::polar(1.0, -out.harmonic_orders[h] * w * (static_cast<double>(i) * dt));
  std::vector<double> I;
  half_period_intensity(table, amp, phase, I);
  std::size_t imax = 0;
  const double fwhm = periodic_main_peak_fwhm(I, dt, &imax);
  const std::vector<double> flat(nh, 0.0);
  std::vector<double> Itl;
  half_period_intensity(table, amp, flat, Itl);
  std::size_t itl = 0;
  const double fwhm_tl = periodic_main_peak_fwhm(Itl, dt, &itl);
  if (!(fwhm > 0.0))
    out.warnings.push_back("the burst does not fall below half maximum within +-T/4: no FWHM");
  out.fwhm_as = units::au_to_as(fwhm);
  out.transform_limited_fwhm_as = units::au_to_as(fwhm_tl);
  // Bursts repeat every T/2: report the one nearest to t = 0, in (-T/4, T/4].
  double t_peak = static_cast<double>(imax) * dt;
  if (t_peak > 0.25 * T) t_peak -= 0.5 * T;
  out.peak_time_as = units::au_to_as(t_peak);

  // Monte Carlo over the sideband group delays.
  if (opt.monte_carlo_draws > 0 && fwhm > 0.0) {
    std::mt19937_64 rng(opt.seed);
    std::normal_distribution<double> gauss(0.0, 1.0);
    std::vector<double> draws;
    std::vector<double> d(best_len), Id;
    for (int k = 0; k < opt.monte_carlo_draws; ++k) {
      for (std::size_t j = 0; j < best_len; ++j) d[j] = te[j] + te_sigma[j] * gauss(rng);
      half_period_intensity(table, amp, phases_from(d), Id);
      const double f = periodic_main_peak_fwhm(Id, dt, nullptr);
      if (f > 0.0) draws.push_back(f);
    }
    if (draws.size() >= 2) {
      double m = 0;
      for (double v : draws) m += v;
      m /= static_cast<double>(draws.size());
      double v2 = 0;
      for (double v : draws) v2 += (v - m) * (v - m);
      out.fwhm_as_sigma = units::au_to_as(std::sqrt(v2 / static_cast<double>(draws.size() - 1)));
    }
    out.monte_carlo_draws = static_cast<int>(draws.size());
  }

  // Samples for a figure: `periods` IR periods centred on the main burst.
  const std::size_t ns = static_cast<std::size_t>(opt.samples_per_period * opt.periods) + 1;
  const double t0 = t_peak - 0.5 * opt.periods * T;
  const double step = opt.periods * T / static_cast<double>(ns - 1);
  out.time_as.resize(ns);
  out.intensity.resize(ns);
  out.transform_limited_intensity.resize(ns);
  const double shift_tl = static_cast<double>(itl) * dt - t_peak;  // put the TL burst on top
  double m1 = 0, m2 = 0;
  for (std::size_t i = 0; i < ns; ++i) {
    const double t = t0 + static_cast<double>(i) * step;
    std::complex<double> e = 0.0, etl = 0.0;
    for (std::size_t h = 0; h < nh; ++h) {
      const double qw = out.harmonic_orders[h] * w;
      e += std::polar(amp[h], phase[h] - qw * t);
      etl += std::polar(amp[h], -qw * (t + shift_tl));
    }
    out.time_as[i] = units::au_to_as(t);
    out.intensity[i] = std::norm(e);
    out.transform_limited_intensity[i] = std::norm(etl);
    m1 = std::max(m1, out.intensity[i]);
    m2 = std::max(m2, out.transform_limited_intensity[i]);
  }
  for (std::size_t i = 0; i < ns; ++i) {
    if (m1 > 0) out.intensity[i] /= m1;
    if (m2 > 0) out.transform_limited_intensity[i] /= m2;
  }

  out.assumptions =
      "average burst of the train: all bursts identical (RABBITT phases are train averages); "
      "one phase per harmonic (no chirp within a harmonic); harmonic intensities from the " +
      out.spectrum_source + " divided by the " + out.cross_section +
      " cross-section model; sideband delays corrected by the atomic-delay model (" +
      std::string(rb.sidebands.empty() ? "none" : rb.sidebands.front().atomic.description) +
      "); FWHM sigma from a Monte Carlo over the sideband phase sigmas only (" +
      std::to_string(out.monte_carlo_draws) + " draws, seed " + std::to_string(opt.seed) + ")";
  return out;
}

void fill_rabbitt_section(const TrainBurst& b, RabbittSection* s) {
  if (b.fwhm_as > 0.0) s->train_burst_fwhm_as = b.fwhm_as;
  if (b.monte_carlo_draws > 0 && b.fwhm_as > 0.0) s->train_burst_fwhm_as_sigma = b.fwhm_as_sigma;
  if (b.transform_limited_fwhm_as > 0.0)
    s->transform_limited_burst_fwhm_as = b.transform_limited_fwhm_as;
}

}  // namespace sw
