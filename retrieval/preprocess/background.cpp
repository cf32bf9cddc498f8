#include "retrieval/preprocess/background.h"

#include <algorithm>
#include <cmath>
#include <limits>
#include <sstream>

#include <Eigen/Dense>

namespace sw {

std::string BackgroundOptions::validate() const {
  std::ostringstream s;
  if (group_bins < 1)
    s << "group_bins = " << group_bins << ": must be >= 1";
  else if (!(dispersion_sigma > 0))
    s << "dispersion_sigma = " << dispersion_sigma << ": must be > 0";
  else if (!(signal_fraction > 0 && signal_fraction < 1))
    s << "signal_fraction = " << signal_fraction << ": must lie in (0, 1)";
  else if (!(envelope_margin >= 0))
    s << "envelope_margin = " << envelope_margin << ": must be >= 0";
  else if (!(min_background_share > 0 && min_background_share < 1))
    s << "min_background_share = " << min_background_share << ": must lie in (0, 1)";
  else if (!(tail_decay_min_eV > 0 && tail_decay_max_eV > tail_decay_min_eV))
    s << "tail_decay_min_eV = " << tail_decay_min_eV
      << ", tail_decay_max_eV = " << tail_decay_max_eV << ": must satisfy 0 < min < max";
  return s.str();
}

namespace {
// Index of the below-onset bin nearest to W (the table holds bin centres).
std::size_t nearest_below_onset(const std::vector<double>& Ws, double W) {
  const auto it = std::lower_bound(Ws.begin(), Ws.end(), W);
  std::size_t k = static_cast<std::size_t>(it - Ws.begin());
  if (k == Ws.size() || (k > 0 && W - Ws[k - 1] < Ws[k] - W)) --k;
  return k;
}
}  // namespace

double BackgroundModel::at(double W) const {
  if (!below_onset_W_eV.empty() && W < onset_eV)
    return below_onset_counts[nearest_below_onset(below_onset_W_eV, W)];
  double b = constant_counts;
  if (has_tail) b += tail_counts_at_zero * std::exp(-W / tail_decay_eV);
  if (has_tof && W > tof_offset_eV)
    b += tof_counts * std::pow((tof_reference_eV - tof_offset_eV) / (W - tof_offset_eV), 1.5);
  return b;
}

double BackgroundModel::sigma_at(double W) const {
  if (!below_onset_W_eV.empty() && W < onset_eV)  // Poisson, mean over rows
    return std::sqrt(std::max(below_onset_counts[nearest_below_onset(below_onset_W_eV, W)], 0.0) /
                     static_cast<double>(std::max<std::size_t>(rows, 1)));
  if (covariance.size() == 0) return 0.0;
  Eigen::VectorXd g(covariance.rows());
  int k = 0;
  g(k++) = 1.0;
  if (has_tail) g(k++) = std::exp(-W / tail_decay_eV);
  if (has_tof)
    g(k++) = W > tof_offset_eV
                 ? std::pow((tof_reference_eV - tof_offset_eV) / (W - tof_offset_eV), 1.5)
                 : 0.0;
  double v = g.dot(covariance * g);
  // The decay's own uncertainty: dB/dw = a W / w^2 exp(-W/w) (treated as independent).
  if (has_tail && tail_decay_eV_sigma > 0) {
    const double d =
        tail_counts_at_zero * W / (tail_decay_eV * tail_decay_eV) * std::exp(-W / tail_decay_eV);
    v += d * d * tail_decay_eV_sigma * tail_decay_eV_sigma;
  }
  return std::sqrt(std::max(v, 0.0));
}

std::vector<bool> background_bins(const Eigen::MatrixXd& counts, const BackgroundOptions& o) {
  const Eigen::Index nd = counts.rows(), ne = counts.cols();
  std::vector<bool> bg(static_cast<std::size_t>(ne), false);
  if (nd < 1 || ne < 1) return bg;
  const Eigen::VectorXd mean = counts.colwise().mean().transpose();
  const double peak = mean.maxCoeff();
  const Eigen::Index g = o.group_bins;
  const Eigen::Index ng = (ne + g - 1) / g;
  // Dispersion index per group (needs >= 4 rows; fewer: no delay information).
  std::vector<double> D(static_cast<std::size_t>(ng), 1.0);
  std::vector<bool> varies(static_cast<std::size_t>(ng), false);
  if (nd >= 4) {
    for (Eigen::Index q = 0; q < ng; ++q) {
      const Eigen::Index j0 = q * g, len = std::min(g, ne - j0);
      const Eigen::VectorXd r = counts.middleCols(j0, len).rowwise().sum();
      const double m = r.mean();
      const double v = (r.array() - m).square().sum() / static_cast<double>(nd - 1);
      D[static_cast<std::size_t>(q)] = m > 0 ? v / m : 1.0;
    }
    std::vector<double> sorted = D;
    const auto q10 = static_cast<long>(sorted.size() / 10);
    std::nth_element(sorted.begin(), sorted.begin() + q10, sorted.end());
    const double base = std::max(1.0, sorted[static_cast<std::size_t>(q10)]);
    const double limit = base + o.dispersion_sigma * std::sqrt(2.0 / static_cast<double>(nd - 1));
    for (Eigen::Index q = 0; q < ng; ++q)
      varies[static_cast<std::size_t>(q)] = D[static_cast<std::size_t>(q)] > limit;
  }
  Eigen::Index first = ne, last = -1;
  for (Eigen::Index j = 0; j < ne; ++j) {
    // With delay rows the dispersion test decides (a strong delay-independent tail must stay
    // background); without them (fewer than 4 rows) the level does.
    const bool sig =
        nd >= 4 ? varies[static_cast<std::size_t>(j / g)] : mean(j) > o.signal_fraction * peak;
    if (sig) {
      first = std::min(first, j);
      last = std::max(last, j);
    }
  }
  if (last < 0) {  // no signal found anywhere: everything is background
    std::fill(bg.begin(), bg.end(), true);
    return bg;
  }
  const auto pad = static_cast<Eigen::Index>(
      std::ceil(o.envelope_margin * static_cast<double>(last - first + 1)));
  for (Eigen::Index j = 0; j < ne; ++j)
    bg[static_cast<std::size_t>(j)] =
        (j < first - pad || j > last + pad) && !varies[static_cast<std::size_t>(j / g)];
  return bg;
}

namespace {

struct LinearFit {
  Eigen::VectorXd theta;
  Eigen::MatrixXd cov;
  double loglik = -std::numeric_limits<double>::infinity();
  double deviance = 0.0;
};

// Poisson ML of S_j ~ Poisson(rows * X_j theta) by iteratively reweighted least squares.
LinearFit poisson_linear(const Eigen::MatrixXd& X, const Eigen::VectorXd& S, double rows) {
  const Eigen::Index n = X.rows(), k = X.cols();
  LinearFit f;
  const Eigen::VectorXd y = S / rows;  // per-row counts
  Eigen::VectorXd mu = y.cwiseMax(0.0).array() + 0.5 / rows;
  const double mu_floor = 1e-3 / rows;
  for (int it = 0; it < 50; ++it) {
    Eigen::MatrixXd A = Eigen::MatrixXd::Zero(k, k);
    Eigen::VectorXd b = Eigen::VectorXd::Zero(k);
    for (Eigen::Index j = 0; j < n; ++j) {
      const double w = 1.0 / std::max(mu(j), mu_floor);
      A.noalias() += w * X.row(j).transpose() * X.row(j);
      b.noalias() += w * y(j) * X.row(j).transpose();
    }
    const Eigen::VectorXd th = A.ldlt().solve(b);
    const Eigen::VectorXd nmu = X * th;
    const double change = (nmu - mu).cwiseAbs().maxCoeff();
    mu = nmu;
    f.theta = th;
    // Fisher information of theta for S = rows * y: rows * sum X X^T / mu.
    f.cov = (rows * A).inverse();
    if (change < 1e-10 * (1.0 + mu.cwiseAbs().maxCoeff())) break;
  }
  double ll = 0, dev = 0;
  for (Eigen::Index j = 0; j < n; ++j) {
    const double m = std::max(rows * mu(j), 1e-300);
    ll += S(j) * std::log(m) - m;
    dev += 2.0 * ((S(j) > 0 ? S(j) * std::log(S(j) / m) : 0.0) - (S(j) - m));
  }
  f.loglik = ll;
  f.deviance = dev;
  return f;
}

}  // namespace

BackgroundModel fit_background(const Eigen::MatrixXd& counts, const std::vector<double>& W,
                               const BackgroundOptions& o, bool tof, double tof_offset_eV) {
  BackgroundModel m;
  const std::vector<bool> bg = background_bins(counts, o);
  std::vector<Eigen::Index> idx;
  for (std::size_t j = 0; j < bg.size(); ++j)
    if (bg[j]) idx.push_back(static_cast<Eigen::Index>(j));
  m.background_bins = idx.size();
  m.rows = static_cast<std::size_t>(counts.rows());
  if (static_cast<double>(idx.size()) < o.min_background_share * static_cast<double>(bg.size()) ||
      idx.size() < 4) {
    std::ostringstream s;
    s << "only " << idx.size() << " of " << bg.size()
      << " energy bins are delay-independent and outside the signal envelope: no background fitted";
    m.note = s.str();
    return m;
  }
  const double rows = static_cast<double>(counts.rows());
  const Eigen::VectorXd colsum = counts.colwise().sum().transpose();  // delay-summed counts
  // Onset of the tail (header): the leading background bins, contiguous from the axis start.
  {
    std::size_t lead = 0;
    while (lead < idx.size() && idx[lead] == static_cast<Eigen::Index>(lead)) ++lead;
    const auto g = static_cast<std::size_t>(o.group_bins);
    if (o.fit_tail && lead >= 2 * g) {
      auto group = [&](std::size_t q) {
        double t = 0;
        for (std::size_t j = q; j < q + g; ++j) t += colsum(static_cast<Eigen::Index>(j));
        return t;
      };
      std::size_t qmax = 0;
      double ymax = group(0);
      for (std::size_t q = 1; q + g <= lead; ++q)
        if (const double y = group(q); y > ymax) {
          ymax = y;
          qmax = q;
        }
      // A rise and then a decay inside the run: a streaked wing rising towards the signal
      // envelope (no decay after its maximum) is not an onset.
      const double y0 = group(0), yend = group(lead - g);
      auto below = [&](double y) { return y < 0.5 * ymax && ymax - y > 5.0 * std::sqrt(ymax + y); };
      if (qmax > 0 && below(y0) && below(yend) && idx.size() - qmax >= 4) {
        m.onset_eV = W[qmax];
        for (std::size_t j = 0; j < qmax; ++j) {
          m.below_onset_W_eV.push_back(W[j]);
          m.below_onset_counts.push_back(colsum(static_cast<Eigen::Index>(j)) / rows);
        }
        idx.erase(idx.begin(), idx.begin() + static_cast<std::ptrdiff_t>(qmax));
        m.background_bins = idx.size();
      }
    }
  }
  const auto n = static_cast<Eigen::Index>(idx.size());
  Eigen::VectorXd S(n), Wb(n);
  for (Eigen::Index q = 0; q < n; ++q) {
    S(q) = colsum(idx[static_cast<std::size_t>(q)]);
    Wb(q) = W[static_cast<std::size_t>(idx[static_cast<std::size_t>(q)])];
  }
  const double Wref = W.front();
  const bool tof_ok = tof && Wref > tof_offset_eV;
  auto design = [&](bool tail, double w, bool with_tof) {
    Eigen::MatrixXd X(n, 1 + (tail ? 1 : 0) + (with_tof ? 1 : 0));
    for (Eigen::Index q = 0; q < n; ++q) {
      int c = 0;
      X(q, c++) = 1.0;
      if (tail) X(q, c++) = std::exp(-Wb(q) / w);
      if (with_tof) X(q, c++) = std::pow((Wref - tof_offset_eV) / (Wb(q) - tof_offset_eV), 1.5);
    }
    return X;
  };
  // Base: constant (+ time-of-flight term when significant).
  LinearFit base = poisson_linear(design(false, 1, false), S, rows);
  bool use_tof = false;
  std::ostringstream note;
  if (tof_ok) {
    const LinearFit t = poisson_linear(design(false, 1, true), S, rows);
    if (2.0 * (t.loglik - base.loglik) > 6.63) {  // chi^2(1) 1 % point
      base = t;
      use_tof = true;
    } else {
      note << "time-of-flight term not significant; ";
    }
  }
  // Tail: profile the decay energy on a log grid.
  LinearFit best = base;
  bool use_tail = false;
  double best_w = 0, w_sigma = 0;
  const double Wspan = Wb.maxCoeff() - Wb.minCoeff();
  if (o.fit_tail && n >= 6 && Wspan > 0) {
    const int ngrid = 40;
    std::vector<double> ws(ngrid), ll(ngrid);
    std::vector<LinearFit> fits(ngrid);
    const double l0 = std::log(o.tail_decay_min_eV), l1 = std::log(o.tail_decay_max_eV);
    int kbest = 0;
    for (int k = 0; k < ngrid; ++k) {
      ws[static_cast<std::size_t>(k)] = std::exp(l0 + (l1 - l0) * k / (ngrid - 1));
      fits[static_cast<std::size_t>(k)] =
          poisson_linear(design(true, ws[static_cast<std::size_t>(k)], use_tof), S, rows);
      ll[static_cast<std::size_t>(k)] = fits[static_cast<std::size_t>(k)].loglik;
      if (ll[static_cast<std::size_t>(k)] > ll[static_cast<std::size_t>(kbest)]) kbest = k;
    }
    double wb = ws[static_cast<std::size_t>(kbest)];
    // Parabola in ln w through the best point and its neighbours; sigma from the curvature
    // (profile likelihood: Var(ln w) = -1 / d2 lnL / d(ln w)^2).
    if (kbest > 0 && kbest < ngrid - 1) {
      const double h = (l1 - l0) / (ngrid - 1);
      const double ym = ll[static_cast<std::size_t>(kbest - 1)],
                   y0 = ll[static_cast<std::size_t>(kbest)],
                   yp = ll[static_cast<std::size_t>(kbest + 1)];
      const double curv = (yp - 2 * y0 + ym) / (h * h);
      if (curv < 0) {
        const double shift = -0.5 * (yp - ym) / h / curv;
        wb = std::exp(std::log(wb) + std::clamp(shift, -h, h));
        w_sigma = wb * std::sqrt(-1.0 / curv);
      }
    }
    const LinearFit t = poisson_linear(design(true, wb, use_tof), S, rows);
    const bool interior = kbest > 0 && kbest < ngrid - 1;
    if (2.0 * (t.loglik - base.loglik) > 9.21 && interior &&
        t.theta(1) > 0) {  // chi^2(2) 1 % point
      best = t;
      use_tail = true;
      best_w = wb;
    } else {
      note << "no significant low-energy tail; ";
    }
  }
  // The fitted amplitudes in the order of the design's columns, each with its sigma.
  int c = 0;
  auto next_amplitude = [&](double& value, double& sigma) {
    value = best.theta(c);
    sigma = std::sqrt(best.cov(c, c));
    ++c;
  };
  next_amplitude(m.constant_counts, m.constant_counts_sigma);
  if (use_tail) {
    m.has_tail = true;
    next_amplitude(m.tail_counts_at_zero, m.tail_counts_at_zero_sigma);
    m.tail_decay_eV = best_w;
    m.tail_decay_eV_sigma = w_sigma;
  }
  if (use_tof) {
    m.has_tof = true;
    next_amplitude(m.tof_counts, m.tof_counts_sigma);
    m.tof_reference_eV = Wref;
    m.tof_offset_eV = tof_offset_eV;
  }
  m.covariance = best.cov;
  m.fit_deviance = best.deviance;
  m.model = std::string("constant") + (use_tail ? " + exponential tail" : "") +
            (use_tof ? " + time-of-flight" : "");
  if (!m.below_onset_W_eV.empty())
    note << "below the tail's onset at " << m.onset_eV
         << " eV each bin's own delay average (the fit starts there); ";
  m.note = note.str();
  if (!m.note.empty()) m.note.resize(m.note.size() - 2);
  return m;
}

}  // namespace sw
