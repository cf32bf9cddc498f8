#include "retrieval/analysis/line_delays.h"

#include <algorithm>
#include <cmath>
#include <limits>
#include <optional>
#include <sstream>

#include <Eigen/Dense>

#include "retrieval/analysis/line_profiles.h"
#include "retrieval/analysis/quality.h"
#include "retrieval/core/error.h"
#include "retrieval/core/units.h"
#include "retrieval/physics/gas.h"
#include "retrieval/preprocess/edge_rows.h"
#include "retrieval/preprocess/lines.h"
#include "retrieval/preprocess/preprocess.h"

namespace sw {

std::string LineDelayOptions::validate() const {
  if (std::string e = validate_described(*this); !e.empty()) return e;
  for (const std::string& n : names)
    if (n.empty()) return "names: an empty line name; expected names such as 2s, or none";
  if (consistency_band_half_width_factor != 0.0 && !(consistency_band_half_width_factor > 1.0)) {
    std::ostringstream m;
    m << "consistency_band_half_width_factor = " << consistency_band_half_width_factor
      << ": expected 0 (off) or > 1";
    return m.str();
  }
  return "";
}

double coulomb_laser_delay_au(double W, double T, double Z) {
  if (!(W > 0) || !(T > 0)) return 0.0;
  return Z / std::pow(2.0 * W, 1.5) * (2.0 - std::log(W * T));
}

namespace {

std::string label_of(const LineEntry& l, const std::string& scan_gas) {
  return (l.gas.empty() || l.gas == scan_gas) ? l.name : l.gas + " " + l.name;
}

double mean(const std::vector<double>& v) {
  double s = 0;
  for (double x : v) s += x;
  return v.empty() ? 0.0 : s / static_cast<double>(v.size());
}

double sample_sd(const std::vector<double>& v) {
  if (v.size() < 2) return 0.0;
  const double m = mean(v);
  double s = 0;
  for (double x : v) s += (x - m) * (x - m);
  return std::sqrt(s / static_cast<double>(v.size() - 1));
}

// Background-subtracted sums of each delay row over the whole axis: counts and counts x W.
struct RowSums {
  double counts = 0.0, weighted = 0.0;
};
std::vector<RowSums> row_sums(const Eigen::MatrixXd& C, const std::vector<double>& bg,
                              const std::vector<double>& W) {
  std::vector<RowSums> out(static_cast<std::size_t>(C.rows()));
  for (Eigen::Index i = 0; i < C.rows(); ++i)
    for (Eigen::Index j = 0; j < C.cols(); ++j) {
      const double n = C(i, j) - bg[static_cast<std::size_t>(j)];
      out[static_cast<std::size_t>(i)].counts += n;
      out[static_cast<std::size_t>(i)].weighted += n * W[static_cast<std::size_t>(j)];
    }
  return out;
}

// The lines found on the unstreaked edge rows alone (the runs of rows at either end of the scan
// whose centroid stays within `quiet` of the largest centroid shift, edge_rows.h, as in
// preprocess's cross-check, lines.h compare_line_patterns), with a dip of 0.1 of the peak
// separating two lines. Nothing when there are fewer than 3 such rows or the gas is unknown.
std::optional<LineSearch> unstreaked_lines(const Trace& trace, const std::vector<double>& bg,
                                           double quiet) {
  const Eigen::MatrixXd& C = trace.counts;
  const Eigen::Index nr = C.rows(), ne = C.cols();
  if (nr < 6 || ne < 8) return std::nullopt;
  std::vector<double> W_eV(static_cast<std::size_t>(ne));
  for (Eigen::Index j = 0; j < ne; ++j)
    W_eV[static_cast<std::size_t>(j)] =
        units::au_to_eV(trace.energy_au[static_cast<std::size_t>(j)]);
  std::vector<double> cen(static_cast<std::size_t>(nr), 0.0);
  std::vector<char> has(static_cast<std::size_t>(nr), 0);
  int m = 0;  // rows with a centroid
  const std::vector<RowSums> sums = row_sums(C, bg, W_eV);
  for (Eigen::Index i = 0; i < nr; ++i) {
    const RowSums& r = sums[static_cast<std::size_t>(i)];
    if (r.counts > 0) {
      cen[static_cast<std::size_t>(i)] = r.weighted / r.counts;
      has[static_cast<std::size_t>(i)] = 1;
      ++m;
    }
  }
  if (m < 6) return std::nullopt;
  const std::vector<Eigen::Index> rows = quiet_edge_rows(cen, has, quiet);
  if (rows.empty()) return std::nullopt;
  std::vector<double> fs(static_cast<std::size_t>(ne), 0.0), fv(fs.size(), 0.0);
  for (Eigen::Index j = 0; j < ne; ++j) {
    double c = 0;
    for (Eigen::Index i : rows) c += C(i, j);
    fs[static_cast<std::size_t>(j)] =
        c - static_cast<double>(rows.size()) * bg[static_cast<std::size_t>(j)];
    fv[static_cast<std::size_t>(j)] = std::max(c, 1.0);
  }
  try {
    LineOptions lo;
    lo.dip_fraction = lo.pattern_dip_fraction;
    return find_lines(W_eV, fs, fv, find_gas(trace.meta.gas), trace.meta.lines, lo);
  } catch (const Error&) {
    return std::nullopt;
  }
}

// Rows of one line: delay index, first moment, variance, counts.
struct Rows {
  std::vector<int> row;
  std::vector<double> M, var;
  double counts = 0;  // summed over every row (also the ones dropped)
};

}  // namespace

LineDelayEstimate centre_of_energy_estimate(const Eigen::MatrixXd& C, const std::vector<double>& W,
                                            const std::vector<double>& tau,
                                            const std::vector<double>& bg,
                                            const std::vector<LineEntry>& lines, double omega,
                                            const LineDelayOptions& o, bool measure_separation) {
  LineDelayEstimate est;
  const Eigen::Index nr = C.rows(), ne = C.cols();
  const std::size_t K = lines.size();
  if (K < 2 || nr < 8 || ne < 8 || static_cast<std::size_t>(ne) != W.size() ||
      static_cast<std::size_t>(nr) != tau.size() || bg.size() != W.size()) {
    est.why_not = "fewer than two lines, fewer than 8 rows or energy bins, or inconsistent axes";
    return est;
  }
  // Bin edges (the axis may be non-uniform).
  std::vector<double> edge(W.size() + 1);
  for (std::size_t j = 1; j < W.size(); ++j) edge[j] = 0.5 * (W[j - 1] + W[j]);
  edge[0] = W[0] - (edge[1] - W[0]);
  edge[W.size()] = W.back() + (W.back() - edge[W.size() - 1]);

  std::vector<double> c(K), p(K);
  for (std::size_t k = 0; k < K; ++k) {
    c[k] = units::eV_to_au(lines[k].kinetic_energy_eV.value_or(0.0));
    p[k] = units::momentum_au(c[k]);
  }
  // Half distance to the nearest other line (field-free centres).
  std::vector<double> half_gap(K, W.back() - W.front());
  for (std::size_t k = 0; k < K; ++k)
    for (std::size_t q = 0; q < K; ++q)
      if (q != k) half_gap[k] = std::min(half_gap[k], 0.5 * std::abs(c[q] - c[k]));

  // Overall centroid shift of each row (first guess of the lines' streaking).
  std::vector<double> rowM(static_cast<std::size_t>(nr), 0.0);
  {
    double mm = 0, nn = 0;
    const std::vector<RowSums> sums = row_sums(C, bg, W);
    for (Eigen::Index i = 0; i < nr; ++i) {
      const RowSums& r = sums[static_cast<std::size_t>(i)];
      rowM[static_cast<std::size_t>(i)] = r.counts > 0 ? r.weighted / r.counts : 0.0;
      if (r.counts > 0) {
        mm += r.weighted;
        nn += r.counts;
      }
    }
    const double M0 = nn > 0 ? mm / nn : 0.0;
    for (double& x : rowM) x -= M0;
  }

  // Net counts per unit energy of row i at energy y (linear between bin centres; 0 outside the
  // axis), and the raw counts' density for the variance.
  auto density = [&](Eigen::Index i, double y, double* raw) {
    *raw = 0;
    if (y <= W.front() || y >= W.back()) return 0.0;
    const std::size_t j =
        static_cast<std::size_t>(std::upper_bound(W.begin(), W.end(), y) - W.begin());
    const double t = (y - W[j - 1]) / (W[j] - W[j - 1]);
    const double w0 = edge[j] - edge[j - 1], w1 = edge[j + 1] - edge[j];
    const double c0 = C(i, static_cast<Eigen::Index>(j - 1)),
                 c1 = C(i, static_cast<Eigen::Index>(j));
    *raw = (1 - t) * std::max(c0, 0.0) / w0 + t * std::max(c1, 0.0) / w1;
    return (1 - t) * (c0 - bg[j - 1]) / w0 + t * (c1 - bg[j]) / w1;
  };
  // Moments of line k's band [lo, hi] in row i (fractional edge bins). The tail of every other
  // line q inside the band is removed by the mirror image of q about its current centre x_q
  // (its far side; common practice for peak deblending, as in retrieval/preprocess/lines.h),
  // skipped where the mirror point is nearer a third line than q.
  // The band follows its own first moment (re-centred until M = its centre): M is then the
  // root of F(M) = sum over [M - h, M + h] of (W - M) n(W), an M-estimator, whose Poisson
  // variance is sum (W_j - M)^2 n_j / D^2 with D = -dF/dM = N - h [rho(M + h) + rho(M - h)]
  // (Leibniz rule; rho the net counts per unit energy at an edge). An edge held half way to a
  // neighbour moves by 1/2 per unit of M (lo_move, hi_move = 0.5), one set by the line's own
  // width by 1. Without the edge terms the variance of a band of +-1.5 rms is understated by
  // a factor ~3 (Gaussian line: D / N = 1 - 2 c phi(c) / (2 Phi(c) - 1) = 0.55 at c = 1.5).
  auto band = [&](Eigen::Index i, std::size_t k, const std::vector<double>& xc, double lo,
                  double hi, double lo_move, double hi_move, double* N, double* M, double* var,
                  double* rms) {
    std::vector<double> net, raw, wj;
    std::vector<std::size_t> js;
    for (std::size_t j = 0; j < W.size(); ++j) {
      const double a = std::max(lo, edge[j]), b = std::min(hi, edge[j + 1]);
      if (b <= a) continue;
      const double f = (b - a) / (edge[j + 1] - edge[j]);
      double n = C(i, static_cast<Eigen::Index>(j)) - bg[j],
             v = std::max(C(i, static_cast<Eigen::Index>(j)), 1.0);
      for (std::size_t q = 0; q < xc.size(); ++q) {
        if (q == k) continue;
        const double y = 2.0 * xc[q] - W[j];
        bool nearer_other = false;
        for (std::size_t r2 = 0; r2 < xc.size(); ++r2)
          if (r2 != q && std::abs(y - xc[r2]) < std::abs(y - xc[q])) nearer_other = true;
        if (nearer_other) continue;
        double rw = 0;
        const double d = density(i, y, &rw);
        n -= d * (edge[j + 1] - edge[j]);
        v += rw * (edge[j + 1] - edge[j]);
      }
      js.push_back(j);
      net.push_back(f * n);
      raw.push_back(f * v);
      wj.push_back(W[j]);
    }
    double s = 0, sw = 0;
    for (std::size_t m = 0; m < net.size(); ++m) {
      s += net[m];
      sw += net[m] * wj[m];
    }
    *N = s;
    if (!(s > 0)) return;
    *M = sw / s;
    double v = 0, r = 0;
    for (std::size_t m = 0; m < net.size(); ++m) {
      const double d = wj[m] - *M;
      v += raw[m] * d * d;
      r += net[m] * d * d;
    }
    // The line's own density at an edge: the net density minus the neighbours' mirrored tails
    // there (as for the counts above).
    auto own_density = [&](double y) {
      double unused = 0;
      double d = density(i, y, &unused);
      for (std::size_t q = 0; q < xc.size(); ++q) {
        if (q == k) continue;
        const double yq = 2.0 * xc[q] - y;
        bool nearer_other = false;
        for (std::size_t r2 = 0; r2 < xc.size(); ++r2)
          if (r2 != q && std::abs(yq - xc[r2]) < std::abs(yq - xc[q])) nearer_other = true;
        if (!nearer_other) d -= density(i, yq, &unused);
      }
      return std::max(d, 0.0);
    };
    const double D =
        s - lo_move * (*M - lo) * own_density(lo) - hi_move * (hi - *M) * own_density(hi);
    const double Dc = std::max(D, 0.2 * s);  // guard: a band edge on a steep flank
    *var = v / (Dc * Dc);
    *rms = r > 0 ? std::sqrt(r / s) : 0.0;
  };

  // Step 1: per-row bands that follow each line.
  std::vector<Rows> rows(K);
  std::vector<double> h(half_gap);  // first pass: half way to the neighbours
  std::vector<std::vector<double>> x(K, std::vector<double>(static_cast<std::size_t>(nr)));
  for (int pass = 0; pass < 2; ++pass) {
    for (std::size_t k = 0; k < K; ++k)
      for (Eigen::Index i = 0; i < nr; ++i)
        x[k][static_cast<std::size_t>(i)] =
            c[k] + (p[k] / p[0]) * rowM[static_cast<std::size_t>(i)];
    std::vector<std::vector<double>> rms(K);
    std::vector<std::vector<double>> N(K, std::vector<double>(static_cast<std::size_t>(nr), 0.0)),
        M(K, std::vector<double>(static_cast<std::size_t>(nr), 0.0)),
        V(K, std::vector<double>(static_cast<std::size_t>(nr), 0.0));
    for (int it = 0; it < o.band_iterations; ++it) {
      for (Eigen::Index i = 0; i < nr; ++i) {
        const std::size_t ii = static_cast<std::size_t>(i);
        std::vector<double> xn(K), xc(K);
        for (std::size_t k = 0; k < K; ++k) xc[k] = x[k][ii];
        for (std::size_t k = 0; k < K; ++k) {
          double lo = x[k][ii] - h[k], hi = x[k][ii] + h[k];
          double lo_move = 1.0, hi_move = 1.0;
          for (std::size_t q = 0; q < K; ++q) {
            if (q == k) continue;
            const double mid = 0.5 * (x[q][ii] + x[k][ii]);
            if (x[q][ii] < x[k][ii]) {
              if (mid > lo) lo_move = 0.5;
              lo = std::max(lo, mid);
            } else {
              if (mid < hi) hi_move = 0.5;
              hi = std::min(hi, mid);
            }
          }
          double n = 0, m = x[k][ii], v = 0, r = 0;
          if (hi > lo) band(i, k, xc, lo, hi, lo_move, hi_move, &n, &m, &v, &r);
          N[k][ii] = n;
          M[k][ii] = m;
          V[k][ii] = v;
          xn[k] = n > 0 && m > lo && m < hi ? m : x[k][ii];
          if (it == o.band_iterations - 1 && n >= o.min_row_counts && r > 0) rms[k].push_back(r);
        }
        for (std::size_t k = 0; k < K; ++k) x[k][ii] = xn[k];
      }
    }
    if (pass == 0) {
      // Second pass: bands of band_half_width_factor x the line's typical rms width in a row.
      for (std::size_t k = 0; k < K; ++k) {
        if (rms[k].empty()) continue;
        std::nth_element(rms[k].begin(), rms[k].begin() + static_cast<long>(rms[k].size() / 2),
                         rms[k].end());
        h[k] = std::min(half_gap[k] * 2.0, o.band_half_width_factor * rms[k][rms[k].size() / 2]);
      }
      continue;
    }
    for (std::size_t k = 0; k < K; ++k) {
      rows[k] = Rows{};
      for (Eigen::Index i = 0; i < nr; ++i) {
        const std::size_t ii = static_cast<std::size_t>(i);
        rows[k].counts += std::max(N[k][ii], 0.0);
        if (N[k][ii] >= o.min_row_counts && V[k][ii] > 0 && std::isfinite(M[k][ii])) {
          rows[k].row.push_back(static_cast<int>(i));
          rows[k].M.push_back(M[k][ii]);
          rows[k].var.push_back(V[k][ii]);
        }
      }
    }
  }
  // Per-row Gaussian fits of every line (retrieval/analysis/line_profiles.h), started from the
  // bands' converged centres: their widths give the lines' separation in rms widths (reported:
  // the quality check line_separation_widths), and with row_estimator = "profile" their
  // centres replace the band moments of step 1. Skipped when neither is asked for (the band
  // estimator's bootstrap replicas).
  const bool profile = o.row_estimator == "profile";
  if (profile || measure_separation) {
    std::vector<double> bin_width(W.size()), s0(K), row(W.size());
    std::vector<std::vector<double>> widths(K);
    for (std::size_t j = 0; j < W.size(); ++j) bin_width[j] = edge[j + 1] - edge[j];
    for (std::size_t k = 0; k < K; ++k) {
      s0[k] = h[k] / o.band_half_width_factor;
      if (profile) rows[k] = Rows{};
    }
    for (Eigen::Index i = 0; i < nr; ++i) {
      const std::size_t ii = static_cast<std::size_t>(i);
      for (Eigen::Index j = 0; j < ne; ++j) row[static_cast<std::size_t>(j)] = C(i, j);
      std::vector<double> xs(K);
      for (std::size_t k = 0; k < K; ++k) xs[k] = x[k][ii];
      const RowProfileFit f = fit_row_profiles(row.data(), W, bin_width, bg, xs, s0);
      if (!f.ok) continue;
      for (std::size_t k = 0; k < K; ++k) {
        if (f.counts[k] >= o.min_row_counts) widths[k].push_back(f.width[k]);
        if (!profile) continue;
        rows[k].counts += f.counts[k];
        if (f.counts[k] >= o.min_row_counts) {
          rows[k].row.push_back(static_cast<int>(i));
          rows[k].M.push_back(f.centre[k]);
          rows[k].var.push_back(f.centre_var[k]);
        }
      }
    }
    // Smallest distance of two lines' field-free centres over the larger of their median
    // widths in a row (0 when a line has no fitted row).
    std::vector<double> width(K, 0.0);
    for (std::size_t k = 0; k < K; ++k)
      if (!widths[k].empty()) {
        auto mid = widths[k].begin() + static_cast<long>(widths[k].size() / 2);
        std::nth_element(widths[k].begin(), mid, widths[k].end());
        width[k] = *mid;
      }
    double sep = std::numeric_limits<double>::infinity();
    for (std::size_t k = 0; k < K; ++k)
      for (std::size_t q = k + 1; q < K; ++q)
        sep = std::min(sep, width[k] > 0 && width[q] > 0
                                ? std::abs(c[k] - c[q]) / std::max(width[k], width[q])
                                : 0.0);
    est.separation_widths = std::isfinite(sep) ? sep : 0.0;
  }
  for (std::size_t k = 0; k < K; ++k)
    if (rows[k].row.size() < 8) {
      est.why_not = "line " + lines[k].name + " has " + std::to_string(rows[k].row.size()) +
                    " delay rows with at least " + std::to_string(o.min_row_counts) +
                    " counts in its band; need 8";
      return est;
    }
  std::vector<LineMoments> lm(K);
  for (std::size_t k = 0; k < K; ++k) {
    lm[k].name = lines[k].name;
    lm[k].momentum_au = p[k];
    lm[k].counts = rows[k].counts;
    for (std::size_t n = 0; n < rows[k].row.size(); ++n) {
      lm[k].delay_au.push_back(tau[static_cast<std::size_t>(rows[k].row[n])]);
      lm[k].moment_au.push_back(rows[k].M[n]);
      lm[k].variance_au2.push_back(rows[k].var[n]);
    }
  }
  LineDelayEstimate fitted =
      fit_line_moments(lm, *std::min_element(tau.begin(), tau.end()),
                       *std::max_element(tau.begin(), tau.end()), omega, o.max_frequency_factor);
  fitted.separation_widths = est.separation_widths;
  return fitted;
}

LineDelayEstimate fit_line_moments(const std::vector<LineMoments>& m, double t_lo, double t_hi,
                                   double omega, double max_frequency_factor) {
  LineDelayEstimate est;
  const std::size_t K = m.size();
  std::vector<double> p(K);
  for (std::size_t k = 0; k < K; ++k) p[k] = m[k].momentum_au;
  if (K < 2 || !(t_hi > t_lo) || !(omega > 0)) {
    est.why_not = "fewer than two lines or an empty delay range";
    return est;
  }
  for (std::size_t k = 0; k < K; ++k)
    if (m[k].delay_au.size() < 8 || m[k].moment_au.size() != m[k].delay_au.size() ||
        m[k].variance_au2.size() != m[k].delay_au.size()) {
      est.why_not = "line " + m[k].name + ": fewer than 8 rows or inconsistent moments";
      return est;
    }
  // Joint fit. Basis of A_eff on a period 1.5 x the delay span.
  const double tc = 0.5 * (t_lo + t_hi);
  const double L = 1.5 * std::max(t_hi - t_lo, units::period_au(omega));
  const int J =
      std::max(2, static_cast<int>(std::floor(max_frequency_factor * omega * L / units::kTwoPi)));
  const int nA = 2 * J;
  const int iA = 0, ia = nA, ig = nA + static_cast<int>(K),
            id = nA + static_cast<int>(K) + static_cast<int>(K) - 1;
  const int np = nA + static_cast<int>(K) + 2 * (static_cast<int>(K) - 1);
  auto A_of = [&](const Eigen::VectorXd& P, double u, double* dA) {
    double A = 0, d = 0;
    for (int h = 1; h <= J; ++h) {
      const double w = units::kTwoPi * h / L;
      const double cs = std::cos(w * (u - tc)), sn = std::sin(w * (u - tc));
      A += P[iA + 2 * (h - 1)] * cs + P[iA + 2 * (h - 1) + 1] * sn;
      d += w * (-P[iA + 2 * (h - 1)] * sn + P[iA + 2 * (h - 1) + 1] * cs);
    }
    if (dA) *dA = d;
    return A;
  };
  std::size_t nd = 0;
  for (const LineMoments& r : m) nd += r.delay_au.size();
  auto residuals = [&](const Eigen::VectorXd& P, Eigen::VectorXd* r, Eigen::MatrixXd* Jm) {
    r->resize(static_cast<Eigen::Index>(nd));
    if (Jm) Jm->setZero(static_cast<Eigen::Index>(nd), np);
    Eigen::Index q = 0;
    for (std::size_t k = 0; k < K; ++k) {
      const double g = k == 0 ? 1.0 : P[ig + static_cast<int>(k) - 1];
      const double dl = k == 0 ? 0.0 : P[id + static_cast<int>(k) - 1];
      for (std::size_t n = 0; n < m[k].delay_au.size(); ++n, ++q) {
        const double u = m[k].delay_au[n] + dl;
        double dA = 0;
        const double A = A_of(P, u, &dA);
        const double f = -p[k] * A + 0.5 * A * A;
        const double s = std::sqrt(m[k].variance_au2[n]);
        (*r)[q] = (m[k].moment_au[n] - (P[ia + static_cast<int>(k)] + g * f)) / s;
        if (!Jm) continue;
        const double dfdA = -p[k] + A;
        for (int h = 1; h <= J; ++h) {
          const double w = units::kTwoPi * h / L;
          (*Jm)(q, iA + 2 * (h - 1)) = -g * dfdA * std::cos(w * (u - tc)) / s;
          (*Jm)(q, iA + 2 * (h - 1) + 1) = -g * dfdA * std::sin(w * (u - tc)) / s;
        }
        (*Jm)(q, ia + static_cast<int>(k)) = -1.0 / s;
        if (k > 0) {
          (*Jm)(q, ig + static_cast<int>(k) - 1) = -f / s;
          (*Jm)(q, id + static_cast<int>(k) - 1) = -g * dfdA * dA / s;
        }
      }
    }
  };
  // Start: a_k the weighted mean moments, g = 1, delta = 0, A_eff from the reference alone.
  Eigen::VectorXd P = Eigen::VectorXd::Zero(np);
  for (std::size_t k = 0; k < K; ++k) {
    double s = 0, sw = 0;
    for (std::size_t n = 0; n < m[k].moment_au.size(); ++n) {
      s += 1.0 / m[k].variance_au2[n];
      sw += m[k].moment_au[n] / m[k].variance_au2[n];
    }
    P[ia + static_cast<int>(k)] = sw / s;
    if (k > 0) P[ig + static_cast<int>(k) - 1] = 1.0;
  }
  {
    const LineMoments& r = m[0];
    Eigen::MatrixXd B(static_cast<Eigen::Index>(r.delay_au.size()), nA);
    Eigen::VectorXd y(static_cast<Eigen::Index>(r.delay_au.size()));
    for (std::size_t n = 0; n < r.delay_au.size(); ++n) {
      const double u = r.delay_au[n];
      const double wt = p[0] / std::sqrt(r.variance_au2[n]);
      for (int h = 1; h <= J; ++h) {
        const double w = units::kTwoPi * h / L;
        B(static_cast<Eigen::Index>(n), 2 * (h - 1)) = wt * std::cos(w * (u - tc));
        B(static_cast<Eigen::Index>(n), 2 * (h - 1) + 1) = wt * std::sin(w * (u - tc));
      }
      y[static_cast<Eigen::Index>(n)] = wt * (-(r.moment_au[n] - P[ia]) / p[0]);
    }
    Eigen::MatrixXd N = B.transpose().lazyProduct(B);
    N.diagonal().array() += 1e-9 * N.diagonal().maxCoeff();
    P.segment(iA, nA) = N.ldlt().solve(B.transpose() * y);
  }
  Eigen::VectorXd r;
  Eigen::MatrixXd Jm;
  residuals(P, &r, &Jm);
  double chi2 = r.squaredNorm();
  double mu = 1e-3;
  for (int it = 0; it < 200; ++it) {
    const Eigen::MatrixXd H = Jm.transpose().lazyProduct(Jm);  // small: no threaded GEMM
    const Eigen::VectorXd gvec = Jm.transpose() * r;
    bool accepted = false;
    for (int tries = 0; tries < 12 && !accepted; ++tries) {
      Eigen::MatrixXd Hd = H;
      for (int a = 0; a < np; ++a) Hd(a, a) += mu * std::max(H(a, a), 1e-12);
      const Eigen::VectorXd step = Hd.ldlt().solve(-gvec);
      const Eigen::VectorXd Pn = P + step;
      Eigen::VectorXd rn;
      residuals(Pn, &rn, nullptr);
      const double c2 = rn.squaredNorm();
      if (std::isfinite(c2) && c2 < chi2) {
        const double gain = chi2 - c2;
        P = Pn;
        residuals(P, &r, &Jm);
        chi2 = c2;
        mu = std::max(mu * 0.3, 1e-12);
        accepted = true;
        if (gain < 1e-9 * std::max(chi2, 1.0)) it = 1000;  // converged
      } else {
        mu *= 10;
      }
    }
    if (!accepted) break;
  }
  const int dof = static_cast<int>(nd) - np;
  est.reduced_chi2 = dof > 0 ? chi2 / dof : 0.0;
  const Eigen::MatrixXd H = Jm.transpose().lazyProduct(Jm);  // small: no threaded GEMM
  const Eigen::MatrixXd Cov = H.completeOrthogonalDecomposition().pseudoInverse();
  const double infl = std::max(1.0, est.reduced_chi2);
  est.delay_as.assign(K, 0.0);
  est.delay_cov_sigma_as.assign(K, 0.0);
  est.strength.assign(K, 1.0);
  for (std::size_t k = 1; k < K; ++k) {
    const int a = id + static_cast<int>(k) - 1;
    est.delay_as[k] = units::au_to_as(P[a]);
    est.delay_cov_sigma_as[k] = units::au_to_as(std::sqrt(std::max(Cov(a, a), 0.0) * infl));
    est.strength[k] = m[0].counts > 0 ? m[k].counts / m[0].counts : 0.0;
  }
  for (std::size_t k = 0; k < K; ++k) {
    LineCurve cv;
    cv.name = m[k].name;
    cv.shift_as = est.delay_as[k];
    cv.field_free_eV = units::au_to_eV(P[ia + static_cast<int>(k)]);
    cv.gain = k == 0 ? 1.0 : P[ig + static_cast<int>(k) - 1];
    const double dl = k == 0 ? 0.0 : P[id + static_cast<int>(k) - 1];
    for (std::size_t n = 0; n < m[k].delay_au.size(); ++n) {
      const double t = m[k].delay_au[n];
      const double A = A_of(P, t + dl, nullptr);
      cv.delay_fs.push_back(units::au_to_fs(t));
      cv.centroid_eV.push_back(units::au_to_eV(m[k].moment_au[n]));
      cv.sigma_eV.push_back(units::au_to_eV(std::sqrt(m[k].variance_au2[n])));
      cv.model_eV.push_back(
          units::au_to_eV(P[ia + static_cast<int>(k)] + cv.gain * (-p[k] * A + 0.5 * A * A)));
    }
    est.curves.push_back(std::move(cv));
  }
  est.ok = std::isfinite(chi2);
  if (!est.ok) est.why_not = "the fit of the first moments did not give a finite chi^2";
  return est;
}

void check_line_names(const std::vector<LineEntry>& lines, const LineDelayOptions& o,
                      const std::string& gas) {
  if (o.names.size() == 1 && o.names[0] == "none") return;
  for (const std::string& n : o.names) {
    bool known = false;
    for (const LineEntry& l : lines)
      known = known || n == l.name || n == label_of(l, gas) || n == l.gas + " " + l.name;
    if (!known) {
      std::string list;
      for (const LineEntry& l : lines) list += (list.empty() ? "" : ", ") + label_of(l, gas);
      throw usage_error("--lines " + n + ": not a line of this scan; its lines are " +
                        (list.empty() ? std::string("(none found)") : list) + ", or none");
    }
  }
}

LineDelayResult measure_line_delays(const Trace& trace, const std::vector<LineEntry>& lines_in,
                                    const std::vector<double>& bg, const LineDelayOptions& o) {
  if (const std::string e = o.validate(); !e.empty()) throw usage_error("line delays: " + e);
  LineDelayResult res;
  res.lines = lines_in;
  if (o.names.size() == 1 && o.names[0] == "none") {
    res.warnings.clear();
    return res;
  }
  const std::string gas = trace.meta.gas;
  check_line_names(lines_in, o, gas);
  // Lines merged by streaking: two strong lines closer than twice the streaking range form one
  // peak in the delay-integrated spectrum, and the detection places the pattern between them
  // (preprocess's check line_pattern_agreement). The line centres then come from the
  // unstreaked edge rows, where the lines are resolved: when every line there is found and
  // their photon energy differs from the detection's by more than the pattern tolerance, the
  // centres are moved to photon - Ip_k (the gas table's or the sidecar's thresholds), with the
  // strengths measured there for the choice of lines below.
  std::vector<LineEntry> lines = lines_in;
  if (o.reanchor_on_unstreaked_rows) {
    int r0 = -1;
    for (std::size_t k = 0; k < lines.size(); ++k)
      if (lines[k].reference && lines[k].kinetic_energy_eV) r0 = static_cast<int>(k);
    const std::optional<LineSearch> lf =
        r0 >= 0 ? unstreaked_lines(trace, bg, PreprocessOptions().field_free_shift_fraction)
                : std::nullopt;
    if (lf && lf->reference >= 0) {
      const LineEntry& R = lines[static_cast<std::size_t>(r0)];
      const double tol =
          LineOptions().pattern_tolerance_fraction * (lf->line_below_eV + lf->line_above_eV);
      // Each line of the scan, matched by gas and name, must be found on the edge rows.
      std::vector<int> match(lines.size(), -1);
      bool all = true;
      for (std::size_t k = 0; k < lines.size(); ++k) {
        for (std::size_t q = 0; q < lf->lines.size(); ++q)
          if (lf->lines[q].name == lines[k].name && lf->lines[q].gas == lines[k].gas &&
              lf->lines[q].kinetic_energy_eV)
            match[k] = static_cast<int>(q);
        all = all && match[k] >= 0 && lf->found[static_cast<std::size_t>(match[k])];
      }
      const LineEntry* ref_edge =
          all ? &lf->lines[static_cast<std::size_t>(match[static_cast<std::size_t>(r0)])] : nullptr;
      if (ref_edge && lines.size() >= 2 &&
          std::abs(*ref_edge->kinetic_energy_eV - *R.kinetic_energy_eV) > tol) {
        const double ref_strength = ref_edge->relative_strength.value_or(1.0);
        for (std::size_t k = 0; k < lines.size(); ++k) {
          const LineEntry& e = lf->lines[static_cast<std::size_t>(match[k])];
          // On the edge rows: the reference's centroid, the others at photon - Ip_k.
          lines[k].kinetic_energy_eV = e.kinetic_energy_eV;
          if (static_cast<int>(k) == r0) continue;
          // Strengths on the edge rows are relative to their strongest line.
          if (e.relative_strength && ref_strength > 0) {
            lines[k].relative_strength = *e.relative_strength / ref_strength;
            lines[k].relative_strength_sigma = e.relative_strength_sigma.value_or(0) / ref_strength;
          }
        }
        std::ostringstream w;
        w.precision(4);
        w << "line delays: the line centres are taken from the unstreaked edge rows (reference "
             "line "
          << R.name << " at " << *ref_edge->kinetic_energy_eV << " eV there, "
          << *R.kinetic_energy_eV << " eV from the delay-integrated spectrum, where the lines "
          << "merge; photon energy " << lf->photon_energy_eV << " eV)";
        res.warnings.push_back(w.str());
        res.extra.push_back({"line_delays.photon_energy_eV_unstreaked_rows", lf->photon_energy_eV});
        for (std::size_t k = 0; k < lines.size(); ++k)
          res.lines[k].kinetic_energy_eV = lines[k].kinetic_energy_eV;
      }
    }
  }
  int ref = -1;
  for (std::size_t k = 0; k < lines.size(); ++k)
    if (lines[k].reference) ref = static_cast<int>(k);
  if (ref < 0 || trace.energy_au.size() < 8) return res;
  const double Wlo = units::au_to_eV(trace.energy_au.front()),
               Whi = units::au_to_eV(trace.energy_au.back());
  std::vector<int> use{ref};
  for (std::size_t k = 0; k < lines.size(); ++k) {
    if (static_cast<int>(k) == ref) continue;
    const LineEntry& l = lines[k];
    if (!o.names.empty() && std::find_if(o.names.begin(), o.names.end(), [&](const std::string& n) {
                              return n == l.name || n == label_of(l, gas) ||
                                     n == l.gas + " " + l.name;
                            }) == o.names.end())
      continue;
    if (!l.kinetic_energy_eV || *l.kinetic_energy_eV <= Wlo || *l.kinetic_energy_eV >= Whi) {
      res.warnings.push_back("line " + label_of(l, gas) +
                             ": its centre lies outside the energy axis; no delay");
      continue;
    }
    if (!l.relative_strength || !(*l.relative_strength > 0)) {
      res.warnings.push_back("line " + label_of(l, gas) +
                             ": not measurable beside the reference line; no delay");
      continue;
    }
    // A declared line that was not seen (lines.cpp warns) carries no significant counts.
    if (l.relative_strength_sigma && *l.relative_strength < 3.0 * *l.relative_strength_sigma) {
      res.warnings.push_back("line " + label_of(l, gas) + ": strength below 3 sigma; no delay");
      continue;
    }
    use.push_back(static_cast<int>(k));
  }
  if (use.size() < 2) return res;
  if (!(trace.meta.ir_wavelength_nm > 0)) {
    res.warnings.push_back("line delays: no IR wavelength in the sidecar; no delays");
    return res;
  }
  const double omega = units::wavelength_nm_to_omega_au(trace.meta.ir_wavelength_nm);
  std::vector<LineEntry> sel;
  for (int k : use) sel.push_back(lines[static_cast<std::size_t>(k)]);
  const LineDelayEstimate e0 =
      centre_of_energy_estimate(trace.counts, trace.energy_au, trace.delay_au, bg, sel, omega, o);
  if (!e0.ok) {
    res.warnings.push_back("line delays (centre of energy) not measured: " + e0.why_not);
    return res;
  }
  // Band consistency (step 3b): the same estimate with the second band half width.
  const bool consistency = o.consistency_band_half_width_factor > 0.0;
  LineDelayOptions o2 = o;
  o2.band_half_width_factor = o.consistency_band_half_width_factor;
  LineDelayEstimate e0b;
  if (consistency)
    e0b = centre_of_energy_estimate(trace.counts, trace.energy_au, trace.delay_au, bg, sel, omega,
                                    o2, false);
  // Bootstrap replicas.
  const std::size_t K = sel.size();
  std::vector<std::vector<double>> bd(K), bs(K), bdiff(K);
  for (int b = 0; b < o.bootstrap; ++b) {
    const Trace rep = poisson_resample(
        trace, o.seed * 2654435761ULL + 17ULL * static_cast<unsigned long long>(b) + 5);
    const LineDelayEstimate e = centre_of_energy_estimate(rep.counts, rep.energy_au, rep.delay_au,
                                                          bg, sel, omega, o, false);
    if (!e.ok) continue;
    for (std::size_t k = 1; k < K; ++k) {
      bd[k].push_back(e.delay_as[k]);
      bs[k].push_back(e.strength[k]);
    }
    ++res.replicas_used;
    if (consistency && e0b.ok) {
      // Paired: the same replica with the second band.
      const LineDelayEstimate eb = centre_of_energy_estimate(
          rep.counts, rep.energy_au, rep.delay_au, bg, sel, omega, o2, false);
      if (eb.ok)
        for (std::size_t k = 1; k < K; ++k) bdiff[k].push_back(eb.delay_as[k] - e.delay_as[k]);
    }
  }
  const double tB = res.replicas_used >= 2 ? student_one_sigma_factor(res.replicas_used) : 0.0;
  if (consistency && e0b.ok) {
    res.band_difference_as.assign(K, 0.0);
    res.band_difference_sigma_as.assign(K, 0.0);
    for (std::size_t k = 1; k < K; ++k) {
      const int nd = static_cast<int>(bdiff[k].size());
      res.band_difference_as[k] = e0b.delay_as[k] - e0.delay_as[k];
      res.band_difference_sigma_as[k] =
          nd >= 2 ? student_one_sigma_factor(nd) * sample_sd(bdiff[k]) : 0.0;
    }
  }
  if (res.replicas_used < 2)
    res.warnings.push_back(
        "line delays: fewer than 2 bootstrap replicas could be analysed; sigma from the fit alone");
  const double T = units::period_au(omega);
  const double Wref = units::eV_to_au(e0.curves[0].field_free_eV);
  const double clc_ref =
      o.coulomb_laser_correction ? coulomb_laser_delay_au(Wref, T, o.ion_charge) : 0.0;
  res.curves = e0.curves;
  res.reduced_chi2 = e0.reduced_chi2;
  res.separation_widths = e0.separation_widths;
  for (std::size_t k = 0; k < K; ++k) {
    const std::size_t li = static_cast<std::size_t>(use[k]);
    LineEntry& l = res.lines[li];
    l.analysed = true;
    const double Wk = units::eV_to_au(e0.curves[k].field_free_eV);
    const double clc =
        o.coulomb_laser_correction ? coulomb_laser_delay_au(Wk, T, o.ion_charge) : 0.0;
    res.analysed.push_back(static_cast<int>(li));
    res.clc_delay_as.push_back(units::au_to_as(clc));
    res.clc_correction_as.push_back(units::au_to_as(clc - clc_ref));
    res.corrected_delay_as.push_back(e0.delay_as[k] - units::au_to_as(clc - clc_ref));
    res.delay_cov_sigma_as.push_back(e0.delay_cov_sigma_as[k]);
    l.delay_method = "centre of energy";
    if (o.coulomb_laser_correction) l.clc_delay_as = units::au_to_as(clc);
    if (k == 0) continue;
    const double sboot = tB * sample_sd(bd[k]);
    l.relative_delay_as = e0.delay_as[k];
    l.relative_delay_as_sigma = std::max(sboot, e0.delay_cov_sigma_as[k]);
    l.relative_strength = e0.strength[k];
    l.relative_strength_sigma = tB * sample_sd(bs[k]);
    if (o.coulomb_laser_correction) {
      l.clc_correction_as = res.clc_correction_as.back();
      l.relative_delay_as_corrected = res.corrected_delay_as.back();
    }
    const std::string key = "line_delays." + (l.gas.empty() ? gas : l.gas) + "_" + l.name;
    res.extra.push_back({key + ".delay_as_sigma_bootstrap", sboot});
    res.extra.push_back({key + ".delay_as_sigma_fit", e0.delay_cov_sigma_as[k]});
    res.extra.push_back({key + ".delay_as_bootstrap_mean", mean(bd[k])});
    res.extra.push_back({key + ".gain", e0.curves[k].gain});
    res.extra.push_back({key + ".rows_used", static_cast<long long>(e0.curves[k].delay_fs.size())});
    if (!res.band_difference_as.empty()) {
      res.extra.push_back({key + ".band_difference_as", res.band_difference_as[k]});
      res.extra.push_back({key + ".band_difference_sigma_as", res.band_difference_sigma_as[k]});
    }
  }
  res.extra.push_back(
      {"line_delays.method", std::string("centre of energy (joint first-moment fit)")});
  res.extra.push_back({"line_delays.reduced_chi2", e0.reduced_chi2});
  res.extra.push_back({"line_delays.separation_widths", e0.separation_widths});
  res.extra.push_back(
      {"line_delays.bootstrap_replicas", static_cast<long long>(res.replicas_used)});
  res.extra.push_back(
      {"line_delays.coulomb_laser_formula",
       std::string(o.coulomb_laser_correction ? "Z/(2W)^1.5 [2 - ln(W T_IR)], Nagele et al. 2011"
                                              : "off")});
  if (e0.reduced_chi2 > 3.0) {
    std::ostringstream w;
    w.precision(3);
    w << "line delays: the joint first-moment fit has reduced chi^2 " << e0.reduced_chi2
      << " (the common-curve model does not describe the moments to their Poisson noise); the "
         "delay sigma is "
         "scaled by it";
    res.warnings.push_back(w.str());
  }
  res.done = true;
  return res;
}

}  // namespace sw
