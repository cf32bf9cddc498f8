#include "retrieval/preprocess/preprocess.h"

#include <algorithm>
#include <cmath>
#include <numeric>
#include <random>
#include <sstream>

#include "retrieval/core/error.h"
#include "retrieval/core/format.h"
#include "retrieval/core/grid.h"
#include "retrieval/core/units.h"
#include "retrieval/physics/gas.h"
#include "retrieval/physics/pulse_metrics.h"
#include "retrieval/preprocess/edge_rows.h"
#include "retrieval/preprocess/energy_combine.h"

namespace sw {

std::string PreprocessOptions::validate() const {
  std::ostringstream s;
  if (!(field_free_shift_fraction > 0 && field_free_shift_fraction < 1))
    s << "field_free_shift_fraction = " << field_free_shift_fraction << ": must lie in (0, 1)";
  else if (!(hot_pixels.sigma > 0))
    s << "hot_pixel_sigma = " << hot_pixels.sigma << ": must be > 0";
  else if (!(hot_pixels.ratio > 1))
    s << "hot_pixel_ratio = " << hot_pixels.ratio << ": must be > 1";
  else if (saturation_plateau_bins < 2)
    s << "saturation_plateau_bins = " << saturation_plateau_bins << ": must be >= 2";
  else if (energy_combine < 0)
    s << "energy_combine = " << energy_combine << ": must be 0 (auto), 1 (never) or >= 2";
  else if (!(combine_min_window_periods > 0) || !std::isfinite(combine_min_window_periods))
    s << "combine_min_window_periods = " << combine_min_window_periods << ": must be > 0";
  else if (!(combine_min_window_span_factor >= 0) || !std::isfinite(combine_min_window_span_factor))
    s << "combine_min_window_span_factor = " << combine_min_window_span_factor << ": must be >= 0";
  else if (!(combine_min_window_lags >= 2) || !std::isfinite(combine_min_window_lags))
    s << "combine_min_window_lags = " << combine_min_window_lags << ": must be >= 2";
  else if (!(combine_noise_sigmas > 0) || !std::isfinite(combine_noise_sigmas))
    s << "combine_noise_sigmas = " << combine_noise_sigmas << ": must be > 0";
  else if (grid_size != 0 && grid_size < 64)
    s << "grid_size = " << grid_size << ": must be 0 (auto) or >= 64";
  else if (auto e = support.validate(); !e.empty())
    s << "support." << e;
  else if (!std::isfinite(energy_window_lo_eV) || !std::isfinite(energy_window_hi_eV) ||
           ((energy_window_lo_eV != 0 || energy_window_hi_eV != 0) &&
            !(energy_window_lo_eV < energy_window_hi_eV)))
    s << "energy_window = [" << energy_window_lo_eV << ", " << energy_window_hi_eV
      << "] eV: must be finite with lo < hi (or both 0 = none)";
  else if (const std::string b = background.validate(); !b.empty())
    s << "background." << b;
  else if (const std::string l = lines.validate(); !l.empty())
    s << "lines." << l;
  else if (const std::string d = deblend.validate(); !d.empty())
    s << "deblend." << d;
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
      if (ov > 0)
        out.col(static_cast<Eigen::Index>(k)) +=
            counts.col(static_cast<Eigen::Index>(i)) * (ov / w);
    }
  }
  return out;
}

// The energy support of the signal (retrieval/preprocess/support.h), recorded in the summary.
EnergySupport energy_support(const Trace& trace, const PreprocessOptions& opt,
                             const Eigen::MatrixXd& sig, const Eigen::MatrixXd& counts,
                             const std::vector<double>& W, PreprocessSummary* s) {
  SupportOptions so = opt.support;
  if (so.max_gap_eV == 0.0)
    so.max_gap_eV =
        2.0 * units::au_to_eV(units::wavelength_nm_to_omega_au(trace.meta.ir_wavelength_nm));
  const EnergySupport band = find_energy_support(sig, counts, W, so);
  s->support_peak_sigma = band.peak_sigma;
  s->support_fills_window = band.fills_axis;
  s->support_core_share = band.found ? band.core_share : 1.0;
  if (!band.found) {
    s->warnings.push_back(
        "no energy bin of the delay-integrated spectrum stands " + std::to_string(so.min_sigma) +
        " sigma above the Poisson noise: no signal found, the XUV spectrum is not confined");
  } else {
    s->support_lo_eV = units::au_to_eV(band.lo_au);
    s->support_hi_eV = units::au_to_eV(band.hi_au);
    if (band.fills_axis)
      s->warnings.push_back(
          "the signal's energy support fills the whole energy axis: signal and "
          "background are not separated (no signal-free bins)");
  }
  return band;
}

}  // namespace

std::vector<LineEntry> scan_lines(const Trace& trace, const PreprocessOptions& options,
                                  std::string* why_not) {
  PreprocessSummary s;
  try {
    (void)preprocess(trace, options, &s);
  } catch (const Error& e) {
    if (why_not) *why_not = e.what();
    return {};
  }
  return s.lines;
}

