#include "io/tof_fit.h"

#include <algorithm>
#include <cmath>
#include <limits>
#include <map>
#include <numeric>
#include <sstream>

#include <Eigen/Dense>

#include "retrieval/core/error.h"
#include "retrieval/core/format.h"
#include "retrieval/core/units.h"

namespace sw {
namespace {

/// A detected peak: its window of time bins [lo, hi] with weights (background subtracted).
struct PeakWindow {
  std::size_t lo = 0, hi = 0;
  double height = 0.0;
  double counts = 0.0;
  double mean_time_ns = 0.0;
};

std::vector<PeakWindow> find_peaks(const std::vector<double>& t, const std::vector<double>& c,
                                   const TofFitOptions& o) {
  const std::size_t n = c.size();
  std::vector<double> sorted = c;
  std::sort(sorted.begin(), sorted.end());
  const double background = sorted[n / 10];
  std::vector<double> y(n), ys(n);
  for (std::size_t i = 0; i < n; ++i) y[i] = c[i] - background;
  // Three-bin moving average for detection only (a Poisson dip inside a peak is not a valley).
  for (std::size_t i = 0; i < n; ++i) {
    const std::size_t a = i == 0 ? 0 : i - 1, b = std::min(n - 1, i + 1);
    double s = 0;
    for (std::size_t k = a; k <= b; ++k) s += y[k];
    ys[i] = s / static_cast<double>(b - a + 1);
  }
  const double tallest = *std::max_element(ys.begin(), ys.end());
  if (!(tallest > 0)) return {};
  std::vector<std::size_t> maxima;
  for (std::size_t i = 1; i + 1 < n; ++i)
    if (ys[i] > ys[i - 1] && ys[i] >= ys[i + 1] && ys[i] >= o.min_peak_fraction * tallest)
      maxima.push_back(i);
  std::sort(maxima.begin(), maxima.end(),
            [&](std::size_t a, std::size_t b) { return ys[a] > ys[b]; });
  std::vector<char> claimed(n, 0);
  std::vector<PeakWindow> peaks;
  for (std::size_t m : maxima) {
    if (claimed[m]) continue;
    const double level = o.window_fraction * ys[m];
    std::size_t lo = m, hi = m;
    while (lo > 0 && !claimed[lo - 1] && ys[lo - 1] >= level) --lo;
    while (hi + 1 < n && !claimed[hi + 1] && ys[hi + 1] >= level) ++hi;
    PeakWindow p;
    p.lo = lo;
    p.hi = hi;
    p.height = ys[m];
    double w = 0, wt = 0;
    for (std::size_t i = lo; i <= hi; ++i) {
      claimed[i] = 1;
      w += y[i];
      wt += y[i] * t[i];
    }
    if (!(w > 0) || hi - lo < 2) continue;  // a one- or two-bin spike is not a harmonic
    p.counts = w;
    p.mean_time_ns = wt / w;
    peaks.push_back(p);
  }
  std::sort(peaks.begin(), peaks.end(), [](const PeakWindow& a, const PeakWindow& b) {
    return a.mean_time_ns < b.mean_time_ns;
  });
  return peaks;
}

/// Drift energy (eV) of flight time t (ns) for length L (m) and time zero t0 (ns).
double drift_energy_eV(double t_ns, double L, double t0) {
  TofCalibration c;
  c.length_m = L;
  c.t0_ns = t0;
  return tof_to_energy_eV(t_ns, c);
}

struct FitProblem {
  const std::vector<double>* t = nullptr;
  const std::vector<double>* c = nullptr;
  double background = 0.0;
  std::vector<PeakWindow> peaks;
  std::vector<double> target_eV;  // E_q per peak
  bool fit_offset = false;
  double fixed_offset = 0.0;
};

struct FitState {
  Eigen::Vector3d x{0, 0, 0};  // L (m), t0 (ns), E_offset (eV)
  Eigen::VectorXd r;
  Eigen::MatrixXd J;
  double cost = std::numeric_limits<double>::infinity();
  int iterations = 0;
  bool converged = false;
  bool valid = false;
};

/// Residuals and Jacobian at x; false if some window bin is not after t0.
bool evaluate(const FitProblem& p, const Eigen::Vector3d& x, Eigen::VectorXd* r,
              Eigen::MatrixXd* J) {
  const int np = p.fit_offset ? 3 : 2;
  const std::size_t m = p.peaks.size();
  r->resize(static_cast<Eigen::Index>(m));
  J->resize(static_cast<Eigen::Index>(m), np);
  const double L = x[0], t0 = x[1], off = p.fit_offset ? x[2] : p.fixed_offset;
  if (!(L > 0)) return false;
  const double bg = p.background;
  for (std::size_t k = 0; k < m; ++k) {
    const PeakWindow& w = p.peaks[k];
    double sw = 0, e = 0, dL = 0, dt0 = 0;
    for (std::size_t i = w.lo; i <= w.hi; ++i) {
      const double ti = (*p.t)[i];
      if (!(ti > t0)) return false;
      const double wi = (*p.c)[i] - bg;
      const double ed = drift_energy_eV(ti, L, t0);
      sw += wi;
      e += wi * ed;
      dL += wi * 2.0 * ed / L;
      dt0 += wi * 2.0 * ed / (ti - t0);
    }
    const auto kk = static_cast<Eigen::Index>(k);
    (*r)[kk] = e / sw + off - p.target_eV[k];
    (*J)(kk, 0) = dL / sw;
    (*J)(kk, 1) = dt0 / sw;
    if (p.fit_offset) (*J)(kk, 2) = 1.0;
  }
  return true;
}

/// Levenberg-Marquardt with Marquardt's diagonal scaling.
FitState levenberg_marquardt(const FitProblem& p, Eigen::Vector3d x, int max_iterations) {
  FitState s;
  const int np = p.fit_offset ? 3 : 2;
  if (!p.fit_offset) x[2] = p.fixed_offset;
  if (!evaluate(p, x, &s.r, &s.J)) return s;
  s.x = x;
  s.cost = s.r.squaredNorm();
  s.valid = true;
  double lambda = 1e-3;
  for (int it = 1; it <= max_iterations; ++it) {
    s.iterations = it;
    const Eigen::MatrixXd A = s.J.transpose() * s.J;
    const Eigen::VectorXd g = s.J.transpose() * s.r;
    bool accepted = false;
    for (int tries = 0; tries < 30 && !accepted; ++tries) {
      Eigen::MatrixXd Ad = A;
      for (int j = 0; j < np; ++j) Ad(j, j) += lambda * std::max(A(j, j), 1e-300);
      const Eigen::VectorXd step = Ad.ldlt().solve(-g);
      Eigen::Vector3d xn = s.x;
      for (int j = 0; j < np; ++j) xn[j] += step[j];
      Eigen::VectorXd rn;
      Eigen::MatrixXd Jn;
      if (evaluate(p, xn, &rn, &Jn) && rn.squaredNorm() <= s.cost) {
        double rel = 0;
        for (int j = 0; j < np; ++j)
          rel = std::max(rel, std::abs(step[j]) / std::max(std::abs(s.x[j]), 1e-3));
        s.x = xn;
        s.r = rn;
        s.J = Jn;
        s.cost = rn.squaredNorm();
        lambda = std::max(lambda / 10, 1e-12);
        accepted = true;
        if (rel < 1e-12) {
          s.converged = true;
          return s;
        }
      } else {
        lambda *= 10;
      }
    }
    if (!accepted) {  // no downhill step at any damping: a minimum to numerical precision
      s.converged = true;
      return s;
    }
  }
  return s;
}

int allowed_order(double q_real, int step) {
  if (step == 1) return static_cast<int>(std::lround(q_real));
  return 2 * static_cast<int>(std::lround((q_real - 1.0) / 2.0)) + 1;
}

}  // namespace

std::string TofFitOptions::validate() const {
  if (!(min_peak_fraction > 0 && min_peak_fraction < 1))
    return "min_peak_fraction = " + format_g(min_peak_fraction) + "; expected a fraction in (0, 1)";
  if (!(window_fraction > 0 && window_fraction < 1))
    return "window_fraction = " + format_g(window_fraction) + "; expected a fraction in (0, 1)";
  if (harmonic_step != 1 && harmonic_step != 2)
    return "harmonic_step = " + std::to_string(harmonic_step) +
           "; expected 2 (odd harmonics) or 1 (every order)";
  if (max_order_shift < 0)
    return "max_order_shift = " + std::to_string(max_order_shift) + "; expected >= 0";
  if (max_iterations < 1)
    return "max_iterations = " + std::to_string(max_iterations) + "; expected >= 1";
  return {};
}

TofCalibrationFit fit_tof_calibration(const std::vector<double>& times_ns,
                                      const std::vector<double>& counts,
                                      double ionization_energy_eV, double ir_wavelength_nm,
                                      const TofCalibration& initial, const TofFitOptions& options) {
  const std::string where = "TOF calibration fit";
  if (const std::string e = options.validate(); !e.empty())
    throw input_error(where + ": TofFitOptions." + e);
  if (const std::string e = initial.validate(); !e.empty())
    throw input_error(where + ": initial guess " + e);
  if (times_ns.size() != counts.size())
    throw input_error(where + ": " + std::to_string(times_ns.size()) + " flight times but " +
                      std::to_string(counts.size()) + " counts; expected one count per time bin");
  if (times_ns.size() < 8)
    throw input_error(where + ": " + std::to_string(times_ns.size()) +
                      " time bins; expected a spectrum of at least 8 bins");
  if (!(ionization_energy_eV > 0))
    throw input_error(where + ": ionization energy " + format_g(ionization_energy_eV) +
                      " eV; expected > 0");
  if (!(ir_wavelength_nm > 0))
    throw input_error(where + ": IR wavelength " + format_g(ir_wavelength_nm) +
                      " nm; expected > 0");
  for (std::size_t i = 0; i < counts.size(); ++i) {
    if (!std::isfinite(counts[i]) || !std::isfinite(times_ns[i]))
      throw input_error(where + ": bin " + std::to_string(i) + " is not finite (time " +
                        format_g(times_ns[i]) + " ns, counts " + format_g(counts[i]) + ")");
    if (i > 0 && !(times_ns[i] > times_ns[i - 1]))
      throw input_error(where + ": flight times are not strictly ascending at bin " +
                        std::to_string(i) + " (" + format_g(times_ns[i - 1]) + ", " +
                        format_g(times_ns[i]) + " ns)");
  }
  const double hw = units::kPlanckC_eV_nm / ir_wavelength_nm;  // hbar omega (eV)
  const int np = options.fit_energy_offset ? 3 : 2;

  FitProblem prob;
  prob.t = &times_ns;
  prob.c = &counts;
  {
    std::vector<double> sorted = counts;
    std::sort(sorted.begin(), sorted.end());
    prob.background = sorted[sorted.size() / 10];
  }
  const std::vector<PeakWindow> found = find_peaks(times_ns, counts, options);
  for (const PeakWindow& p : found)
    if (!(times_ns[p.lo] > initial.t0_ns))
      throw input_error(where + ": a peak at " + format_g(p.mean_time_ns) +
                        " ns starts before the initial t0_ns = " + format_g(initial.t0_ns) +
                        " ns; expected a guess of t0 before every peak");
  prob.fit_offset = options.fit_energy_offset;
  prob.fixed_offset = initial.energy_offset_eV;

  // Orders from a calibration: nearest allowed order of each peak's mean energy; duplicates
  // keep the larger peak; orders whose energy is not above E_offset are dropped.
  auto assign = [&](const Eigen::Vector3d& x, int shift, std::vector<PeakWindow>* peaks,
                    std::vector<int>* orders) {
    peaks->clear();
    orders->clear();
    std::map<int, std::size_t> best;  // order -> index into found
    const double off = options.fit_energy_offset ? x[2] : initial.energy_offset_eV;
    for (std::size_t k = 0; k < found.size(); ++k) {
      const PeakWindow& w = found[k];
      double sw = 0, e = 0;
      for (std::size_t i = w.lo; i <= w.hi; ++i) {
        const double wi = counts[i] - prob.background;
        sw += wi;
        e += wi * (times_ns[i] > x[1] ? drift_energy_eV(times_ns[i], x[0], x[1]) : 0.0);
      }
      const double E = e / sw + off;
      const int q = allowed_order((E + ionization_energy_eV) / hw, options.harmonic_step) +
                    shift * options.harmonic_step;
      if (!(q * hw - ionization_energy_eV > off)) continue;
      auto it = best.find(q);
      if (it == best.end())
        best[q] = k;
      else if (found[it->second].counts < w.counts)
        it->second = k;
    }
    for (const auto& [q, k] : best) {
      peaks->push_back(found[k]);
      orders->push_back(q);
    }
    // Keep ascending flight time (orders descend with time).
    std::vector<std::size_t> idx(peaks->size());
    std::iota(idx.begin(), idx.end(), 0);
    std::sort(idx.begin(), idx.end(), [&](std::size_t a, std::size_t b) {
      return (*peaks)[a].mean_time_ns < (*peaks)[b].mean_time_ns;
    });
    std::vector<PeakWindow> p2;
    std::vector<int> o2;
    for (std::size_t i : idx) {
      p2.push_back((*peaks)[i]);
      o2.push_back((*orders)[i]);
    }
    *peaks = std::move(p2);
    *orders = std::move(o2);
  };

  auto fit_with = [&](const std::vector<PeakWindow>& peaks, const std::vector<int>& orders,
                      const Eigen::Vector3d& x0) {
    FitProblem p = prob;
    p.peaks = peaks;
    p.target_eV.clear();
    for (int q : orders) p.target_eV.push_back(q * hw - ionization_energy_eV);
    return levenberg_marquardt(p, x0, options.max_iterations);
  };

  const Eigen::Vector3d x_init(initial.length_m, initial.t0_ns, initial.energy_offset_eV);
  const int max_shift = options.fit_energy_offset ? 0 : options.max_order_shift;
  FitState best;
  std::vector<PeakWindow> best_peaks;
  std::vector<int> best_orders;
  int best_shift = 0;
  for (int shift = -max_shift; shift <= max_shift; ++shift) {
    std::vector<PeakWindow> peaks;
    std::vector<int> orders;
    assign(x_init, shift, &peaks, &orders);
    if (static_cast<int>(peaks.size()) < np + 1) continue;
    FitState s = fit_with(peaks, orders, x_init);
    // Reassign with the fitted calibration until the orders are stable.
    for (int round = 0; round < 10 && s.valid; ++round) {
      std::vector<PeakWindow> p2;
      std::vector<int> o2;
      assign(s.x, 0, &p2, &o2);
      if (o2 == orders || static_cast<int>(p2.size()) < np + 1) break;
      peaks = std::move(p2);
      orders = std::move(o2);
      s = fit_with(peaks, orders, s.x);
    }
    if (!s.valid) continue;
    const double rms = std::sqrt(s.cost / static_cast<double>(peaks.size()));
    const double best_rms =
        best.valid ? std::sqrt(best.cost / static_cast<double>(best_peaks.size())) : 0.0;
    // Prefer more peaks, then the smaller residual.
    if (!best.valid || peaks.size() > best_peaks.size() ||
        (peaks.size() == best_peaks.size() && rms < best_rms)) {
      best = s;
      best_peaks = peaks;
      best_orders = orders;
      best_shift = shift;
    }
  }
  if (!best.valid)
    throw input_error(where + ": found " + std::to_string(found.size()) +
                      " harmonic peak(s) above " + format_g(100 * options.min_peak_fraction) +
                      " % of the tallest; expected at least " + std::to_string(np + 1) +
                      " peaks of distinct orders after t0 to fit " + std::to_string(np) +
                      " parameters");
  TofCalibrationFit out;
  out.calibration = initial;
  out.calibration.length_m = best.x[0];
  out.calibration.t0_ns = best.x[1];
  out.calibration.energy_offset_eV =
      options.fit_energy_offset ? best.x[2] : initial.energy_offset_eV;
  out.photon_energy_eV = hw;
  out.order_shift = best_shift;
  out.iterations = best.iterations;
  out.converged = best.converged;
  const std::size_t m = best_peaks.size();
  const double s2 = best.cost / static_cast<double>(m - static_cast<std::size_t>(np));
  const Eigen::MatrixXd cov = s2 * (best.J.transpose() * best.J).inverse();
  out.length_m_sigma = std::sqrt(std::max(0.0, cov(0, 0)));
  out.t0_ns_sigma = std::sqrt(std::max(0.0, cov(1, 1)));
  if (options.fit_energy_offset) out.energy_offset_eV_sigma = std::sqrt(std::max(0.0, cov(2, 2)));
  double ss = 0;
  for (std::size_t k = 0; k < m; ++k) {
    TofPeak pk;
    pk.order = best_orders[k];
    pk.time_ns = best_peaks[k].mean_time_ns;
    pk.counts = best_peaks[k].counts;
    pk.expected_energy_eV = pk.order * hw - ionization_energy_eV;
    pk.residual_eV = best.r[static_cast<Eigen::Index>(k)];
    pk.fitted_energy_eV = pk.expected_energy_eV + pk.residual_eV;
    pk.residual_ns = pk.residual_eV / tof_energy_jacobian_eV_per_ns(pk.time_ns, out.calibration);
    ss += pk.residual_eV * pk.residual_eV;
    out.peaks.push_back(pk);
  }
  out.rms_residual_eV = std::sqrt(ss / static_cast<double>(m));
  std::ostringstream msg;
  msg.precision(4);
  msg << "fitted L" << (options.fit_energy_offset ? ", t0 and E_offset" : " and t0") << " to " << m
      << " harmonic peaks (orders " << out.peaks.back().order << ".." << out.peaks.front().order
      << ", hbar omega " << hw
      << " eV): L = " << format_value_sigma(out.calibration.length_m, out.length_m_sigma, "m")
      << ", t0 = " << format_value_sigma(out.calibration.t0_ns, out.t0_ns_sigma, "ns")
      << ", rms residual " << out.rms_residual_eV << " eV";
  if (!out.converged) msg << "; NOT CONVERGED after " << out.iterations << " iterations";
  if (best_shift != 0)
    msg << "; the initial guess's order assignment was shifted by "
        << best_shift * options.harmonic_step << " orders";
  if (options.fit_energy_offset)
    msg << "; with E_offset free the orders rest on the initial guess (a shift of every order is "
           "equivalent to a change of E_offset)";
  if (found.size() > m)
    msg << "; " << found.size() - m
        << " peak(s) not used (same order as a larger peak, or below E_offset)";
  out.message = msg.str();
  return out;
}

}  // namespace sw
