#include "retrieval/preprocess.h"

#include <algorithm>
#include <cmath>
#include <numeric>
#include <random>
#include <sstream>

#include "retrieval/error.h"
#include "retrieval/gas.h"
#include "retrieval/pulse_metrics.h"
#include "retrieval/units.h"

namespace sw {

std::string PreprocessOptions::validate() const {
  std::ostringstream s;
  auto in01 = [&](double v, const char* name) {
    if (!(v > 0 && v < 1)) s << name << " = " << v << ": must lie in (0, 1)";
    return s.tellp() == 0;
  };
  if (!in01(signal_free_fraction, "signal_free_fraction")) return s.str();
  if (!in01(min_signal_free_share, "min_signal_free_share")) return s.str();
  if (!in01(field_free_shift_fraction, "field_free_shift_fraction")) return s.str();
  if (!(hot_pixel_sigma > 0)) s << "hot_pixel_sigma = " << hot_pixel_sigma << ": must be > 0";
  else if (!(hot_pixel_ratio > 1)) s << "hot_pixel_ratio = " << hot_pixel_ratio << ": must be > 1";
  else if (grid_size != 0 && grid_size < 64) s << "grid_size = " << grid_size << ": must be 0 (auto) or >= 64";
  else if (auto e = support.validate(); !e.empty()) s << "support." << e;
  return s.str();
}

namespace {

bool is_uniform(const std::vector<double>& x, double* step) {
  if (x.size() < 2) return false;
  const double h = (x.back() - x.front()) / static_cast<double>(x.size() - 1);
  *step = h;
  for (std::size_t i = 1; i < x.size(); ++i)
    if (std::abs((x[i] - x[i - 1]) - h) > 1e-6 * h) return false;
  return true;
}

// Bin edges from centres (midpoints, ends extrapolated by half a step).
std::vector<double> edges_of(const std::vector<double>& c) {
  std::vector<double> e(c.size() + 1);
  for (std::size_t i = 1; i < c.size(); ++i) e[i] = 0.5 * (c[i - 1] + c[i]);
  e.front() = c.front() - 0.5 * (c[1] - c[0]);
  e.back() = c.back() + 0.5 * (c.back() - c[c.size() - 2]);
  return e;
}

// Overlap rebinning of counts per bin from edges `from` to edges `to` (conserves counts).
Eigen::MatrixXd rebin(const Eigen::MatrixXd& counts, const std::vector<double>& from,
                      const std::vector<double>& to) {
  const std::size_t nf = from.size() - 1, nt = to.size() - 1;
  Eigen::MatrixXd out = Eigen::MatrixXd::Zero(counts.rows(), static_cast<Eigen::Index>(nt));
  std::size_t j = 0;
  for (std::size_t i = 0; i < nf; ++i) {
    const double a = from[i], b = from[i + 1], w = b - a;
    while (j < nt && to[j + 1] <= a) ++j;
    for (std::size_t k = j; k < nt && to[k] < b; ++k) {
      const double ov = std::min(b, to[k + 1]) - std::max(a, to[k]);
      if (ov > 0) out.col(static_cast<Eigen::Index>(k)) += counts.col(static_cast<Eigen::Index>(i)) * (ov / w);
    }
  }
  return out;
}

// The energy support of the signal (retrieval/support.h), recorded in the summary.
EnergySupport energy_support(const Trace& trace, const PreprocessOptions& opt, const Eigen::MatrixXd& sig,
                             const Eigen::MatrixXd& counts, const std::vector<double>& W, PreprocessSummary* s) {
  SupportOptions so = opt.support;
  if (so.max_gap_eV == 0.0)
    so.max_gap_eV = 2.0 * units::au_to_eV(units::wavelength_nm_to_omega_au(trace.meta.ir_wavelength_nm));
  const EnergySupport band = find_energy_support(sig, counts, W, so);
  s->support_peak_sigma = band.peak_sigma;
  s->support_fills_window = band.fills_axis;
  s->support_core_share = band.found ? band.core_share : 1.0;
  if (!band.found) {
    s->warnings.push_back("no energy bin of the delay-integrated spectrum stands " + std::to_string(so.min_sigma) +
                          " sigma above the Poisson noise: no signal found, the XUV spectrum is not confined");
  } else {
    s->support_lo_eV = units::au_to_eV(band.lo_au);
    s->support_hi_eV = units::au_to_eV(band.hi_au);
    if (band.fills_axis)
      s->warnings.push_back("the signal's energy support fills the whole energy axis: signal and "
                            "background are not separated (no signal-free bins)");
  }
  return band;
}

}  // namespace

RetrievalProblem preprocess(const Trace& trace, const PreprocessOptions& opt, PreprocessSummary* sum) {
  const std::string where = trace.meta.source.empty() ? std::string("trace") : trace.meta.source;
  if (const std::string e = opt.validate(); !e.empty()) throw usage_error("preprocess: " + e);
  if (trace.meta.gas.empty())
    throw input_error(where + ": field 'gas' is missing; the ionization energy is needed (e.g. \"gas\": \"Ne\")");
  if (!(trace.meta.ir_wavelength_nm > 0))
    throw input_error(where + ": field 'ir_wavelength_nm' is missing or not positive; expected the IR wavelength in nm");
  if (trace.num_energies() < 8 || trace.num_delays() < 4)
    throw input_error(where + ": the scan has " + std::to_string(trace.num_delays()) + " delays x " +
                      std::to_string(trace.num_energies()) +
                      " energies; a retrieval needs at least 4 delays and 8 energy bins");
  PreprocessSummary s;
  const Gas& gas = find_gas(trace.meta.gas);
  const double ip = units::eV_to_au(gas.ionization_energy_eV);

  // 3. energy axis onto a uniform grid (counts conserved).
  std::vector<double> W = trace.energy_au;
  Eigen::MatrixXd counts = trace.counts;
  double dW = 0;
  if (!is_uniform(W, &dW)) {
    std::vector<double> steps(W.size() - 1);
    for (std::size_t i = 1; i < W.size(); ++i) steps[i - 1] = W[i] - W[i - 1];
    std::nth_element(steps.begin(), steps.begin() + steps.size() / 2, steps.end());
    dW = steps[steps.size() / 2];
    const std::vector<double> from = edges_of(W);
    const std::size_t n = static_cast<std::size_t>(std::floor((from.back() - from.front()) / dW));
    std::vector<double> centres(n), to(n + 1);
    for (std::size_t i = 0; i <= n; ++i) to[i] = from.front() + dW * static_cast<double>(i);
    for (std::size_t i = 0; i < n; ++i) centres[i] = to[i] + 0.5 * dW;
    counts = rebin(counts, from, to);
    W = centres;
    s.energy_resampled = true;
  }
  s.energy_step_eV = units::au_to_eV(dW);
  const auto nd = counts.rows(), ne = counts.cols();
  s.total_counts = counts.sum();
  s.peak_counts = counts.maxCoeff();
  if (!(s.peak_counts > 0)) throw input_error(where + ": the data are all zero; expected counts > 0");

  // 2. isolated hot pixels.
  if (opt.remove_hot_pixels) {
    Eigen::MatrixXd fixed = counts;
    for (Eigen::Index i = 0; i < nd; ++i)
      for (Eigen::Index j = 0; j < ne; ++j) {
        double nb[8];
        int m = 0;
        for (int di = -1; di <= 1; ++di)
          for (int dj = -1; dj <= 1; ++dj) {
            if (!di && !dj) continue;
            const Eigen::Index a = i + di, b = j + dj;
            if (a >= 0 && a < nd && b >= 0 && b < ne) nb[m++] = counts(a, b);
          }
        std::nth_element(nb, nb + m / 2, nb + m);
        const double med = nb[m / 2], c = counts(i, j);
        if (c > med + opt.hot_pixel_sigma * std::sqrt(med + 1.0) && c > opt.hot_pixel_ratio * std::max(med, 1.0)) {
          fixed(i, j) = med;
          ++s.hot_pixels_replaced;
        }
      }
    counts = fixed;
  }

  // 1. background.
  const Eigen::VectorXd mean_spec = counts.colwise().mean().transpose();
  if (trace.meta.background && !trace.meta.background_auto) {
    s.background_counts = *trace.meta.background;
    s.background_source = "sidecar";
  } else {
    const double thr = opt.signal_free_fraction * mean_spec.maxCoeff();
    // The signal region runs from the first to the last bin above the threshold; its wings
    // (real signal below the threshold) are excluded by widening it by half its width on each
    // side. Only bins outside count as signal-free, so neither the wings of a broadband
    // spectrum nor the gaps of a harmonic comb are taken for background.
    Eigen::Index first = 0, last = ne - 1;
    while (first < ne && mean_spec(first) < thr) ++first;
    while (last > first && mean_spec(last) < thr) --last;
    const Eigen::Index pad = (last - first + 1) / 2;
    const Eigen::Index lo_edge = first - pad, hi_edge = last + pad;
    double acc = 0;
    for (Eigen::Index j = 0; j < ne; ++j)
      if ((j < lo_edge || j > hi_edge) && mean_spec(j) < thr) {
        acc += mean_spec(j);
        ++s.signal_free_bins;
      }
    if (static_cast<double>(s.signal_free_bins) >= opt.min_signal_free_share * static_cast<double>(ne)) {
      s.background_counts = acc / static_cast<double>(s.signal_free_bins);
      s.background_source = "signal-free bins";
    } else {
      s.background_source = "none";
      s.warnings.push_back("fewer than " + std::to_string(int(100 * opt.min_signal_free_share)) +
                           " % of the energy bins are signal-free: no background subtracted");
    }
  }

  // Poisson variance of raw counts (>= 1 count to keep weights finite), then subtract. The
  // difference is kept signed: clipping it at 0 would bias every background-dominated bin up
  // (E[max(N - b, 0)] > E[N] - b), i.e. lift the spectral wings (measured: FWHM -7 % on a flat
  // 5 counts/bin under neon-150as with the Poisson projection; docs/validation.md).
  Eigen::MatrixXd var = counts.cwiseMax(1.0);
  Eigen::MatrixXd sig = (counts.array() - s.background_counts).matrix();
  const EnergySupport band = energy_support(trace, opt, sig, counts, W, &s);

  // 4. counts per bin -> |a|^2 (divide by bin width and by p).
  for (Eigen::Index j = 0; j < ne; ++j) {
    const double p = units::momentum_au(W[static_cast<std::size_t>(j)]);
    if (!(p > 0))
      throw input_error(where + ": energy axis reaches " + std::to_string(units::au_to_eV(W[static_cast<std::size_t>(j)])) +
                        " eV; photoelectron energies must be > 0");
    const double f = 1.0 / (dW * p);
    sig.col(j) *= f;
    var.col(j) *= f * f;
  }

  // 5. central momentum at the photoelectron-spectrum centroid (energy density weighting).
  Eigen::VectorXd avg = Eigen::VectorXd::Zero(ne);
  for (Eigen::Index j = 0; j < ne; ++j) avg(j) = sig.col(j).mean() * units::momentum_au(W[static_cast<std::size_t>(j)]);
  double num = 0, den = 0;
  for (Eigen::Index j = 0; j < ne; ++j) {
    num += avg(j) * W[static_cast<std::size_t>(j)];
    den += avg(j);
  }
  if (!(den > 0)) throw input_error(where + ": no signal above the background; nothing to retrieve");
  const double Wc = num / den;
  s.centroid_energy_eV = units::au_to_eV(Wc);
  s.central_momentum_au = units::momentum_au(Wc);

  // 6. field-free spectrum from the rows least shifted by the IR.
  std::vector<double> centroid(static_cast<std::size_t>(nd));
  for (Eigen::Index i = 0; i < nd; ++i) {
    double a = 0, b = 0;
    for (Eigen::Index j = 0; j < ne; ++j) {
      a += sig(i, j) * W[static_cast<std::size_t>(j)];
      b += sig(i, j);
    }
    centroid[static_cast<std::size_t>(i)] = b > 0 ? a / b : Wc;
  }
  // Field-free rows: the runs of rows at either edge whose centroid stays within
  // field_free_shift_fraction of the largest shift (from the delay-averaged centroid). A run
  // spanning at least one IR period averages any residual oscillation of the centroid out
  // (to first order in A): truly field-free (amplitude and centroid are used). Shorter runs
  // at a weakly streaked edge still give the spectrum's shape, but their centroid can be off
  // by the residual shift (about 1 eV on a 5 fs pulse scanned over +-6 fs): shape only.
  const double period = units::period_au(units::wavelength_nm_to_omega_au(trace.meta.ir_wavelength_nm));
  const std::vector<double>& tau = trace.delay_au;
  const double step_tau = nd > 1 ? (tau.back() - tau.front()) / static_cast<double>(nd - 1) : 0.0;
  double max_shift = 0;
  for (double c : centroid) max_shift = std::max(max_shift, std::abs(c - Wc));
  auto quiet_row = [&](Eigen::Index i) {
    return std::abs(centroid[static_cast<std::size_t>(i)] - Wc) <= opt.field_free_shift_fraction * max_shift;
  };
  Eigen::Index lo = 0, hi = nd - 1;
  while (lo < nd && quiet_row(lo)) ++lo;
  while (hi > lo && quiet_row(hi)) --hi;
  auto span = [&](Eigen::Index first, Eigen::Index end) {  // rows first..end-1
    return end > first ? tau[static_cast<std::size_t>(end - 1)] - tau[static_cast<std::size_t>(first)] + step_tau : 0.0;
  };
  std::vector<Eigen::Index> quiet, settled;
  for (auto [first, end] : {std::pair{Eigen::Index(0), lo}, std::pair{hi + 1, nd}}) {
    const bool full_period = span(first, end) >= period;
    for (Eigen::Index i = first; i < end; ++i) {
      quiet.push_back(i);
      if (full_period) settled.push_back(i);
    }
  }
  if (max_shift > 0 && settled.size() >= 3) {
    quiet = settled;
    s.reference = ReferenceSpectrum::kFieldFree;
  } else if (max_shift > 0 && quiet.size() >= 3) {
    s.reference = ReferenceSpectrum::kEdgeRows;
  } else {
    quiet.clear();
    s.reference = ReferenceSpectrum::kDelayAverage;
  }
  std::vector<double> ff(static_cast<std::size_t>(ne), 0.0);
  s.field_free_measured = !quiet.empty();
  if (s.field_free_measured) {
    for (Eigen::Index i : quiet)
      for (Eigen::Index j = 0; j < ne; ++j) ff[static_cast<std::size_t>(j)] += sig(i, j) / static_cast<double>(quiet.size());
    std::ostringstream os;
    os << quiet.size() << " edge rows with centroid shift <= " << opt.field_free_shift_fraction * 100
       << " % of the largest";
    if (s.reference == ReferenceSpectrum::kEdgeRows)
      os << " (spanning less than one IR period: shape only, centroid from a zero mean of A(t))";
    s.field_free_source = os.str();
  } else {
    for (Eigen::Index j = 0; j < ne; ++j) ff[static_cast<std::size_t>(j)] = sig.col(j).mean();
    s.field_free_source = "delay average";
    if (max_shift > 0)
      s.warnings.push_back("no field-free delay rows at the scan edges (centroid shift below " +
                           std::to_string(int(100 * opt.field_free_shift_fraction)) +
                           " % of the largest): the spectral amplitude is not constrained, and the frequency-shift ambiguity is fixed by a zero mean of A(t) over the scan");
  }
  {
    std::vector<double> Wv(W.begin(), W.end()), dens(ff.size());
    for (std::size_t j = 0; j < ff.size(); ++j) dens[j] = ff[j] * units::momentum_au(W[j]);
    s.bandwidth_fwhm_eV = units::au_to_eV(fwhm(Wv, dens));
    s.bandwidth_ratio = s.bandwidth_fwhm_eV / s.centroid_energy_eV;
  }

  // 7. grid.
  std::size_t n = opt.grid_size;
  if (n == 0) {
    n = 256;
    while (n < 2 * static_cast<std::size_t>(ne)) n *= 2;
  }
  if (n < static_cast<std::size_t>(ne) + 16)
    throw usage_error("preprocess: grid_size = " + std::to_string(n) + " is smaller than the " +
                      std::to_string(ne) + " energy bins plus margin");
  RetrievalProblem pr;
  pr.grid = TimeGrid::for_energy_step(n, dW);
  s.grid_size = n;
  s.grid_dt_as = units::au_to_as(pr.grid.dt());
  pr.intensity = sig;
  pr.variance = var;
  pr.energy_au = W;
  pr.delay_au = trace.delay_au;
  pr.ionization_energy_au = ip;
  pr.central_momentum_au = s.central_momentum_au;
  pr.ir_omega_au = units::wavelength_nm_to_omega_au(trace.meta.ir_wavelength_nm);
  pr.field_free_spectrum = ff;
  pr.reference = s.reference;
  pr.dipole = DipoleModel(opt.dipole, ip, s.central_momentum_au);
  if (band.found) {
    pr.support_lo_au = band.lo_au;
    pr.support_hi_au = band.hi_au;
  }
  if (s.bandwidth_ratio > 0.1)
    s.warnings.push_back("bandwidth/energy = " + std::to_string(s.bandwidth_ratio) +
                         ": one central momentum is questionable over this band (the ptychographic engine adds "
                         "momentum nodes when its one-p0 fit stalls above the noise floor; the "
                         "full model makes no such approximation)");
  if (sum) *sum = s;
  return pr;
}

Trace poisson_resample(const Trace& trace, unsigned long long seed) {
  Trace t = trace;
  std::mt19937_64 rng(seed);
  for (Eigen::Index i = 0; i < t.counts.rows(); ++i)
    for (Eigen::Index j = 0; j < t.counts.cols(); ++j) {
      const double m = trace.counts(i, j);
      if (m > 0) {
        std::poisson_distribution<long long> d(m);
        t.counts(i, j) = static_cast<double>(d(rng));
      }
    }
  return t;
}

}  // namespace sw