std::size_t remove_hot_pixels(Eigen::MatrixXd& counts, const Eigen::MatrixXd& saturated, double k,
                              double ratio) {
  const Eigen::Index nd = counts.rows(), ne = counts.cols();
  std::size_t replaced = 0;
  if (nd < 2 || ne < 2) return 0;
  Eigen::MatrixXd fixed = counts;
  // Edge rows and columns compare with the neighbours they have (one delay or energy
  // neighbour, 3 or 5 of the 8-neighbourhood): a hot first or last delay row would otherwise
  // survive and pull the fit.
  for (Eigen::Index i = 0; i < nd; ++i)
    for (Eigen::Index j = 0; j < ne; ++j) {
      if (saturated.size() && saturated(i, j) > 0) continue;
      const double c = counts(i, j);
      const double rd =
          std::max(i > 0 ? counts(i - 1, j) : 0.0, i + 1 < nd ? counts(i + 1, j) : 0.0);
      if (!(c > ratio * std::max(rd, 1.0) && c > rd + k * std::sqrt(rd + 1.0)))
        continue;  // a ridge along delay (a harmonic) or a fluctuation
      double nb[8];
      int m = 0;
      for (Eigen::Index di = -1; di <= 1; ++di)
        for (Eigen::Index dj = -1; dj <= 1; ++dj)
          if ((di || dj) && i + di >= 0 && i + di < nd && j + dj >= 0 && j + dj < ne)
            nb[m++] = counts(i + di, j + dj);
      const double mean8 = std::accumulate(nb, nb + m, 0.0) / m;
      const bool has_l = j > 0, has_h = j + 1 < ne;
      const double el = has_l ? counts(i, j - 1) : counts(i, j + 1),
                   eh = has_h ? counts(i, j + 1) : el;
      const double re = std::max(el, eh);
      // Isolated along energy too: above both energy neighbours by k sigma (of the larger of
      // them and the 8-neighbour mean: two bins alone can be low by chance) and `ratio` times
      // the smaller. A row shifted by stage jitter has a high energy neighbour on one side.
      if (!(c > re + k * std::sqrt(std::max(re, mean8) + 1.0) &&
            c > ratio * std::max(std::min(el, eh), 1.0)))
        continue;
      std::nth_element(nb, nb + m / 2, nb + m);
      fixed(i, j) = nb[m / 2];
      ++replaced;
    }
  counts = fixed;
  return replaced;
}

