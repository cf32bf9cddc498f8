#include "retrieval/analysis/rabbitt.h"

#include <algorithm>
#include <cmath>
#include <complex>
#include <limits>
#include <sstream>

#include <Eigen/Dense>

#include "retrieval/analysis/analysis_internal.h"
#include "retrieval/analysis/rabbitt_internal.h"
#include "retrieval/core/error.h"
#include "retrieval/core/format.h"
#include "retrieval/core/golden_section.h"
#include "retrieval/core/phase_unwrap.h"
#include "retrieval/core/statistics.h"
#include "retrieval/core/units.h"
#include "retrieval/physics/gas.h"

namespace sw {

namespace {

using rabbitt_detail::LineFit;
using rabbitt_detail::weighted_line;

// Largest energy-scale error the comb-model alignment of several lines searches (our choice:
// 3 %, beyond the time-of-flight calibrations the single-line alignment warns about at ~1 %).
constexpr double kCombMaxScaleError = 0.03;

// Delay weights: trapezoid half-intervals normalised to sum N (1 each for a uniform axis).
std::vector<double> delay_weights(const std::vector<double>& tau) {
  const std::size_t n = tau.size();
  std::vector<double> w(n, 1.0);
  if (n < 2) return w;
  double sum = 0.0;
  for (std::size_t i = 0; i < n; ++i) {
    const double lo = i == 0 ? tau[0] : 0.5 * (tau[i - 1] + tau[i]);
    const double hi = i + 1 == n ? tau[n - 1] : 0.5 * (tau[i] + tau[i + 1]);
    w[i] = hi - lo;
    sum += w[i];
  }
  for (double& x : w) x *= static_cast<double>(n) / sum;
  return w;
}

double wrap_pi(double a) { return a - units::kTwoPi * std::round(a / units::kTwoPi); }

}  // namespace

std::string RabbittOptions::validate() const {
  if (!(ir_wavelength_nm >= 0.0) || !std::isfinite(ir_wavelength_nm))
    return invalid_value("ir_wavelength_nm", ir_wavelength_nm,
                         "0 (from the trace) or a wavelength > 0 nm");
  if (!(window_half_width_fraction > 0.0 && window_half_width_fraction <= 0.5))
    return invalid_value("window_half_width_fraction", window_half_width_fraction,
                         "in (0, 0.5] (units of hbar omega)");
  if (!(min_peak_significance > 0.0))
    return invalid_value("min_peak_significance", min_peak_significance, "> 0");
  if (!(min_modulation_significance > 0.0))
    return invalid_value("min_modulation_significance", min_modulation_significance, "> 0");
  if (!(energy_resolution_eV >= 0.0) || !std::isfinite(energy_resolution_eV))
    return invalid_value("energy_resolution_eV", energy_resolution_eV, "0 (automatic) or > 0 eV");
  if (!(frequency_search_fraction > 0.0 && frequency_search_fraction < 0.5))
    return invalid_value("frequency_search_fraction", frequency_search_fraction, "in (0, 0.5)");
  if (reweight_passes < 0 || reweight_passes > 10)
    return invalid_value("reweight_passes", reweight_passes, "in 0..10");
  if (calibration_sidebands < 1)
    return invalid_value("calibration_sidebands", calibration_sidebands, "at least 1");
  if (!(min_comb_contrast >= 0.0 && min_comb_contrast < 2.0))
    return invalid_value("min_comb_contrast", min_comb_contrast, "in [0, 2)");
  if (!(calibration_warn_fraction >= 0.0))
    return invalid_value("calibration_warn_fraction", calibration_warn_fraction, ">= 0");
  if (!(min_line_significance > 0.0) || !std::isfinite(min_line_significance))
    return invalid_value("min_line_significance", min_line_significance, "> 0");
  if (!(min_line_relative_strength >= 0.0 && min_line_relative_strength < 1.0))
    return invalid_value("min_line_relative_strength", min_line_relative_strength, "in [0, 1)");
  if (!(line_guard_sigmas >= 0.0) || !std::isfinite(line_guard_sigmas))
    return invalid_value("line_guard_sigmas", line_guard_sigmas, ">= 0");
  if (!(max_line_leakage > 0.0 && max_line_leakage <= 1.0))
    return invalid_value("max_line_leakage", max_line_leakage, "in (0, 1]");
  const std::string a = atomic.validate();
  if (!a.empty()) return "atomic." + a;
  return {};
}

std::vector<double> delay_integrated_spectrum(const Trace& t) {
  const std::vector<double> w = delay_weights(t.delay_au);
  std::vector<double> s(t.num_energies(), 0.0);
  for (std::size_t i = 0; i < t.num_delays(); ++i)
    for (std::size_t j = 0; j < t.num_energies(); ++j)
      s[j] += w[i] * t.counts(static_cast<Eigen::Index>(i), static_cast<Eigen::Index>(j));
  return s;
}

RabbittAnalysis analyze_rabbitt(const Trace& trace, const RabbittOptions& opt) {
  {
    const std::string m = opt.validate();
    if (!m.empty()) throw usage_error("rabbitt options: " + m);
  }
  const std::string where = trace.meta.source.empty() ? "trace" : trace.meta.source;
  trace.validate(where);
  RabbittAnalysis out;

  // --- target and driver -----------------------------------------------------------------
  const std::string gas_key = opt.gas.empty() ? trace.meta.gas : opt.gas;
  if (gas_key.empty())
    throw input_error(where +
                      ": field 'gas' is missing; the RABBITT analysis needs the target "
                      "gas (its ionization energy places the harmonics).");
  const Gas& gas = find_gas(gas_key);
  const double lambda = analysis_detail::ir_wavelength_nm_or_throw(
      opt.ir_wavelength_nm, trace, where,
      "RABBITT analysis needs the IR wavelength (it sets the 2 omega frequency).");
  const double w = units::wavelength_nm_to_omega_au(lambda);
  const double ip = units::eV_to_au(gas.ionization_energy_eV);
  const double T = units::period_au(w);
  out.gas = gas.symbol;
  out.ionization_energy_eV = gas.ionization_energy_eV;
  out.ir_wavelength_nm = lambda;
  out.ir_photon_energy_eV = units::au_to_eV(w);

  const std::size_t nd = trace.num_delays(), ne = trace.num_energies();
  if (nd < 5)
    throw input_error(where + ": the delay axis has " + std::to_string(nd) +
                      " delays; a sideband fit needs at least 5.");
  const std::vector<double>& W = trace.energy_au;
  const std::vector<double>& tau = trace.delay_au;
  out.energy_eV.resize(ne);
  for (std::size_t j = 0; j < ne; ++j) out.energy_eV[j] = units::au_to_eV(W[j]);
  out.delay_fs.resize(nd);
  for (std::size_t i = 0; i < nd; ++i) out.delay_fs[i] = units::au_to_fs(tau[i]);
  const double span = tau.back() - tau.front();
  if (span < 0.5 * T)
    out.warnings.push_back(
        "the delay scan (" + format_g(units::au_to_fs(span)) +
        " fs) covers less than one sideband period T/2 = " + format_g(units::au_to_fs(0.5 * T)) +
        " fs; phases are poorly constrained");

  const double bg = trace.meta.background.value_or(0.0);
  const int rw = opt.reweight_passes;
  const int parity = opt.odd_harmonics ? 1 : 0;  // harmonic orders q with q % 2 == parity
  auto is_harmonic = [&](int q) { return ((q % 2) + 2) % 2 == parity; };
  auto predicted = [&](int q) { return q * w - ip; };

  // --- delay-integrated spectrum and coarse offset ----------------------------------------
  out.integrated_spectrum = delay_integrated_spectrum(trace);
  const std::vector<double>& s = out.integrated_spectrum;
  std::vector<double> dW(ne);
  for (std::size_t j = 0; j < ne; ++j) dW[j] = j + 1 < ne ? W[j + 1] - W[j] : W[j] - W[j - 1];
  const double bin_eV = units::au_to_eV(median(dW));
  std::complex<double> F = 0.0;
  double total = 0.0;
  for (std::size_t j = 0; j < ne; ++j) {
    F += s[j] * std::polar(1.0, -units::kPi * (W[j] + ip) / w);
    total += s[j];
  }
  if (!(total > 0.0)) throw input_error(where + ": the trace holds no counts.");
  F *= std::polar(1.0, units::kPi * parity);
  const double comb_contrast = 2.0 * std::abs(F) / total;
  if (comb_contrast < opt.min_comb_contrast) {
    std::ostringstream os;
    os << "the delay-integrated spectrum shows no harmonic comb at 2 hbar omega = "
       << 2.0 * out.ir_photon_energy_eV << " eV (contrast " << comb_contrast << " < "
       << opt.min_comb_contrast << ")";
    if (opt.require_comb)
      throw input_error(where + ": " + os.str() +
                        "; this is not a RABBITT scan of a pulse train (check 'kind', the IR "
                        "wavelength and the energy axis).");
    out.warnings.push_back(os.str() + "; the RABBITT results are probably meaningless");
  }
  const double coarse = comb_contrast > 0.02 ? -(w / units::kPi) * std::arg(F) : 0.0;
  out.alignment.coarse_offset_eV = units::au_to_eV(coarse);

  // --- peaks ------------------------------------------------------------------------------
  const int q_lo = static_cast<int>(std::ceil((W.front() + ip - coarse) / w - 0.5));
  const int q_hi = static_cast<int>(std::floor((W.back() + ip - coarse) / w + 0.5));
  for (int q = std::max(q_lo, 1); q <= q_hi; ++q) {
    if (predicted(q) <= 0.0) continue;
    const double c = predicted(q) + coarse;
    std::vector<std::size_t> idx;
    for (std::size_t j = 0; j < ne; ++j)
      if (std::abs(W[j] - c) <= 0.5 * w) idx.push_back(j);
    if (idx.size() < 3) continue;
    if (W[idx.front()] > c - 0.4 * w || W[idx.back()] < c + 0.4 * w) continue;  // truncated
    // Baseline: minimum of a 3-bin running mean inside the window.
    double base = 1e300;
    for (std::size_t k = 1; k + 1 < idx.size(); ++k)
      base = std::min(base, (s[idx[k - 1]] + s[idx[k]] + s[idx[k + 1]]) / 3.0);
    double area = 0, m1 = 0, sum = 0;
    for (std::size_t j : idx) {
      area += s[j] - base;
      m1 += (s[j] - base) * W[j];
      sum += s[j];
    }
    SpectralPeak p;
    p.order = q;
    p.sideband = !is_harmonic(q);
    p.predicted_eV = units::au_to_eV(predicted(q));
    p.area_counts = area;
    p.significance = sum > 0 ? area / std::sqrt(sum) : 0.0;
    if (area > 0) {
      const double cen = m1 / area;
      double var = 0;
      for (std::size_t j : idx) var += std::max(s[j], 0.0) * (W[j] - cen) * (W[j] - cen);
      p.observed_eV = units::au_to_eV(cen);
      p.observed_eV_sigma = units::au_to_eV(std::sqrt(var) / area);
    } else {
      p.observed_eV = p.predicted_eV;
    }
    out.peaks.push_back(p);
  }

  // --- energy-axis alignment --------------------------------------------------------------
  EnergyAxisAlignment& al = out.alignment;
  al.resolution_eV = opt.energy_resolution_eV > 0
                         ? opt.energy_resolution_eV
                         : trace.meta.energy_resolution_eV.value_or(bin_eV);
  {
    std::vector<double> x, y, sg;
    for (SpectralPeak& p : out.peaks)
      if (p.significance >= opt.min_peak_significance && p.observed_eV_sigma > 0) {
        p.used_in_alignment = true;
        x.push_back(p.predicted_eV);
        y.push_back(p.observed_eV - p.predicted_eV);
        sg.push_back(p.observed_eV_sigma);
      }
    al.peaks_used = static_cast<int>(x.size());
    if (!x.empty()) {
      double sw_ = 0, swx = 0;
      for (std::size_t k = 0; k < x.size(); ++k) {
        sw_ += 1.0 / (sg[k] * sg[k]);
        swx += x[k] / (sg[k] * sg[k]);
      }
      al.reference_eV = swx / sw_;
      const LineFit lf = weighted_line(x, y, sg, al.reference_eV);
      al.offset_eV = lf.intercept;
      al.offset_eV_sigma = lf.intercept_sigma;
      al.scale = 1.0 + lf.slope;
      al.scale_sigma = lf.slope_sigma;
      al.fitted = x.size() >= 2;
      if (!al.fitted) al.scale = 1.0;
      const double half_span =
          0.5 * (*std::max_element(x.begin(), x.end()) - *std::min_element(x.begin(), x.end()));
      al.within_resolution = std::abs(al.offset_eV) <= al.resolution_eV &&
                             std::abs(al.scale - 1.0) * half_span <= al.resolution_eV;
      if (!al.within_resolution) {
        std::ostringstream os;
        os << "the observed harmonic/sideband peaks are offset by " << al.offset_eV << " eV (scale "
           << al.scale << ") from q hbar omega - Ip (Ip = " << gas.ionization_energy_eV
           << " eV, hbar omega = " << out.ir_photon_energy_eV << " eV), more than the resolution "
           << al.resolution_eV
           << " eV: check the energy calibration, the gas and the IR wavelength";
        out.warnings.push_back(os.str());
      }
    } else {
      out.warnings.push_back(
          "no significant harmonic peak found in the delay-integrated "
          "spectrum; windows are placed at q hbar omega - Ip");
    }
    double harm = 0, side = 0;
    int nh = 0, ns = 0;
    for (const SpectralPeak& p : out.peaks) {
      if (p.sideband) {
        side += p.area_counts;
        ++ns;
      } else {
        harm += p.area_counts;
        ++nh;
      }
    }
    if (nh > 0 && ns > 0 && side / ns > harm / nh)
      out.warnings.push_back(
          "the sideband peaks are on average stronger than the harmonic "
          "peaks: the IR is strong (multi-photon sidebands) or the harmonic "
          "parity is not the expected one");
  }
  auto aligned_at = [&](double wp_au) {
    if (al.peaks_used == 0) return wp_au + coarse;
    const double wp = units::au_to_eV(wp_au);
    return units::eV_to_au(al.reference_eV + al.offset_eV + al.scale * (wp - al.reference_eV));
  };

  // --- photoelectron lines (step 6, rabbitt_lines.h) --------------------------------------
  std::vector<char> present;
  constexpr int kRef = 0;  // rabbitt_line_candidates puts the reference first
  if (opt.analyse_lines) {
    const std::vector<RabbittLineCandidate> cands =
        rabbitt_line_candidates(gas, trace.meta.lines, &out.warnings);
    present.assign(cands.size(), 0);
    present[kRef] = 1;
    for (const RabbittLineCandidate& c : cands) {
      RabbittLine L;
      L.candidate = c;
      L.source = c.declared ? "sidecar" : "gas table";
      out.lines.push_back(L);
    }
    if (cands.size() > 1) {
      // Peak width: the strongest peak of the spectrum (a harmonic of some line).
      const std::size_t top =
          static_cast<std::size_t>(std::max_element(s.begin(), s.end()) - s.begin());
      double fwhm =
          measure_peak_fwhm_eV(out.energy_eV, s, out.energy_eV[top], 0.5 * out.ir_photon_energy_eV);
      if (!(fwhm > 0.0)) {
        fwhm = 0.2 * out.ir_photon_energy_eV;
        out.warnings.push_back("line analysis: the harmonic peak width could not be measured; " +
                               format_g(fwhm, 3) + " eV (0.2 hbar omega) assumed");
      }
      // Every line is ionised by the same harmonics: where the reference's comb ends inside the
      // axis, a candidate has no peaks beyond its last significant harmonic (+ its sideband).
      int q_first = 1, q_last = std::numeric_limits<int>::max();
      {
        int a = std::numeric_limits<int>::max(), b = 0;
        for (const SpectralPeak& p : out.peaks)
          if (!p.sideband && p.significance >= opt.min_peak_significance) {
            a = std::min(a, p.order);
            b = std::max(b, p.order);
          }
        // Only where the comb ends inside the axis: beyond its edges it is not known.
        if (b > 0 && (a - 2) * w - ip > W.front()) q_first = a - 1;
        if (b > 0 && (b + 2) * w - ip < W.back()) q_last = b + 1;
      }
      std::vector<std::vector<PeakCentre>> centres(cands.size());
      for (std::size_t k = 0; k < cands.size(); ++k) {
        const double ipk = units::eV_to_au(cands[k].ionization_energy_eV);
        const int lo = std::max(static_cast<int>(std::floor((W.front() + ipk) / w)) - 1, q_first);
        const int hi = std::min(static_cast<int>(std::ceil((W.back() + ipk) / w)) + 1, q_last);
        for (int q = std::max(lo, 1); q <= hi; ++q) {
          const bool sb = !is_harmonic(q);
          if (q * w - ipk <= 0.0 || (sb && (q - 1) * w - ipk <= 0.0)) continue;
          centres[k].push_back({q, units::au_to_eV(q * w - ipk), sb});
        }
      }
      // The comb model's own alignment, started from the single-line one at its reference.
      const double ref_eV = al.peaks_used > 0
                                ? al.reference_eV
                                : 0.5 * (out.energy_eV.front() + out.energy_eV.back());
      const double start = al.peaks_used > 0 ? al.offset_eV : al.coarse_offset_eV;
      const CombAlignment ca =
          align_comb(out.energy_eV, s, centres, kRef, fwhm, 2.0 * out.ir_photon_energy_eV, ref_eV,
                     start, out.ir_photon_energy_eV, kCombMaxScaleError);
      out.comb_model = ca.model;
      bool other_present = false;
      for (std::size_t k = 0; k < cands.size(); ++k) {
        RabbittLine& L = out.lines[k];
        L.significance = out.comb_model.line_significance[k];
        L.relative_strength = k == kRef ? 1.0 : out.comb_model.relative_strength[k];
        L.relative_strength_sigma = k == kRef ? 0.0 : out.comb_model.relative_strength_sigma[k];
        const bool seen = out.comb_model.fitted && L.significance >= opt.min_line_significance &&
                          L.relative_strength >= opt.min_line_relative_strength;
        if (k != kRef) present[k] = cands[k].declared || seen;
        if (seen && !cands[k].declared && k != kRef) L.source = "detected";
        if (k != kRef && present[k]) other_present = true;
      }
      if (other_present && out.comb_model.fitted) {
        // Several lines: the comb model's alignment replaces the centroid one (and its warning).
        std::erase_if(out.warnings, [](const std::string& x) {
          return x.rfind("the observed harmonic/sideband peaks are offset", 0) == 0;
        });
        al.reference_eV = ref_eV;
        al.offset_eV = ca.offset_eV;
        al.offset_eV_sigma = ca.offset_eV_sigma;
        al.scale = ca.scale;
        al.scale_sigma = ca.scale_sigma;
        al.fitted = true;
        al.peaks_used = static_cast<int>(out.comb_model.peaks.size());
        const double half_span = 0.5 * (out.energy_eV.back() - out.energy_eV.front());
        al.within_resolution = std::abs(al.offset_eV) <= al.resolution_eV &&
                               std::abs(al.scale - 1.0) * half_span <= al.resolution_eV;
        if (!al.within_resolution)
          out.warnings.push_back(
              "the observed harmonic/sideband peaks of the " + std::to_string(cands.size()) +
              " lines are offset by " + format_g(al.offset_eV, 3) + " eV (scale " +
              format_g(al.scale, 5) + ") from q hbar omega - Ip, more than the resolution " +
              format_g(al.resolution_eV, 3) +
              " eV: check the energy calibration, the gas and the IR wavelength");
        out.params.push_back({"rabbitt.energy_axis.method",
                              std::string("comb model of every line's peaks (rabbitt_lines.h)")});
      }
    }
  }
  auto line_label = [&](int k) {
    const RabbittLineCandidate& c = out.lines[static_cast<std::size_t>(k)].candidate;
    return c.gas + " " + c.name;
  };

  // --- sideband windows and signals -------------------------------------------------------
  struct Window {
    int q;
    std::vector<std::size_t> bins;
    std::vector<double> signal;
    double lo, hi;
  };
  const double half = opt.window_half_width_fraction * w;
  // Windows of the sidebands of line `k` (threshold ip_line): the single-line half width, or
  // with other lines present the plan of rabbitt_lines.h (overlapped orders are skipped).
  auto line_windows = [&](int k, double ip_line, std::vector<std::string>* skipped, bool plan) {
    std::vector<Window> ws;
    RabbittLine* L = out.lines.empty() || !plan ? nullptr : &out.lines[static_cast<std::size_t>(k)];
    const int qa = static_cast<int>(std::ceil((W.front() + ip_line - coarse) / w - 0.5));
    const int qb = static_cast<int>(std::floor((W.back() + ip_line - coarse) / w + 0.5));
    for (int q = std::max(qa, 2); q <= qb; ++q) {
      if (is_harmonic(q)) continue;
      if ((q - 1) * w - ip_line <= 0.0) continue;  // the lower harmonic must ionize
      const double c = aligned_at(q * w - ip_line);
      double h = half;
      if (c - h < W.front() || c + h > W.back()) continue;
      if (L) {
        const SidebandWindowPlan p = plan_sideband_window(
            out.comb_model, present, k, q, units::au_to_eV(c), units::au_to_eV(half),
            opt.line_guard_sigmas, opt.max_line_leakage);
        if (p.nearest_other_line >= 0 &&
            (L->nearest_other_peak_eV == 0.0 || p.nearest_other_eV < L->nearest_other_peak_eV))
          L->nearest_other_peak_eV = p.nearest_other_eV;
        if (p.overlapped) {
          L->overlapped_orders.push_back(q);
          skipped->push_back("SB " + std::to_string(q) + ": overlaps " +
                             line_label(p.nearest_other_line) + ": " + p.why);
          continue;
        }
        h = units::eV_to_au(p.half_width_eV);
      }
      Window win;
      win.q = q;
      win.lo = c - h;
      win.hi = c + h;
      for (std::size_t j = 0; j < ne; ++j)
        if (W[j] >= win.lo && W[j] <= win.hi) win.bins.push_back(j);
      if (win.bins.empty()) continue;
      win.signal.assign(nd, 0.0);
      for (std::size_t i = 0; i < nd; ++i)
        for (std::size_t j : win.bins)
          win.signal[i] += trace.counts(static_cast<Eigen::Index>(i), static_cast<Eigen::Index>(j));
      ws.push_back(std::move(win));
    }
    return ws;
  };
  std::vector<std::string> ref_skipped;
  bool ref_mixed = false;  // every reference sideband overlaps: fitted as in a single-line scan
  std::vector<Window> windows = line_windows(kRef, ip, &ref_skipped, true);
  if (windows.empty() && !out.lines.empty() && !out.lines[kRef].overlapped_orders.empty()) {
    // Every reference sideband overlaps another line: the attochirp comes from the mixed
    // sidebands (their XUV phase is common to both lines; the atomic phases mix), and no
    // relative delay is given for those orders.
    windows = line_windows(kRef, ip, &out.skipped_sidebands, false);
    ref_mixed = true;
    out.warnings.push_back(
        "every sideband of the reference line overlaps a peak of another line: the sidebands "
        "and the attochirp are from the mixed signal of both lines");
  } else {
    out.skipped_sidebands.insert(out.skipped_sidebands.end(), ref_skipped.begin(),
                                 ref_skipped.end());
  }
  if (windows.empty())
    throw numeric_error(where + ": no sideband window fits inside the energy axis [" +
                        format_g(out.energy_eV.front()) + ", " + format_g(out.energy_eV.back()) +
                        "] eV for Ip = " + format_g(gas.ionization_energy_eV) +
                        " eV and hbar omega = " + format_g(out.ir_photon_energy_eV) + " eV.");

  // --- delay-axis check -------------------------------------------------------------------
  const double Omega0 = 2.0 * w;
  double Omega = Omega0;
  DelayAxisCheck& dc = out.delay_check;
  dc.nominal_frequency_au = Omega0;
  dc.fitted_frequency_au = Omega0;
  if (opt.check_delay_axis && span >= T) {
    std::vector<std::pair<double, std::size_t>> strength;
    for (std::size_t k = 0; k < windows.size(); ++k) {
      const CosineFit f = fit_cosine(tau, windows[k].signal, Omega0, rw);
      strength.emplace_back(f.amplitude_sigma > 0 ? f.amplitude / f.amplitude_sigma : 0.0, k);
    }
    std::sort(strength.rbegin(), strength.rend());
    std::vector<std::size_t> use;
    for (const auto& [sig, k] : strength)
      if (static_cast<int>(use.size()) < opt.calibration_sidebands &&
          sig >= opt.min_modulation_significance)
        use.push_back(k);
    if (!use.empty()) {
      // Data-based weights only: model-based weights make the objective jump where a wrong
      // frequency drives the model through zero.
      auto explained = [&](double Om) {
        double e = 0;
        for (std::size_t k : use) e += fit_cosine(tau, windows[k].signal, Om, 0).explained_chi2;
        return e;
      };
      auto chi2 = [&](double Om) {
        double c = 0;
        for (std::size_t k : use) c += fit_cosine(tau, windows[k].signal, Om, 0).chi2;
        return c;
      };
      const double lo = Omega0 * (1.0 - opt.frequency_search_fraction);
      const double hi = Omega0 * (1.0 + opt.frequency_search_fraction);
      const double res = units::kTwoPi / span;
      const int ngrid = std::max(41, static_cast<int>(std::ceil(8.0 * (hi - lo) / res)) + 1);
      double best = lo, best_val = -1.0;
      const double step = (hi - lo) / (ngrid - 1);
      for (int g = 0; g < ngrid; ++g) {
        const double Om = lo + g * step;
        const double v = explained(Om);
        if (v > best_val) {
          best_val = v;
          best = Om;
        }
      }
      const double Om_fit =
          golden_section_min([&](double x) { return -explained(x); }, std::max(lo, best - step),
                             std::min(hi, best + step), 60);
      dc.performed = true;
      dc.fitted_frequency_au = Om_fit;
      dc.calibration_factor = Om_fit / Omega0;
      for (std::size_t k : use) dc.sidebands_used.push_back(windows[k].q);
      // Curvature of the summed chi^2 (Delta chi^2 = 1), scaled by the pooled reduced chi^2.
      const double h = 0.05 * res;
      const double c0 = chi2(Om_fit), cp = chi2(Om_fit + h), cm = chi2(Om_fit - h);
      const double curv = (cp - 2.0 * c0 + cm) / (h * h);
      const double dof = static_cast<double>(use.size() * (nd - 3) - 1);
      const double red = dof > 0 ? c0 / dof : 1.0;
      if (curv > 0) {
        const double sOm = std::sqrt(2.0 / curv) * std::sqrt(std::max(red, 1.0));
        dc.calibration_factor_sigma = sOm / Omega0;
      }
      if (std::abs(dc.calibration_factor - 1.0) > opt.calibration_warn_fraction) {
        std::ostringstream os;
        os << "the sideband oscillation frequency is " << dc.calibration_factor << " +- "
           << dc.calibration_factor_sigma
           << " times 2 omega: the delay axis should be multiplied by this factor (stage "
              "calibration off by "
           << 100.0 * (dc.calibration_factor - 1.0) << " %)"
           << (opt.apply_delay_calibration ? "; the fitted frequency was used"
                                           : "; not applied (apply_delay_calibration = false)");
        out.warnings.push_back(os.str());
      }
      if (opt.apply_delay_calibration) {
        Omega = Om_fit;
        dc.applied = true;
      }
    }
  } else if (opt.check_delay_axis) {
    out.warnings.push_back("delay-axis check skipped: the scan (" +
                           format_g(units::au_to_fs(span)) + " fs) is shorter than one IR period");
  }

  // --- sideband fits ----------------------------------------------------------------------
  // Fits of one line's windows (threshold ip_line); weak sidebands go to `skipped`.
  auto fit_windows = [&](const std::vector<Window>& ws, double ip_line, bool rainbow,
                         std::vector<std::string>* skipped) {
    std::vector<SidebandDetail> fitted;
    for (const Window& win : ws) {
      SidebandDetail d;
      d.order = win.q;
      d.energy_eV = units::au_to_eV(win.q * w - ip_line);
      d.photon_energy_eV = units::au_to_eV(win.q * w);
      d.window_low_eV = units::au_to_eV(win.lo);
      d.window_high_eV = units::au_to_eV(win.hi);
      d.window_bins = static_cast<int>(win.bins.size());
      d.fit = fit_cosine(tau, win.signal, Omega, rw);
      if (bg > 0.0) {
        const double a = d.fit.mean - bg * static_cast<double>(win.bins.size());
        d.fit.modulation_depth = a > 0 ? d.fit.amplitude / a : 0.0;
      }
      const double sig = d.fit.amplitude_sigma > 0 ? d.fit.amplitude / d.fit.amplitude_sigma : 0.0;
      if (sig < opt.min_modulation_significance) {
        skipped->push_back("SB " + std::to_string(win.q) + ": modulation " +
                           format_g(d.fit.amplitude) + " +- " + format_g(d.fit.amplitude_sigma) +
                           " counts is below " + format_g(opt.min_modulation_significance) +
                           " sigma");
        continue;
      }
      if (rainbow) {
        std::vector<double> col(nd);
        for (std::size_t j : win.bins) {
          for (std::size_t i = 0; i < nd; ++i)
            col[i] = trace.counts(static_cast<Eigen::Index>(i), static_cast<Eigen::Index>(j));
          const CosineFit f = fit_cosine(tau, col, Omega, rw);
          d.rainbow_energy_eV.push_back(units::au_to_eV(W[j]));
          d.rainbow_phase_rad.push_back(f.phase_rad);
          d.rainbow_phase_rad_sigma.push_back(f.phase_rad_sigma);
          d.rainbow_modulation_depth.push_back(f.modulation_depth);
        }
      }
      fitted.push_back(std::move(d));
    }
    return fitted;
  };
  std::vector<SidebandDetail> sbs = fit_windows(windows, ip, opt.rainbow, &out.skipped_sidebands);
  if (sbs.empty())
    throw numeric_error(where + ": no sideband shows a significant 2 omega modulation (" +
                        std::to_string(windows.size()) + " windows tried; threshold " +
                        format_g(opt.min_modulation_significance) + " sigma).");

  // --- unwrapping, delays, atomic corrections ---------------------------------------------
  {
    std::vector<double> ph;
    for (const auto& d : sbs) ph.push_back(d.fit.phase_rad);
    const std::vector<double> un = unwrap_phase(ph);
    for (std::size_t k = 0; k < sbs.size(); ++k) {
      SidebandDetail& d = sbs[k];
      d.phase_unwrapped_rad = un[k];
      for (double& r : d.rainbow_phase_rad) r = un[k] + wrap_pi(r - un[k]);
      d.measured_delay_as = units::au_to_as(un[k] / (2.0 * w));
      d.atomic = sideband_atomic_delay(gas, predicted(d.order), w, opt.atomic);
      d.group_delay_as = d.measured_delay_as - (d.atomic.applied ? d.atomic.total_as : 0.0);
      d.group_delay_as_sigma = units::au_to_as(d.fit.phase_rad_sigma / (2.0 * w));
    }
  }

  // --- attochirp --------------------------------------------------------------------------
  RabbittSection& sec = out.section;
  if (sbs.size() >= 2) {
    std::vector<double> x, y, sg;
    double swt = 0, swx = 0;
    for (const auto& d : sbs) {
      x.push_back(d.photon_energy_eV);
      y.push_back(d.group_delay_as);
      sg.push_back(std::max(d.group_delay_as_sigma, 1e-9));
      swt += 1.0 / (sg.back() * sg.back());
      swx += x.back() / (sg.back() * sg.back());
    }
    out.attochirp_reference_eV = swx / swt;
    const LineFit lf = weighted_line(x, y, sg, out.attochirp_reference_eV);
    sec.attochirp_as_per_eV = lf.slope;
    sec.attochirp_as_per_eV_sigma = lf.slope_sigma;
    out.attochirp_intercept_as = lf.intercept;
    out.attochirp_reduced_chi2 = lf.reduced_chi2;
    if (lf.scaled)
      out.params.push_back(
          {"rabbitt.attochirp_sigma_note", std::string("sigma scaled by sqrt(reduced chi^2) = ") +
                                               format_g(std::sqrt(lf.reduced_chi2))});
  } else {
    out.warnings.push_back("only one sideband could be fitted: no attochirp");
  }

  // --- contract section, diagnostics ------------------------------------------------------
  std::vector<double> red, scaled;
  std::string scaled_list;
  for (const auto& d : sbs) {
    Sideband c;
    c.order = d.order;
    c.energy_eV = d.energy_eV;
    c.phase_rad = d.phase_unwrapped_rad;
    c.phase_rad_sigma = d.fit.phase_rad_sigma;
    c.group_delay_as = d.group_delay_as;
    c.group_delay_as_sigma = d.group_delay_as_sigma;
    c.modulation_depth = d.fit.modulation_depth;
    if (d.atomic.applied) c.atomic_delay_as = d.atomic.total_as;
    sec.sidebands.push_back(c);
    red.push_back(d.fit.reduced_chi2);
    scaled.push_back(d.fit.covariance_scaled ? 1.0 : 0.0);
    if (d.fit.covariance_scaled && d.fit.reduced_chi2 > 2.0)
      scaled_list += (scaled_list.empty() ? "" : ", ") + std::to_string(d.order) + " (" +
                     format_g(d.fit.reduced_chi2) + ")";
  }
  out.sidebands = std::move(sbs);
  if (!scaled_list.empty())
    out.warnings.push_back(
        "sideband fits with reduced chi^2 > 2 (phase sigmas scaled by "
        "sqrt(chi^2_red)): SB " +
        scaled_list +
        "; the signal departs from A + B cos(2 omega tau) beyond Poisson "
        "noise (higher-order sidebands at strong IR, IR envelope, delay or "
        "intensity fluctuations)");

  // --- further lines: their sidebands and delays relative to the reference (step 6) ---------
  for (std::size_t k = 1; k < out.lines.size(); ++k) {
    RabbittLine& L = out.lines[k];
    L.present = present[k] != 0;
    if (!L.present) continue;
    const double ipk = units::eV_to_au(L.candidate.ionization_energy_eV);
    const std::vector<Window> ws = line_windows(static_cast<int>(k), ipk, &L.skipped, true);
    L.sidebands = fit_windows(ws, ipk, false, &L.skipped);
    std::vector<double> ph;
    for (const auto& d : L.sidebands) ph.push_back(d.fit.phase_rad);
    const std::vector<double> un = unwrap_phase(ph);
    Gas line_gas = find_gas(L.candidate.gas);
    line_gas.valence_l = L.candidate.channel_l0;
    for (std::size_t m = 0; m < L.sidebands.size(); ++m) {
      SidebandDetail& d = L.sidebands[m];
      d.phase_unwrapped_rad = un[m];
      d.measured_delay_as = units::au_to_as(un[m] / (2.0 * w));
      d.atomic = sideband_atomic_delay(line_gas, d.order * w - ipk, w, opt.atomic);
      d.group_delay_as = d.measured_delay_as - (d.atomic.applied ? d.atomic.total_as : 0.0);
      d.group_delay_as_sigma = units::au_to_as(d.fit.phase_rad_sigma / (2.0 * w));
      for (const SidebandDetail& r : out.sidebands)
        if (r.order == d.order)
          L.relative.push_back(relative_sideband_delay(
              d.order, d.order * w - ipk, d.fit.phase_rad, d.fit.phase_rad_sigma, r.order * w - ip,
              r.fit.phase_rad, r.fit.phase_rad_sigma, w, opt.atomic.charge));
    }
    std::vector<double> v, sg, vc, sgc;
    for (const RelativeSidebandDelay& r : L.relative) {
      v.push_back(r.relative_delay_as);
      sg.push_back(std::max(r.relative_delay_as_sigma, 1e-9));
      if (r.corrected) {
        vc.push_back(r.relative_delay_as_corrected);
        sgc.push_back(sg.back());
      }
    }
    const std::string label = line_label(static_cast<int>(k));
    const double dip = L.candidate.ionization_energy_eV - gas.ionization_energy_eV;
    if (!L.overlapped_orders.empty()) {
      std::string orders;
      for (int q : L.overlapped_orders) orders += (orders.empty() ? "" : ", ") + std::to_string(q);
      out.warnings.push_back(
          "line " + label + ": sidebands SB " + orders + " overlap the peaks of another line (" +
          "Delta Ip = " + format_g(dip, 5) + " eV = " + format_g(dip / out.ir_photon_energy_eV, 4) +
          " hbar omega; nearest peaks " + format_g(L.nearest_other_peak_eV, 3) +
          " eV apart, peak FWHM " + format_g(out.comb_model.peak_fwhm_eV, 3) +
          " eV): no relative delay there");
    }
    if (v.empty()) {
      out.warnings.push_back("line " + label +
                             ": no sideband order is fitted for both this line and the "
                             "reference: no relative delay");
      continue;
    }
    L.delay = weighted_mean_delay(v, sg);
    if (!vc.empty() && vc.size() == v.size()) L.delay_corrected = weighted_mean_delay(vc, sgc);
    if (L.delay->scaled && L.delay->reduced_chi2 > 2.0)
      out.warnings.push_back("line " + label +
                             ": the sidebands' relative delays disagree (chi^2/dof " +
                             format_g(L.delay->reduced_chi2, 3) +
                             "); the sigma of the mean is scaled by sqrt(chi^2/dof)");
  }
  // The reference's own overlapped sidebands are in skipped_sidebands; warn once.
  if (!ref_mixed && !out.lines.empty() && !out.lines[kRef].overlapped_orders.empty()) {
    std::string orders;
    for (int q : out.lines[kRef].overlapped_orders)
      orders += (orders.empty() ? "" : ", ") + std::to_string(q);
    out.warnings.push_back("reference line " + line_label(kRef) + ": sidebands SB " + orders +
                           " overlap the peaks of another line and are left out");
  }
  if (!out.lines.empty()) out.lines[kRef].present = true;

  auto P = [&](const std::string& k, auto v) { out.params.push_back({"rabbitt." + k, v}); };
  P("gas", out.gas);
  P("ionization_energy_eV", out.ionization_energy_eV);
  P("ir_photon_energy_eV", out.ir_photon_energy_eV);
  P("sign_convention",
    std::string("S(tau) = A + B cos(2 omega tau + phase_rad), tau = t_XUV - t_IR; group delay = "
                "phase/(2 omega) - atomic delay; positive attochirp = higher photon energies "
                "emitted later"));
  P("uncertainty_note",
    std::string("phase sigmas from the weighted least-squares covariance (Poisson weights "
                "1/max(S,1)), multiplied by the reduced chi^2 where it exceeds 1"));
  P("energy_axis.offset_eV", al.offset_eV);
  P("energy_axis.offset_eV_sigma", al.offset_eV_sigma);
  P("energy_axis.scale", al.scale);
  P("energy_axis.scale_sigma", al.scale_sigma);
  P("energy_axis.reference_eV", al.reference_eV);
  P("energy_axis.peaks_used", static_cast<long long>(al.peaks_used));
  P("energy_axis.resolution_eV", al.resolution_eV);
  P("energy_axis.comb_contrast", comb_contrast);
  if (dc.performed) {
    P("delay_axis.calibration_factor", dc.calibration_factor);
    P("delay_axis.calibration_factor_sigma", dc.calibration_factor_sigma);
    P("delay_axis.applied", dc.applied);
  }
  P("window_half_width_eV", units::au_to_eV(half));
  P("sideband_reduced_chi2", red);
  P("sideband_covariance_scaled", scaled);
  P("atomic_delay.mode", std::string(to_string(opt.atomic.mode)));
  if (!out.sidebands.empty())
    P("atomic_delay.description", out.sidebands.front().atomic.description);
  if (out.comb_model.fitted) {
    P("lines.peak_fwhm_eV", out.comb_model.peak_fwhm_eV);
    P("lines.comb_model_reduced_chi2", out.comb_model.reduced_chi2);
    P("lines.method",
      std::string("peaks assigned to lines by a Gaussian comb model of the delay-integrated "
                  "spectrum; relative delay = (phi_line - phi_reference) / (2 omega) per "
                  "sideband order, corrected = minus [tau_cc(W_line) - tau_cc(W_reference)]"));
  }
  if (sec.attochirp_as_per_eV) {
    P("attochirp_reference_eV", out.attochirp_reference_eV);
    P("attochirp_intercept_as", out.attochirp_intercept_as);
    P("attochirp_reduced_chi2", out.attochirp_reduced_chi2);
  }
  return out;
}

}  // namespace sw
