#include "retrieval/analysis/rabbitt_lines.h"

#include <algorithm>
#include <cmath>
#include <limits>
#include <optional>

#include <Eigen/Dense>

#include "retrieval/core/error.h"
#include "retrieval/core/format.h"
#include "retrieval/core/golden_section.h"
#include "retrieval/core/units.h"
#include "retrieval/physics/atomic_delay.h"

namespace sw {

namespace {

// FWHM of a Gaussian over its standard deviation, 2 sqrt(2 ln 2).
constexpr double kFwhmPerSigma = 2.3548200450309493;

double normal_cdf(double x) { return 0.5 * std::erfc(-x / std::sqrt(2.0)); }

// Share of a unit-area Gaussian (centre c, standard deviation s) inside [lo, hi].
double gaussian_share(double c, double s, double lo, double hi) {
  return normal_cdf((hi - c) / s) - normal_cdf((lo - c) / s);
}

}  // namespace

std::vector<RabbittLineCandidate> rabbitt_line_candidates(const Gas& gas,
                                                          const std::vector<DeclaredLine>& declared,
                                                          std::vector<std::string>* warnings) {
  std::vector<RabbittLineCandidate> out;
  RabbittLineCandidate ref;
  ref.name = gas.lines.front().name;
  ref.gas = gas.symbol;
  ref.ionization_energy_eV = gas.ionization_energy_eV;
  ref.channel_l0 = gas.valence_l;
  ref.reference = true;
  out.push_back(ref);
  auto add = [&](const Gas& g, const std::string& name, double ip, bool decl) {
    // The reference itself (same gas, same threshold within 10 meV) is not added twice.
    if (g.symbol == gas.symbol && std::abs(ip - gas.ionization_energy_eV) < 0.01) {
      out.front().declared = out.front().declared || decl;
      return;
    }
    RabbittLineCandidate c;
    c.name = name;
    c.gas = g.symbol;
    c.ionization_energy_eV = ip;
    const int l = orbital_l_of_name(name);
    c.channel_l0 = l >= 0 ? l : g.valence_l;
    c.declared = decl;
    out.push_back(c);
  };
  if (declared.empty()) {
    for (const GasLine& l : gas.lines) add(gas, l.name, l.ionization_energy_eV, false);
    return out;
  }
  for (const DeclaredLine& d : declared) {
    const Gas& g = d.gas.empty() ? gas : find_gas(d.gas);
    std::optional<double> ip = d.ionization_energy_eV;
    if (!ip)
      for (const GasLine& l : g.lines)
        if (l.name == d.name) ip = l.ionization_energy_eV;
    if (!ip) {
      if (warnings)
        warnings->push_back("declared line '" + d.name + "' of " + g.symbol +
                            " is not in the gas table and has no ionization_energy_eV: left out "
                            "of the RABBITT line analysis");
      continue;
    }
    add(g, d.name, *ip, true);
  }
  return out;
}

int orbital_l_of_name(const std::string& name) {
  if (name.empty()) return -1;
  switch (name.back()) {
    case 's':
      return 0;
    case 'p':
      return 1;
    case 'd':
      return 2;
    case 'f':
      return 3;
    default:
      return -1;
  }
}

double measure_peak_fwhm_eV(const std::vector<double>& W, const std::vector<double>& s,
                            double centre, double half_range) {
  std::size_t lo = W.size(), hi = 0;
  for (std::size_t j = 0; j < W.size(); ++j)
    if (std::abs(W[j] - centre) <= half_range) {
      lo = std::min(lo, j);
      hi = std::max(hi, j);
    }
  if (lo >= hi || hi - lo < 2) return 0.0;
  std::size_t top = lo;
  double floor = s[lo];
  for (std::size_t j = lo; j <= hi; ++j) {
    if (s[j] > s[top]) top = j;
    floor = std::min(floor, s[j]);
  }
  const double half = floor + 0.5 * (s[top] - floor);
  if (!(s[top] > floor)) return 0.0;
  double left = 0, right = 0;
  bool lf = false, rf = false;
  for (std::size_t j = top; j > lo; --j)
    if (s[j - 1] < half) {
      left = W[j - 1] + (half - s[j - 1]) / (s[j] - s[j - 1]) * (W[j] - W[j - 1]);
      lf = true;
      break;
    }
  for (std::size_t j = top; j < hi; ++j)
    if (s[j + 1] < half) {
      right = W[j] + (s[j] - half) / (s[j] - s[j + 1]) * (W[j + 1] - W[j]);
      rf = true;
      break;
    }
  return lf && rf ? right - left : 0.0;
}

CombPeakModel fit_comb_peaks(const std::vector<double>& W, const std::vector<double>& s,
                             const std::vector<std::vector<PeakCentre>>& centres, int reference,
                             double fwhm, double spacing) {
  if (W.size() != s.size() || W.size() < 4)
    throw usage_error("fit_comb_peaks: " + std::to_string(W.size()) + " energies and " +
                      std::to_string(s.size()) + " spectrum values (need equal, >= 4).");
  if (!(fwhm > 0.0) || !(spacing > 0.0))
    throw usage_error("fit_comb_peaks: peak FWHM " + format_g(fwhm) + " eV and baseline spacing " +
                      format_g(spacing) + " eV must be > 0.");
  if (reference < 0 || reference >= static_cast<int>(centres.size()))
    throw usage_error("fit_comb_peaks: reference index " + std::to_string(reference) +
                      " is outside the " + std::to_string(centres.size()) + " candidates.");
  CombPeakModel m;
  m.peak_fwhm_eV = fwhm;
  m.peak_sigma_eV = fwhm / kFwhmPerSigma;
  const double sg = m.peak_sigma_eV;
  const std::size_t n = W.size();
  // Bin edges half way between centres.
  std::vector<double> edge(n + 1);
  for (std::size_t j = 1; j < n; ++j) edge[j] = 0.5 * (W[j - 1] + W[j]);
  edge[0] = W[0] - 0.5 * (W[1] - W[0]);
  edge[n] = W[n - 1] + 0.5 * (W[n - 1] - W[n - 2]);
  for (std::size_t k = 0; k < centres.size(); ++k)
    for (const PeakCentre& c : centres[k])
      if (c.centre_eV >= W.front() && c.centre_eV <= W.back())
        m.peaks.push_back({static_cast<int>(k), c.order, c.sideband, c.centre_eV, 0.0, 0.0});
  const std::size_t np = m.peaks.size();
  const std::size_t nb =
      static_cast<std::size_t>(std::ceil((W.back() - W.front()) / spacing)) + 1;  // hat nodes
  const std::size_t ncol = np + nb;
  Eigen::MatrixXd X =
      Eigen::MatrixXd::Zero(static_cast<Eigen::Index>(n), static_cast<Eigen::Index>(ncol));
  for (std::size_t p = 0; p < np; ++p)
    for (std::size_t j = 0; j < n; ++j)
      X(static_cast<Eigen::Index>(j), static_cast<Eigen::Index>(p)) =
          gaussian_share(m.peaks[p].centre_eV, sg, edge[j], edge[j + 1]);
  for (std::size_t b = 0; b < nb; ++b) {
    const double node = W.front() + spacing * static_cast<double>(b);
    for (std::size_t j = 0; j < n; ++j)
      X(static_cast<Eigen::Index>(j), static_cast<Eigen::Index>(np + b)) =
          std::max(0.0, 1.0 - std::abs(W[j] - node) / spacing);
  }
  Eigen::VectorXd y(static_cast<Eigen::Index>(n)), wt(static_cast<Eigen::Index>(n));
  for (std::size_t j = 0; j < n; ++j) {
    y(static_cast<Eigen::Index>(j)) = s[j];
    wt(static_cast<Eigen::Index>(j)) = 1.0 / std::max(s[j], 1.0);
  }
  // Least squares by column-pivoted QR of the weighted design (robust when two peaks of
  // different lines nearly coincide); the covariance from its R factor.
  const Eigen::VectorXd sw = wt.cwiseSqrt();
  const Eigen::MatrixXd Xw = sw.asDiagonal() * X;
  const Eigen::ColPivHouseholderQR<Eigen::MatrixXd> qr(Xw);
  m.line_area.assign(centres.size(), 0.0);
  m.line_area_sigma.assign(centres.size(), 0.0);
  m.line_significance.assign(centres.size(), 0.0);
  m.relative_strength.assign(centres.size(), 0.0);
  m.relative_strength_sigma.assign(centres.size(), 0.0);
  if (ncol >= n || qr.rank() < static_cast<Eigen::Index>(ncol)) return m;
  const Eigen::VectorXd a = qr.solve(Eigen::VectorXd(sw.asDiagonal() * y));
  // (X^T W X)^-1 = P R^-1 R^-T P^T.
  const Eigen::Index nc = static_cast<Eigen::Index>(ncol);
  const Eigen::MatrixXd R = qr.matrixR().topLeftCorner(nc, nc).triangularView<Eigen::Upper>();
  const Eigen::MatrixXd Rinv =
      R.triangularView<Eigen::Upper>().solve(Eigen::MatrixXd::Identity(nc, nc));
  Eigen::MatrixXd C =
      qr.colsPermutation() * (Rinv * Rinv.transpose()) * qr.colsPermutation().transpose();
  if (!a.allFinite() || !C.allFinite()) return m;
  const Eigen::VectorXd r = y - X * a;
  const double chi2 = r.dot(wt.asDiagonal() * r);
  m.chi2 = chi2;
  m.reduced_chi2 = chi2 / static_cast<double>(n - ncol);
  if (m.reduced_chi2 > 1.0) C *= m.reduced_chi2;
  m.fitted = true;
  for (std::size_t p = 0; p < np; ++p) {
    m.peaks[p].area = a(static_cast<Eigen::Index>(p));
    m.peaks[p].area_sigma =
        std::sqrt(std::max(C(static_cast<Eigen::Index>(p), static_cast<Eigen::Index>(p)), 0.0));
  }
  // Sums over index sets through the covariance: var(sum_P a) = 1^T C_PP 1.
  auto sum_var = [&](const std::vector<std::size_t>& P, const std::vector<std::size_t>& Q) {
    double v = 0;
    for (std::size_t i : P)
      for (std::size_t j : Q) v += C(static_cast<Eigen::Index>(i), static_cast<Eigen::Index>(j));
    return v;
  };
  std::vector<std::size_t> ref_harm_all;
  for (std::size_t k = 0; k < centres.size(); ++k) {
    std::vector<std::size_t> P;
    for (std::size_t p = 0; p < np; ++p)
      if (m.peaks[p].line == static_cast<int>(k)) P.push_back(p);
    for (std::size_t p : P) m.line_area[k] += m.peaks[p].area;
    m.line_area_sigma[k] = std::sqrt(std::max(sum_var(P, P), 0.0));
    m.line_significance[k] = m.line_area_sigma[k] > 0 ? m.line_area[k] / m.line_area_sigma[k] : 0.0;
  }
  // Relative strength: harmonic areas at the orders both the line and the reference have.
  for (std::size_t k = 0; k < centres.size(); ++k) {
    std::vector<std::size_t> Pk, Pr;
    for (std::size_t p = 0; p < np; ++p) {
      if (m.peaks[p].line != static_cast<int>(k) || m.peaks[p].sideband) continue;
      for (std::size_t q = 0; q < np; ++q)
        if (m.peaks[q].line == reference && !m.peaks[q].sideband &&
            m.peaks[q].order == m.peaks[p].order) {
          Pk.push_back(p);
          Pr.push_back(q);
        }
    }
    double ak = 0, ar = 0;
    for (std::size_t p : Pk) ak += m.peaks[p].area;
    for (std::size_t p : Pr) ar += m.peaks[p].area;
    if (Pk.empty() || !(ar > 0)) continue;
    const double ratio = ak / ar;
    const double v =
        (sum_var(Pk, Pk) - 2.0 * ratio * sum_var(Pk, Pr) + ratio * ratio * sum_var(Pr, Pr)) /
        (ar * ar);
    m.relative_strength[k] = ratio;
    m.relative_strength_sigma[k] = std::sqrt(std::max(v, 0.0));
  }
  return m;
}

namespace {

// sigma of a parameter from the curvature of chi2 around its minimum x (Delta chi^2 = 1).
template <class F>
double curvature_sigma(F chi2, double x, double h, double reduced_chi2) {
  const double c0 = chi2(x), cp = chi2(x + h), cm = chi2(x - h);
  const double curv = (cp - 2.0 * c0 + cm) / (h * h);
  return curv > 0 ? std::sqrt(2.0 / curv) * std::sqrt(std::max(reduced_chi2, 1.0)) : 0.0;
}

}  // namespace

CombAlignment align_comb(const std::vector<double>& W, const std::vector<double>& s,
                         const std::vector<std::vector<PeakCentre>>& predicted, int reference,
                         double fwhm, double spacing, double ref_eV, double start, double hw,
                         double max_scale_error) {
  auto placed = [&](double off, double scale) {
    std::vector<std::vector<PeakCentre>> c = predicted;
    for (auto& line : c)
      for (PeakCentre& p : line) p.centre_eV = ref_eV + off + scale * (p.centre_eV - ref_eV);
    return c;
  };
  auto chi2 = [&](double off, double scale) {
    const CombPeakModel m = fit_comb_peaks(W, s, placed(off, scale), reference, fwhm, spacing);
    return m.fitted ? m.chi2 : std::numeric_limits<double>::max();
  };
  // chi^2 in the offset is sharp (its minimum about a quarter sigma wide at high counts) and
  // has side minima where another line's set covers the peaks: a grid of quarter sigmas, the
  // three lowest local minima refined by golden section, the lowest kept.
  const double step = 0.25 * fwhm / kFwhmPerSigma;
  std::vector<double> xs, cs;
  for (double x = start - 0.5 * hw; x <= start + 0.5 * hw; x += step) {
    xs.push_back(x);
    cs.push_back(chi2(x, 1.0));
  }
  std::vector<std::size_t> minima;
  for (std::size_t i = 0; i < xs.size(); ++i)
    if ((i == 0 || cs[i] <= cs[i - 1]) && (i + 1 == xs.size() || cs[i] <= cs[i + 1]))
      minima.push_back(i);
  std::sort(minima.begin(), minima.end(),
            [&](std::size_t i, std::size_t j) { return cs[i] < cs[j]; });
  double off = start, best = std::numeric_limits<double>::max();
  for (std::size_t m = 0; m < std::min<std::size_t>(3, minima.size()); ++m) {
    const double x0 = xs[minima[m]];
    const double x =
        golden_section_min([&](double x1) { return chi2(x1, 1.0); }, x0 - step, x0 + step, 20);
    const double c = chi2(x, 1.0);
    if (c < best) {
      best = c;
      off = x;
    }
  }
  // chi^2 is far from unimodal in the scale (a wrong scale matches other peaks at the axis
  // ends): a grid whose step moves the farthest peak by half a peak sigma, then golden section.
  const double half_span = std::max(ref_eV - W.front(), W.back() - ref_eV);
  const double sstep = step / std::max(half_span, step);
  double scale = 1.0;
  for (int pass = 0; pass < 2; ++pass) {
    off = golden_section_min([&](double x) { return chi2(x, scale); }, off - step, off + step, 30);
    double cbest = chi2(off, scale);
    for (double x = 1.0 - max_scale_error; x <= 1.0 + max_scale_error; x += sstep) {
      const double c = chi2(off, x);
      if (c < cbest) {
        cbest = c;
        scale = x;
      }
    }
    scale = golden_section_min([&](double x) { return chi2(off, x); }, scale - sstep, scale + sstep,
                               30);
  }
  CombAlignment a;
  a.offset_eV = off;
  a.scale = scale;
  a.model = fit_comb_peaks(W, s, placed(off, scale), reference, fwhm, spacing);
  const double red = a.model.reduced_chi2;
  a.offset_eV_sigma =
      curvature_sigma([&](double x) { return chi2(x, scale); }, off, 0.2 * step, red);
  a.scale_sigma = curvature_sigma([&](double x) { return chi2(off, x); }, scale, 0.2 * sstep, red);
  return a;
}

SidebandWindowPlan plan_sideband_window(const CombPeakModel& m, const std::vector<char>& present,
                                        int line, int order, double centre, double max_half,
                                        double guard, double max_leakage) {
  SidebandWindowPlan w;
  w.half_width_eV = max_half;
  const double sg = m.peak_sigma_eV;
  double d = std::numeric_limits<double>::infinity();
  for (const CombPeak& p : m.peaks) {
    if (p.line == line || p.line < 0 || p.line >= static_cast<int>(present.size()) ||
        !present[static_cast<std::size_t>(p.line)])
      continue;
    const double e = std::abs(p.centre_eV - centre);
    if (e < d) {
      d = e;
      w.nearest_other_line = p.line;
    }
  }
  if (w.nearest_other_line < 0) return w;  // no other line: the single-line window
  w.nearest_other_eV = d;
  w.half_width_eV = std::min(max_half, d - guard * sg);
  if (w.half_width_eV < sg) {
    w.overlapped = true;
    w.half_width_eV = std::max(w.half_width_eV, 0.0);
    w.why = "the nearest peak of another line is " + format_g(d, 3) + " eV away, closer than " +
            format_g(guard + 1.0, 3) + " peak widths (sigma " + format_g(sg, 3) + " eV)";
    return w;
  }
  const double lo = centre - w.half_width_eV, hi = centre + w.half_width_eV;
  double own = 0, own_sigma = 0, other = 0;
  for (const CombPeak& p : m.peaks) {
    const double share = gaussian_share(p.centre_eV, sg, lo, hi);
    if (p.line == line && p.order == order) {
      own += std::max(p.area, 0.0) * share;
      own_sigma += p.area_sigma * share;
    } else if (p.line != line && p.line >= 0 && p.line < static_cast<int>(present.size()) &&
               present[static_cast<std::size_t>(p.line)]) {
      other += std::max(p.area, 0.0) * share;
    }
  }
  const double denom = std::max(own, own_sigma);
  w.leakage = denom > 0 ? other / denom : 0.0;
  if (w.leakage > max_leakage) {
    w.overlapped = true;
    w.why = "the other lines' peaks put " + format_g(100.0 * w.leakage, 3) +
            " % of the window's counts into it (limit " + format_g(100.0 * max_leakage, 3) + " %)";
  }
  return w;
}

RelativeSidebandDelay relative_sideband_delay(int order, double Wk, double phik, double sk,
                                              double Wr, double phir, double sr, double omega,
                                              double charge) {
  RelativeSidebandDelay r;
  r.order = order;
  r.energy_eV = units::au_to_eV(Wk);
  r.reference_energy_eV = units::au_to_eV(Wr);
  const double dphi = phik - phir;
  r.relative_phase_rad = dphi - units::kTwoPi * std::round(dphi / units::kTwoPi);
  r.relative_phase_rad_sigma = std::sqrt(sk * sk + sr * sr);
  r.relative_delay_as = units::au_to_as(r.relative_phase_rad / (2.0 * omega));
  r.relative_delay_as_sigma = units::au_to_as(r.relative_phase_rad_sigma / (2.0 * omega));
  r.corrected = Wk > omega && Wr > omega;
  if (r.corrected) {
    r.cc_correction_as = units::au_to_as(continuum_continuum_delay_au(Wk, omega, charge) -
                                         continuum_continuum_delay_au(Wr, omega, charge));
    r.relative_delay_as_corrected = r.relative_delay_as - r.cc_correction_as;
  }
  return r;
}

WeightedMean weighted_mean_delay(const std::vector<double>& v, const std::vector<double>& s) {
  if (v.empty() || v.size() != s.size())
    throw usage_error("weighted_mean_delay: " + std::to_string(v.size()) + " values and " +
                      std::to_string(s.size()) + " sigmas (need equal, >= 1).");
  WeightedMean m;
  double sw = 0, swx = 0;
  for (std::size_t i = 0; i < v.size(); ++i) {
    if (!(s[i] > 0.0) || !std::isfinite(s[i]))
      throw usage_error("weighted_mean_delay: sigma " + format_g(s[i]) + " is not > 0.");
    const double w = 1.0 / (s[i] * s[i]);
    sw += w;
    swx += w * v[i];
  }
  m.count = static_cast<int>(v.size());
  m.mean = swx / sw;
  m.sigma = 1.0 / std::sqrt(sw);
  if (v.size() > 1) {
    double chi2 = 0;
    for (std::size_t i = 0; i < v.size(); ++i)
      chi2 += (v[i] - m.mean) * (v[i] - m.mean) / (s[i] * s[i]);
    m.reduced_chi2 = chi2 / static_cast<double>(v.size() - 1);
    if (m.reduced_chi2 > 1.0) {
      m.sigma *= std::sqrt(m.reduced_chi2);
      m.scaled = true;
    }
  }
  return m;
}

}  // namespace sw