RetrievalProblem preprocess(const Trace& trace, const PreprocessOptions& opt,
                            PreprocessSummary* sum) {
  const std::string where = trace.meta.source.empty() ? std::string("trace") : trace.meta.source;
  if (const std::string e = opt.validate(); !e.empty()) throw usage_error("preprocess: " + e);
  if (trace.meta.gas.empty())
    throw input_error(
        where + ": field 'gas' is missing; the ionization energy is needed (e.g. \"gas\": \"Ne\")");
  if (!(trace.meta.ir_wavelength_nm > 0))
    throw input_error(
        where +
        ": field 'ir_wavelength_nm' is missing or not positive; expected the IR wavelength in nm");
  if (trace.num_energies() < 8 || trace.num_delays() < 4)
    throw input_error(where + ": the scan has " + std::to_string(trace.num_delays()) +
                      " delays x " + std::to_string(trace.num_energies()) +
                      " energies; a retrieval needs at least 4 delays and 8 energy bins");
  PreprocessSummary s;
  const Gas& gas = find_gas(trace.meta.gas);
  const double ip = units::eV_to_au(gas.ionization_energy_eV);

  // 0. saturation, on the measured bins (a rebinning would smear the plateau).
  double sat_level = 0;
  const auto sat = detect_saturation(trace.counts, trace.meta.saturation_counts.value_or(0.0),
                                     opt.saturation_plateau_bins, &sat_level);
  Eigen::MatrixXd satm = sat.cast<double>();
  if (sat_level > 0) {
    s.saturated_bins = static_cast<std::size_t>(satm.sum());
    s.saturation_level_counts = sat_level;
    s.saturation_source = trace.meta.saturation_counts ? "sidecar" : "plateau";
  }

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
    if (s.saturated_bins) {  // any output bin fed by a saturated one is saturated
      satm = (rebin(satm, from, to).array() > 0).cast<double>().matrix();
      s.saturated_bins = static_cast<std::size_t>(satm.sum());
    }
    W = centres;
    s.energy_resampled = true;
  }
  s.energy_step_eV = units::au_to_eV(dW);
  s.measured_energy_step_eV = s.energy_step_eV;
  const Eigen::Index nd = counts.rows();
  Eigen::Index ne = counts.cols();  // changes when a window crops the axis
  s.total_counts = counts.sum();
  s.peak_counts = counts.maxCoeff();
  if (!(s.peak_counts > 0))
    throw input_error(where + ": the data are all zero; expected counts > 0");
  if (s.saturated_bins)
    s.warnings.push_back(std::to_string(s.saturated_bins) + " bins saturated at " +
                         format_g(sat_level) + " counts (" + s.saturation_source +
                         "): given zero weight, the engines fit the other bins");

  // 2. isolated hot pixels: far above both delay neighbours and both energy neighbours.
  if (opt.hot_pixels.remove)
    s.hot_pixels_replaced =
        remove_hot_pixels(counts, satm, opt.hot_pixels.sigma, opt.hot_pixels.ratio);

  // 1. background, a model B(W) per energy bin (the same in every delay row).
  std::vector<double> W_eV(W.size());
  for (std::size_t j = 0; j < W.size(); ++j) W_eV[j] = units::au_to_eV(W[j]);
  Eigen::VectorXd bgcol = Eigen::VectorXd::Zero(ne);
  if (trace.meta.background && !trace.meta.background_auto) {
    s.background_counts = *trace.meta.background;
    s.background_source = "sidecar";
    s.background.model = "sidecar constant";
    s.background.constant_counts = s.background_counts;
    bgcol.setConstant(s.background_counts);
  } else {
    const bool tof = !trace.meta.calibration.empty();
    const double off =
        tof ? param_number(trace.meta.calibration, "calibration.energy_offset_eV").value_or(0.0)
            : 0.0;
    // Saturated bins carry no count information: fill them with their row's largest other
    // value for the envelope search (they are signal, never background).
    Eigen::MatrixXd for_fit = counts;
    for (Eigen::Index i = 0; i < nd; ++i)
      for (Eigen::Index j = 0; j < ne; ++j)
        if (satm(i, j) > 0) for_fit(i, j) = s.peak_counts;
    s.background = fit_background(for_fit, W_eV, opt.background, tof, off);
    s.signal_free_bins = s.background.background_bins;
    if (s.background.model == "none") {
      s.background_source = "none";
      s.warnings.push_back(s.background.note);
    } else {
      s.background_source = "fit";
      s.background_counts = s.background.constant_counts;
      for (Eigen::Index j = 0; j < ne; ++j)
        bgcol(j) = s.background.at(W_eV[static_cast<std::size_t>(j)]);
    }
  }

  // 2b. lines of the gas and the analysis window.
  Eigen::MatrixXd blend = Eigen::MatrixXd::Zero(nd, ne);  // neighbour lines' estimated counts
  bool deblended = false;
  std::vector<UnseenLine> unseen;  // table lines on the axis that were not seen
  std::vector<char> masked;        // per energy bin: model-only margin beyond the window
  double streak_range = 0;         // largest shift of the rows' centroids (eV)
  double ref_centre_eV = 0;        // the reference line's centre
  {
    std::vector<double> spec(static_cast<std::size_t>(ne)), var(static_cast<std::size_t>(ne));
    for (Eigen::Index j = 0; j < ne; ++j) {
      spec[static_cast<std::size_t>(j)] = counts.col(j).sum() - static_cast<double>(nd) * bgcol(j);
      var[static_cast<std::size_t>(j)] = std::max(counts.col(j).sum(), 1.0);
    }
    LineSearch ls = find_lines(W_eV, spec, var, gas, trace.meta.lines, opt.lines);
    for (const auto& w : ls.warnings) s.warnings.push_back(w);
    unseen = ls.unseen;
    // Cross-check on the unstreaked edge rows (lines.h compare_line_patterns): the runs of rows
    // at either end whose centroid over the reference's support stays within
    // field_free_shift_fraction of the largest shift.
    // Per row: the centroid of the background-subtracted counts over the reference's support
    // (eV) and whether the row has positive counts there.
    std::vector<double> cen(static_cast<std::size_t>(nd), 0.0);
    std::vector<char> has(static_cast<std::size_t>(nd), 0);
    for (Eigen::Index i = 0; i < nd; ++i) {
      double a = 0, b = 0;
      for (Eigen::Index j = 0; j < ne; ++j) {
        const double w = W_eV[static_cast<std::size_t>(j)];
        if (w < ls.support_lo_eV || w > ls.support_hi_eV) continue;
        const double v = counts(i, j) - bgcol(j);
        a += v * w;
        b += v;
      }
      if (b > 0) {
        cen[static_cast<std::size_t>(i)] = a / b;
        has[static_cast<std::size_t>(i)] = 1;
      }
    }
    if (ls.reference >= 0 && trace.meta.kind != TraceKind::kRabbitt && nd >= 6) {
      // Quiet: within the fraction of the largest shift from the edge row's own centroid.
      const std::vector<Eigen::Index> rows =
          quiet_edge_rows(cen, has, opt.field_free_shift_fraction);
      if (!rows.empty()) {
        std::vector<double> fs(static_cast<std::size_t>(ne), 0.0), fv(fs.size(), 0.0);
        for (Eigen::Index j = 0; j < ne; ++j) {
          double c = 0;
          for (Eigen::Index i : rows) c += counts(i, j);
          fs[static_cast<std::size_t>(j)] = c - static_cast<double>(rows.size()) * bgcol(j);
          fv[static_cast<std::size_t>(j)] = std::max(c, 1.0);
        }
        LineOptions lo_ff = opt.lines;  // unstreaked lines are single-humped: a dip separates two
        lo_ff.dip_fraction = opt.lines.pattern_dip_fraction;
        const LineSearch lf = find_lines(W_eV, fs, fv, gas, trace.meta.lines, lo_ff);
        s.line_pattern_checked = true;
        s.line_pattern_disagreement = compare_line_patterns(
            ls, lf, opt.lines.pattern_tolerance_fraction * (lf.line_below_eV + lf.line_above_eV),
            opt.lines.pattern_min_strength);
        if (!s.line_pattern_disagreement.empty())
          s.warnings.push_back("line assignment in doubt: " + s.line_pattern_disagreement +
                               "; declare the lines in the sidecar or set --energy-window");
      }
    }
    s.photon_energy_eV = ls.photon_energy_eV;
    double lo = 0, hi = 0;
    if (opt.energy_window_lo_eV != 0 || opt.energy_window_hi_eV != 0) {
      lo = opt.energy_window_lo_eV;
      hi = opt.energy_window_hi_eV;
      s.window_source = "option";
    } else if (trace.meta.energy_window_eV.size() == 2) {
      lo = trace.meta.energy_window_eV[0];
      hi = trace.meta.energy_window_eV[1];
      s.window_source = "sidecar";
    } else if (opt.window_reference_line && ls.reference >= 0 &&
               trace.meta.kind != TraceKind::kRabbitt) {
      // (A harmonic comb is one line per harmonic: its lines are not windowed apart.)
      // Streaking range: the largest shift of the rows' centroids over the reference band.
      double streak = 0;
      std::vector<double> rc;
      for (std::size_t i = 0; i < cen.size(); ++i)
        if (has[i]) rc.push_back(cen[i]);
      if (!rc.empty()) {
        const double mean =
            std::accumulate(rc.begin(), rc.end(), 0.0) / static_cast<double>(rc.size());
        for (double c : rc) streak = std::max(streak, std::abs(c - mean));
      }
      streak_range = streak;
      if (opt.deblend_lines) {
        Eigen::MatrixXd sg = counts.rowwise() - bgcol.transpose();
        std::vector<double> str;
        blend = deblend_neighbours(ls, W_eV, sg, opt.deblend, &str);
        // Deblended also when a scale came out 0 (an assumed line that is absent): the window
        // is then cut at the neighbour's centre, not half way into the reference's band.
        deblended = has_neighbours(ls, W_eV);
        for (std::size_t k = 0; k < str.size(); ++k)
          if (str[k] > 0)
            s.warnings.push_back("line " + ls.lines[k].gas + " " + ls.lines[k].name +
                                 " subtracted as the reference line's image moved to " +
                                 format_g(*ls.lines[k].kinetic_energy_eV) + " eV, scale " +
                                 format_g(str[k]));
      }
      if (choose_window(ls, W_eV, streak, &lo, &hi, &s.warnings, deblended))
        s.window_source = "reference line";
    }
    // Only lines inside the analysed band are analysed.
    s.lines = ls.lines;
    if (!s.window_source.empty()) {
      // Crop every per-bin quantity to [lo, hi]. Where the window is cut at a subtracted
      // neighbour inside the reference's streaked band, the bins of one streaking range beyond
      // the cut stay, with zero weight: the XUV spectrum below the cut still reaches into the
      // window through the rows that streak it up, and without those bins the model has no
      // spectral unknowns for it (measured: +2 to +3 % on the FWHM of argon 3p cut at 3s).
      double lo_model = lo, hi_model = hi;
      if (deblended && ls.reference >= 0 && s.window_source == "reference line") {
        const double Wr = *ls.lines[static_cast<std::size_t>(ls.reference)].kinetic_energy_eV;
        ref_centre_eV = Wr;
        if (lo > Wr - ls.line_below_eV - streak_range + 1e-9) lo_model = lo - streak_range;
        if (hi < Wr + ls.line_above_eV + streak_range - 1e-9) hi_model = hi + streak_range;
      }
      std::vector<Eigen::Index> keep;
      for (Eigen::Index j = 0; j < ne; ++j)
        if (W_eV[static_cast<std::size_t>(j)] >= lo_model &&
            W_eV[static_cast<std::size_t>(j)] <= hi_model)
          keep.push_back(j);
      if (keep.size() < 8)
        throw input_error(where + ": the energy window [" + format_g(lo) + ", " + format_g(hi) +
                          "] eV (" + s.window_source + ") keeps " + std::to_string(keep.size()) +
                          " energy bins of the axis " + format_g(W_eV.front()) + " .. " +
                          format_g(W_eV.back()) + " eV; expected at least 8");
      const auto nk = static_cast<Eigen::Index>(keep.size());
      Eigen::MatrixXd c2(nd, nk), s2(nd, nk), l2(nd, nk);
      Eigen::VectorXd b2(nk);
      std::vector<double> w2(keep.size());
      masked.assign(keep.size(), 0);
      for (Eigen::Index q = 0; q < nk; ++q) {
        const Eigen::Index j = keep[static_cast<std::size_t>(q)];
        const double w = W_eV[static_cast<std::size_t>(j)];
        masked[static_cast<std::size_t>(q)] = w < lo || w > hi;
        c2.col(q) = counts.col(j);
        s2.col(q) = satm.col(j);
        l2.col(q) = blend.col(j);
        b2(q) = bgcol(j);
        w2[static_cast<std::size_t>(q)] = W[static_cast<std::size_t>(j)];
      }
      counts = c2;
      satm = s2;
      blend = l2;
      bgcol = b2;
      W = w2;
      ne = nk;
      s.window_lo_eV = lo;
      s.window_hi_eV = hi;
      for (LineEntry& e : s.lines) {
        const bool inside =
            e.kinetic_energy_eV && *e.kinetic_energy_eV > lo && *e.kinetic_energy_eV < hi;
        if (!e.reference && inside && e.relative_strength && *e.relative_strength > 0)
          s.warnings.push_back("line " + e.gas + " " + e.name +
                               " lies inside the analysis window [" + format_g(lo) + ", " +
                               format_g(hi) + "] eV: it is fitted as part of the analysed pulse");
      }
    }
  }
  // 4a. oversampled axis: k adjacent bins summed (counts conserved; energy_combine.h).
  const EnergyCombineChoice combine = choose_energy_combine(trace, opt, counts, bgcol, dW);
  s.signal_lag_extent_fs = combine.signal_lag_extent_fs;
  if (const int k = combine.k; k > 1) {
    s.energy_bins_left_out = sum_energy_bins(k, counts, blend, satm, bgcol, W, masked);
    s.energy_bins_combined = static_cast<std::size_t>(k);
    ne = counts.cols();
    dW *= k;
    s.energy_step_eV = units::au_to_eV(dW);
  }
  // Poisson variance of raw counts (>= 1 count to keep weights finite), then subtract. The
  // difference is kept signed: clipping it at 0 would bias every background-dominated bin up
  // (E[max(N - b, 0)] > E[N] - b), i.e. lift the spectral wings (measured: FWHM -7 % on a flat
  // 5 counts/bin under neon-150as with the Poisson projection; docs/validation.md).
  Eigen::MatrixXd var = counts.cwiseMax(1.0);
  Eigen::MatrixXd sig = counts.rowwise() - bgcol.transpose();
  if (deblended) sig -= blend;
  if (sig.size() > 0) s.signal_peak_counts = std::max(sig.colwise().mean().maxCoeff(), 0.0);
  // In the model-only margin the support sees the reference line's mirror image, not the
  // subtracted neighbour's residue (as the reference spectrum below).
  const bool any_masked = std::any_of(masked.begin(), masked.end(), [](char m) { return m != 0; });
  auto mirrored = [&](const Eigen::MatrixXd& m) {
    Eigen::MatrixXd out = m;
    const double c = units::eV_to_au(ref_centre_eV);
    for (Eigen::Index j = 0; j < ne; ++j) {
      if (!masked[static_cast<std::size_t>(j)]) continue;
      out.col(j).setZero();
      std::size_t u = 0;
      double f = 0;
      if (!axis_bracket(W, 2.0 * c - W[static_cast<std::size_t>(j)], &u, &f) || masked[u] ||
          masked[u - 1])
        continue;
      const auto q = static_cast<Eigen::Index>(u);
      out.col(j) = (1.0 - f) * m.col(q - 1) + f * m.col(q);
    }
    return out;
  };
  const Eigen::MatrixXd image = any_masked ? mirrored(sig) : Eigen::MatrixXd();
  const EnergySupport band = any_masked ? energy_support(trace, opt, image, mirrored(counts), W, &s)
                                        : energy_support(trace, opt, sig, counts, W, &s);
  // Depth of a cut inside the streaked band: the share of the reference line's delay-summed
  // counts that its mirror image puts beyond the cut (in the model-only margin).
  if (any_masked) {
    double beyond = 0, inside = 0;
    for (Eigen::Index j = 0; j < ne; ++j) {
      if (masked[static_cast<std::size_t>(j)])
        beyond += image.col(j).cwiseMax(0.0).sum();
      else
        inside += sig.col(j).cwiseMax(0.0).sum();
    }
    s.window_cut_share = beyond + inside > 0 ? beyond / (beyond + inside) : 0.0;
  }
  // Lines expected inside the signal's support but not seen: if present, their electrons are
  // fitted as XUV spectrum (quality check unseen_line_strength).
  if (band.found && trace.meta.kind != TraceKind::kRabbitt)
    for (const UnseenLine& u : unseen) {
      if (u.kinetic_energy_eV < s.support_lo_eV || u.kinetic_energy_eV > s.support_hi_eV) continue;
      s.unseen_lines.push_back(u);
      s.warnings.push_back(
          "line " + u.gas + " " + u.name + " expected at " + format_g(u.kinetic_energy_eV) +
          " eV inside the signal's support, not seen" +
          (u.separable ? " (strength " + format_g(u.strength, 2) + " +- " +
                             format_g(u.strength_sigma, 2) + ")"
                       : " (inside the analysed line's own band)") +
          ": if present it is fitted as part of the XUV spectrum; declare it in the sidecar's "
          "lines to have it deblended, or set --energy-window");
    }

  // 4. counts per bin -> |a|^2 (divide by bin width and by p).
  for (Eigen::Index j = 0; j < ne; ++j) {
    const double p = units::momentum_au(W[static_cast<std::size_t>(j)]);
    if (!(p > 0))
      throw input_error(where + ": energy axis reaches " +
                        std::to_string(units::au_to_eV(W[static_cast<std::size_t>(j)])) +
                        " eV; photoelectron energies must be > 0");
    const double f = 1.0 / (dW * p);
    sig.col(j) *= f;
    var.col(j) *= f * f;
  }

  // 5. central momentum at the photoelectron-spectrum centroid (energy density weighting).
  Eigen::VectorXd avg = Eigen::VectorXd::Zero(ne);
  for (Eigen::Index j = 0; j < ne; ++j)
    avg(j) = sig.col(j).mean() * units::momentum_au(W[static_cast<std::size_t>(j)]);
  double num = 0, den = 0;
  for (Eigen::Index j = 0; j < ne; ++j) {
    num += avg(j) * W[static_cast<std::size_t>(j)];
    den += avg(j);
  }
  if (!(den > 0))
    throw input_error(where + ": no signal above the background; nothing to retrieve");
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
  const double period =
      units::period_au(units::wavelength_nm_to_omega_au(trace.meta.ir_wavelength_nm));
  const std::vector<double>& tau = trace.delay_au;
  const double step_tau = nd > 1 ? (tau.back() - tau.front()) / static_cast<double>(nd - 1) : 0.0;
  double max_shift = 0;
  for (double c : centroid) max_shift = std::max(max_shift, std::abs(c - Wc));
  auto quiet_row = [&](Eigen::Index i) {
    return std::abs(centroid[static_cast<std::size_t>(i)] - Wc) <=
           opt.field_free_shift_fraction * max_shift;
  };
  Eigen::Index lo = 0, hi = nd - 1;
  while (lo < nd && quiet_row(lo)) ++lo;
  while (hi > lo && quiet_row(hi)) --hi;
  auto span = [&](Eigen::Index first, Eigen::Index end) {  // rows first..end-1
    return end > first ? tau[static_cast<std::size_t>(end - 1)] -
                             tau[static_cast<std::size_t>(first)] + step_tau
                       : 0.0;
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
  s.field_free_rows = quiet.size();
  // Saturated bins in the reference rows clip its peak: then its amplitude is not imposed.
  bool quiet_saturated = false;
  for (Eigen::Index i : quiet) quiet_saturated = quiet_saturated || satm.row(i).sum() > 0;
  if (s.field_free_measured) {
    for (Eigen::Index i : quiet)
      for (Eigen::Index j = 0; j < ne; ++j)
        ff[static_cast<std::size_t>(j)] += sig(i, j) / static_cast<double>(quiet.size());
    std::ostringstream os;
    os << quiet.size()
       << " edge rows with centroid shift <= " << opt.field_free_shift_fraction * 100
       << " % of the largest";
    if (s.reference == ReferenceSpectrum::kEdgeRows)
      os << " (spanning less than one IR period: shape only, centroid from a zero mean of A(t))";
    s.field_free_source = os.str();
    if (quiet_saturated) {
      s.field_free_measured = false;
      s.field_free_source += "; saturated there: shape not imposed";
      s.warnings.push_back(
          "the field-free rows contain saturated bins: the measured spectrum's amplitude is not "
          "imposed on the XUV (only its centroid)");
    }
  } else {
    for (Eigen::Index j = 0; j < ne; ++j) ff[static_cast<std::size_t>(j)] = sig.col(j).mean();
    s.field_free_source = "delay average";
    if (max_shift > 0)
      s.warnings.push_back(
          "no field-free delay rows at the scan edges (centroid shift below " +
          std::to_string(int(100 * opt.field_free_shift_fraction)) +
          " % of the largest): the spectral amplitude is not constrained, and the frequency-shift "
          "ambiguity is fixed by a zero mean of A(t) over the scan");
  }
  // In the model-only margin beyond a cut window the reference spectrum is the mirror image of
  // the reference line's own (about its centre): the data there hold the subtracted neighbour's
  // residue, which must not become XUV spectrum.
  if (any_masked) {
    Eigen::MatrixXd f1(1, ne);
    for (Eigen::Index j = 0; j < ne; ++j) f1(0, j) = ff[static_cast<std::size_t>(j)];
    const Eigen::MatrixXd f2 = mirrored(f1);
    for (Eigen::Index j = 0; j < ne; ++j) ff[static_cast<std::size_t>(j)] = std::max(f2(0, j), 0.0);
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
  if (satm.sum() > 0) pr.weight = (1.0 - satm.array()).matrix();
  if (std::any_of(masked.begin(), masked.end(), [](char m) { return m != 0; })) {
    if (pr.weight.size() == 0) pr.weight = Eigen::MatrixXd::Ones(nd, ne);
    for (Eigen::Index j = 0; j < ne; ++j)
      if (masked[static_cast<std::size_t>(j)]) pr.weight.col(j).setZero();
  }
  pr.energy_au = W;
  pr.delay_au = trace.delay_au;
  pr.ionization_energy_au = ip;
  pr.central_momentum_au = s.central_momentum_au;
  pr.ir_omega_au = units::wavelength_nm_to_omega_au(trace.meta.ir_wavelength_nm);
  if (trace.meta.energy_resolution_eV && *trace.meta.energy_resolution_eV > 0)
    pr.energy_resolution_au = units::eV_to_au(*trace.meta.energy_resolution_eV);
  pr.field_free_spectrum = ff;
  pr.reference = s.reference;
  pr.dipole = DipoleModel(opt.dipole, ip, s.central_momentum_au);
  if (band.found) {
    pr.support_lo_au = band.lo_au;
    pr.support_hi_au = band.hi_au;
  }
  if (s.bandwidth_ratio > 0.1)
    s.warnings.push_back(
        "bandwidth/energy = " + std::to_string(s.bandwidth_ratio) +
        ": one central momentum is questionable over this band (the ptychographic engine adds "
        "momentum nodes when its one-p0 fit stalls above the noise floor; the "
        "full model makes no such approximation)");
  if (sum) *sum = s;
  return pr;
}

Trace poisson_resample(const Trace& trace, unsigned long long seed) {
  Trace t = trace;
  std::mt19937_64 rng(seed);
  double level = 0;
  const auto sat = detect_saturation(trace.counts, trace.meta.saturation_counts.value_or(0.0),
                                     PreprocessOptions().saturation_plateau_bins, &level);
  for (Eigen::Index i = 0; i < t.counts.rows(); ++i)
    for (Eigen::Index j = 0; j < t.counts.cols(); ++j) {
      const double m = trace.counts(i, j);
      if (level > 0 && sat(i, j)) continue;  // the detector reads its limit whatever the draw
      if (m > 0) {
        std::poisson_distribution<long long> d(m);
        t.counts(i, j) = static_cast<double>(d(rng));
        if (level > 0) t.counts(i, j) = std::min(t.counts(i, j), level);
      }
    }
  return t;
}

Eigen::Matrix<std::uint8_t, Eigen::Dynamic, Eigen::Dynamic> detect_saturation(
    const Eigen::MatrixXd& counts, double sidecar_level, int plateau_bins, double* level) {
  const Eigen::Index nd = counts.rows(), ne = counts.cols();
  Eigen::Matrix<std::uint8_t, Eigen::Dynamic, Eigen::Dynamic> sat =
      Eigen::Matrix<std::uint8_t, Eigen::Dynamic, Eigen::Dynamic>::Zero(nd, ne);
  *level = 0;
  if (counts.size() == 0) return sat;
  if (sidecar_level > 0) {
    for (Eigen::Index i = 0; i < counts.size(); ++i)
      sat.data()[i] = counts.data()[i] >= sidecar_level * (1 - 1e-9) ? 1 : 0;
    if ((sat.array() > 0).count() > 0) *level = sidecar_level;
    return sat;
  }
  const double m = counts.maxCoeff();
  if (!(m > 0)) return sat;
  const double tol = 1e-9 * m;
  // 8-connected clusters of bins at the maximum; the plateau is every cluster of at least
  // plateau_bins bins (isolated ties at the maximum are normal at low counts).
  std::vector<Eigen::Index> stack, cluster;
  Eigen::Matrix<std::uint8_t, Eigen::Dynamic, Eigen::Dynamic> seen =
      Eigen::Matrix<std::uint8_t, Eigen::Dynamic, Eigen::Dynamic>::Zero(nd, ne);
  for (Eigen::Index i0 = 0; i0 < nd; ++i0)
    for (Eigen::Index j0 = 0; j0 < ne; ++j0) {
      if (seen(i0, j0) || std::abs(counts(i0, j0) - m) > tol) continue;
      cluster.clear();
      stack.assign(1, i0 * ne + j0);
      seen(i0, j0) = 1;
      while (!stack.empty()) {
        const Eigen::Index q = stack.back();
        stack.pop_back();
        cluster.push_back(q);
        const Eigen::Index i = q / ne, j = q % ne;
        for (int di = -1; di <= 1; ++di)
          for (int dj = -1; dj <= 1; ++dj) {
            const Eigen::Index a = i + di, b = j + dj;
            if (a < 0 || a >= nd || b < 0 || b >= ne || seen(a, b) ||
                std::abs(counts(a, b) - m) > tol)
              continue;
            seen(a, b) = 1;
            stack.push_back(a * ne + b);
          }
      }
      if (static_cast<int>(cluster.size()) >= plateau_bins) *level = m;
    }
  // A plateau fixes the detector's level: every bin at it is saturated.
  if (*level > 0)
    for (Eigen::Index i = 0; i < counts.size(); ++i)
      sat.data()[i] = std::abs(counts.data()[i] - m) <= tol ? 1 : 0;
  return sat;
}

void append_preprocess_params(const PreprocessSummary& s, std::vector<Param>* out) {
  auto P = [&](const std::string& k, auto v) { out->push_back({"preprocess." + k, v}); };
  auto I = [](std::size_t v) { return static_cast<long long>(v); };
  P("background_counts", s.background_counts);
  P("background_source", s.background_source);
  P("signal_free_bins", I(s.signal_free_bins));
  const BackgroundModel& b = s.background;
  P("background.model", b.model);
  if (s.background_source == "fit") {
    P("background.method",
      std::string("Poisson maximum likelihood over delay-independent bins outside the signal "
                  "envelope (retrieval/preprocess/background.h)"));
    P("background.constant_counts", b.constant_counts);
    P("background.constant_counts_sigma", b.constant_counts_sigma);
    if (b.has_tail) {
      P("background.tail_counts_at_0eV", b.tail_counts_at_zero);
      P("background.tail_counts_at_0eV_sigma", b.tail_counts_at_zero_sigma);
      P("background.tail_decay_eV", b.tail_decay_eV);
      P("background.tail_decay_eV_sigma", b.tail_decay_eV_sigma);
    }
    if (!b.below_onset_W_eV.empty()) P("background.tail_onset_eV", b.onset_eV);
    if (b.has_tof) {
      P("background.tof_counts", b.tof_counts);
      P("background.tof_counts_sigma", b.tof_counts_sigma);
      P("background.tof_reference_eV", b.tof_reference_eV);
    }
    P("background.rows", I(b.rows));
    P("background.deviance", b.fit_deviance);
  }
  if (!b.note.empty()) P("background.note", b.note);
  P("hot_pixels_replaced", I(s.hot_pixels_replaced));
  P("saturated_bins", I(s.saturated_bins));
  if (s.saturated_bins) {
    P("saturation_level_counts", s.saturation_level_counts);
    P("saturation_source", s.saturation_source);
  }
  if (s.photon_energy_eV > 0) P("photon_energy_eV", s.photon_energy_eV);
  if (s.line_pattern_checked)
    P("line_pattern_check", s.line_pattern_disagreement.empty()
                                ? std::string("the unstreaked edge rows agree")
                                : s.line_pattern_disagreement);
  for (const UnseenLine& u : s.unseen_lines) {
    const std::string k = "unseen_line_" + u.gas + "_" + u.name + ".";
    P(k + "kinetic_energy_eV", u.kinetic_energy_eV);
    if (u.separable) {
      P(k + "relative_strength", u.strength);
      P(k + "relative_strength_sigma", u.strength_sigma);
    }
    P(k + "relative_strength_upper_limit", u.upper_limit);
  }
  if (s.window_source.empty()) {
    P("window_source", std::string("whole axis"));
  } else {
    append_window_params(s.window_source, s.window_lo_eV, s.window_hi_eV, out);
    P("window_cut_share", s.window_cut_share);
  }
  P("energy_resampled", s.energy_resampled);
  P("energy_step_eV", s.energy_step_eV);
  P("energy_bins_combined", I(s.energy_bins_combined));
  if (s.energy_bins_combined > 1) {
    P("measured_energy_step_eV", s.measured_energy_step_eV);
    P("energy_bins_left_out", I(s.energy_bins_left_out));
  }
  if (s.signal_lag_extent_fs > 0) P("signal_lag_extent_fs", s.signal_lag_extent_fs);
  P("energy_jacobian", std::string("counts per unit energy divided by p = sqrt(2W)"));
  P("centroid_energy_eV", s.centroid_energy_eV);
  P("central_momentum_au", s.central_momentum_au);
  P("bandwidth_fwhm_eV", s.bandwidth_fwhm_eV);
  P("bandwidth_to_energy_ratio", s.bandwidth_ratio);
  P("field_free_spectrum", s.field_free_source);
  P("field_free_measured", s.field_free_measured);
  P("field_free_rows", I(s.field_free_rows));
  P("grid_size", I(s.grid_size));
  P("grid_dt_as", s.grid_dt_as);
  P("total_counts", s.total_counts);
  P("peak_counts", s.peak_counts);
  P("signal_peak_counts", s.signal_peak_counts);
}

void append_window_params(const std::string& source, double lo_eV, double hi_eV,
                          std::vector<Param>* out) {
  out->push_back({"preprocess.window_source", source});
  out->push_back({"preprocess.window_lo_eV", lo_eV});
  out->push_back({"preprocess.window_hi_eV", hi_eV});
}

}  // namespace sw
