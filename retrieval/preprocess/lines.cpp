#include "retrieval/preprocess/lines.h"

#include <algorithm>
#include <cmath>
#include <optional>
#include <sstream>

#include "retrieval/core/error.h"
#include "retrieval/core/format.h"
#include "retrieval/core/statistics.h"
#include "retrieval/core/units.h"

namespace sw {

std::string LineOptions::validate() const {
  std::ostringstream s;
  if (!(min_significance > 0))
    s << "min_significance = " << min_significance << ": must be > 0";
  else if (!(support_fraction > 0 && support_fraction < 1))
    s << "support_fraction = " << support_fraction << ": must lie in (0, 1)";
  else if (!(min_relative_strength >= 0 && min_relative_strength < 1))
    s << "min_relative_strength = " << min_relative_strength << ": must lie in [0, 1)";
  else if (!(mirror_systematic_fraction >= 0))
    s << "mirror_systematic_fraction = " << mirror_systematic_fraction << ": must be >= 0";
  else if (!(dip_fraction >= 0 && dip_fraction < 1))
    s << "dip_fraction = " << dip_fraction << ": must lie in [0, 1)";
  else if (!(pattern_dip_fraction > 0 && pattern_dip_fraction < 1))
    s << "pattern_dip_fraction = " << pattern_dip_fraction << ": must lie in (0, 1)";
  else if (!(pattern_min_strength > 0 && pattern_min_strength <= 1))
    s << "pattern_min_strength = " << pattern_min_strength << ": must lie in (0, 1]";
  else if (!(pattern_tolerance_fraction > 0))
    s << "pattern_tolerance_fraction = " << pattern_tolerance_fraction << ": must be > 0";
  return s.str();
}

namespace {

struct Candidate {
  std::string name, gas;
  double ip_eV = 0;
  double typical = 1;
  bool declared = false;
};

}  // namespace

bool present(const LineSearch& s, std::size_t k) {
  return (k < s.found.size() && s.found[k]) || (k < s.assumed.size() && s.assumed[k]);
}

std::optional<double> neighbour_centre(const LineSearch& s, std::size_t k,
                                       const std::vector<double>& W) {
  if (W.empty() || static_cast<int>(k) == s.reference || !present(s, k) ||
      !s.lines[k].kinetic_energy_eV)
    return std::nullopt;
  const double c = *s.lines[k].kinetic_energy_eV;
  if (!(c > 0) || c < W.front() || c > W.back()) return std::nullopt;
  return c;
}

bool has_neighbours(const LineSearch& s, const std::vector<double>& W) {
  if (s.reference < 0) return false;
  for (std::size_t k = 0; k < s.lines.size(); ++k)
    if (neighbour_centre(s, k, W)) return true;
  return false;
}

bool axis_bracket(const std::vector<double>& W, double w, std::size_t* u, double* f) {
  if (W.size() < 2 || w < W.front() || w > W.back()) return false;
  *u = static_cast<std::size_t>(std::upper_bound(W.begin(), W.end(), w) - W.begin());
  *u = std::min(std::max<std::size_t>(*u, 1), W.size() - 1);
  *f = (w - W[*u - 1]) / (W[*u] - W[*u - 1]);
  return true;
}

LineSearch find_lines(const std::vector<double>& W, const std::vector<double>& counts,
                      const std::vector<double>& var, const Gas& gas,
                      const std::vector<DeclaredLine>& declared, const LineOptions& o) {
  if (const std::string e = o.validate(); !e.empty()) throw usage_error("lines: " + e);
  LineSearch out;
  const std::size_t n = W.size();
  if (n < 3 || counts.size() != n || var.size() != n) return out;

  // Candidates.
  std::vector<Candidate> cand;
  if (!declared.empty()) {
    for (std::size_t i = 0; i < declared.size(); ++i) {
      const DeclaredLine& d = declared[i];
      Candidate c;
      c.name = d.name;
      c.gas = d.gas.empty() ? gas.symbol : find_gas(d.gas).symbol;
      c.declared = true;
      const Gas& g = d.gas.empty() ? gas : find_gas(d.gas);
      const GasLine* t = nullptr;
      for (const GasLine& l : g.lines)
        if (l.name == d.name) t = &l;
      if (d.ionization_energy_eV) {
        c.ip_eV = *d.ionization_energy_eV;
      } else if (t) {
        c.ip_eV = t->ionization_energy_eV;
      } else {
        std::string known;
        for (const GasLine& l : g.lines) known += (known.empty() ? "" : ", ") + l.name;
        throw input_error("sidecar field 'lines[" + std::to_string(i) + "]': line '" + d.name +
                          "' of " + g.symbol +
                          " is not in the gas table, so \"auto\" has no value; "
                          "expected one of " +
                          known + " or a number in eV");
      }
      c.typical =
          d.relative_strength ? *d.relative_strength : (t ? t->typical_relative_strength : 1.0);
      cand.push_back(c);
    }
  } else {
    for (const GasLine& l : gas.lines)
      cand.push_back(
          {l.name, gas.symbol, l.ionization_energy_eV, l.typical_relative_strength, false});
  }
  if (cand.empty()) return out;

  // Smoothed spectrum, its peak and the peak's support.
  const std::vector<double> sm = moving_average(counts, 2);
  const std::size_t jp =
      static_cast<std::size_t>(std::max_element(sm.begin(), sm.end()) - sm.begin());
  const double peak = sm[jp];
  if (!(peak > 0)) return out;
  // Walks outward from the peak while the smoothed spectrum stays above `level`; with
  // o.dip_fraction > 0 also stops where it rises again by that fraction of the peak above its
  // lowest value so far (the dip between two resolved lines).
  auto walk = [&](double level, std::size_t* a, std::size_t* b) {
    *a = jp;
    *b = jp;
    double low = peak;
    while (*a > 0 && sm[*a - 1] > level) {
      if (o.dip_fraction > 0 && sm[*a - 1] > low + o.dip_fraction * peak) break;
      low = std::min(low, sm[--*a]);
    }
    low = peak;
    while (*b + 1 < n && sm[*b + 1] > level) {
      if (o.dip_fraction > 0 && sm[*b + 1] > low + o.dip_fraction * peak) break;
      low = std::min(low, sm[++*b]);
    }
  };
  std::size_t lo = jp, hi = jp;
  walk(o.support_fraction * peak, &lo, &hi);

  // Reference centre: centroid of the smoothed spectrum over its half-maximum band.
  double Wp = W[jp];
  {
    std::size_t a = jp, b = jp;
    walk(0.5 * peak, &a, &b);
    double num = 0, den = 0;
    for (std::size_t j = a; j <= b; ++j) {
      num += counts[j] * W[j];
      den += counts[j];
    }
    if (den > 0) Wp = num / den;
  }
  const double lh = Wp - W[lo], rh = W[hi] - Wp;
  out.line_below_eV = lh;
  out.line_above_eV = rh;
  // The mirror image of the spectrum about the reference centre, s(2 Wp - W): the reference
  // line's own tail at W (0 where the mirror point leaves the axis).
  auto mirror = [&](double w, double* v) {
    const double x = 2.0 * Wp - w;
    if (x < W.front() || x > W.back()) {
      *v = 0;
      return 0.0;
    }
    const std::size_t j =
        static_cast<std::size_t>(std::lower_bound(W.begin(), W.end(), x) - W.begin());
    const std::size_t k = std::min(j, n - 1);
    *v = std::max(var[k], 0.0);
    return counts[k];
  };
  // Counts of a line at centre c over its cell [c0, c1], minus the reference's mirrored tail
  // (not for the reference itself); false when the cell leaves the axis or is empty.
  // `sub` receives the subtracted tail's counts.
  auto cell_counts = [&](double c, double c0, double c1, bool subtract, double* cnt, double* v,
                         double* sub) {
    if (c < W.front() || c > W.back() || c1 <= c0) return false;
    *cnt = 0;
    *v = 0;
    *sub = 0;
    for (std::size_t j = 0; j < n; ++j)
      if (W[j] >= c0 && W[j] <= c1) {
        double mv = 0;
        const double m = subtract ? mirror(W[j], &mv) : 0.0;
        *cnt += counts[j] - m;
        *sub += m;
        *v += std::max(var[j], 0.0) + mv;
      }
    return *v > 0;
  };

  // The reference's counts over its support (for the strength floor of the hypotheses).
  double Cref = 0;
  for (std::size_t j = lo; j <= hi; ++j) Cref += counts[j];

  // Hypotheses: candidate h is the peak.
  struct Hyp {
    double score = 0;
    std::vector<double> centre, c0, c1, cnt, v, sig, sys;
    std::vector<char> measurable, seen;
  };
  std::vector<Hyp> hyp(cand.size());
  for (std::size_t h = 0; h < cand.size(); ++h) {
    Hyp& H = hyp[h];
    const std::size_t m = cand.size();
    for (auto* v : {&H.centre, &H.c0, &H.c1, &H.cnt, &H.v, &H.sig, &H.sys}) v->assign(m, 0.0);
    for (auto* f : {&H.measurable, &H.seen}) f->assign(m, 0);
    const double photon = Wp + cand[h].ip_eV;
    for (std::size_t k = 0; k < m; ++k) H.centre[k] = photon - cand[k].ip_eV;
    // Cells: the reference's support moved to each line, cut half way to the nearest
    // other line centre.
    for (std::size_t k = 0; k < m; ++k) {
      double a = H.centre[k] - lh, b = H.centre[k] + rh;
      for (std::size_t q = 0; q < m; ++q) {
        if (q == k || std::abs(H.centre[q] - H.centre[k]) < 1e-9) continue;
        const double mid = 0.5 * (H.centre[q] + H.centre[k]);
        if (H.centre[q] < H.centre[k])
          a = std::max(a, mid);
        else
          b = std::min(b, mid);
      }
      H.c0[k] = a;
      H.c1[k] = b;
    }
    for (std::size_t k = 0; k < m; ++k) {
      if (k == h) continue;
      const double c = H.centre[k];
      // Inside the peak's own half-maximum band: not separable from it.
      if (std::abs(c - Wp) < 0.5 * (lh + rh) * 0.5) continue;
      double sub = 0;
      if (!(c > 0) || !cell_counts(c, H.c0[k], H.c1[k], true, &H.cnt[k], &H.v[k], &sub)) continue;
      H.measurable[k] = 1;
      // Poisson noise plus the mirror estimate's systematic error.
      const double sys = o.mirror_systematic_fraction * std::max(sub, 0.0);
      H.sys[k] = sys;
      H.sig[k] = H.cnt[k] / std::sqrt(H.v[k] + sys * sys);
      if (H.sig[k] > o.min_significance && H.cnt[k] > o.min_relative_strength * Cref) {
        H.seen[k] = 1;
        H.score += H.sig[k];
      }
    }
  }
  std::size_t best = 0;
  for (std::size_t h = 1; h < cand.size(); ++h)
    if (hyp[h].score > hyp[best].score) best = h;
  std::size_t pick = best;
  for (std::size_t h = 0; h < cand.size(); ++h)
    if (hyp[h].score >= hyp[best].score - o.min_significance &&
        cand[h].typical > cand[pick].typical)
      pick = h;
  const Hyp& H = hyp[pick];
  out.photon_energy_eV = Wp + cand[pick].ip_eV;
  double Cr = 0, Vr = 0, unused = 0;
  cell_counts(Wp, H.c0[pick], H.c1[pick], false, &Cr, &Vr, &unused);
  // Per candidate: assumed present although not seen (a declared line, or with
  // assume_expected_lines a table line, on the axis and separable from the reference).
  std::vector<char> assumed(cand.size(), 0);
  for (std::size_t k = 0; k < cand.size(); ++k) {
    const double c = H.centre[k];
    assumed[k] = k != pick && !H.seen[k] && H.measurable[k] && c > 0 && c >= W.front() &&
                 c <= W.back() && (cand[k].declared || (o.assume_expected_lines && Cr > 0));
  }
  // The reference's support, cut half way to every line found or assumed.
  out.support_lo_eV = W[lo];
  out.support_hi_eV = W[hi];
  for (std::size_t k = 0; k < cand.size(); ++k)
    if (H.seen[k] || assumed[k]) {
      const double mid = 0.5 * (H.centre[k] + Wp);
      if (H.centre[k] < Wp)
        out.support_lo_eV = std::max(out.support_lo_eV, mid);
      else
        out.support_hi_eV = std::min(out.support_hi_eV, mid);
    }

  for (std::size_t k = 0; k < cand.size(); ++k) {
    LineEntry e;
    e.name = cand[k].name;
    e.gas = cand[k].gas;
    e.ionization_energy_eV = cand[k].ip_eV;
    e.kinetic_energy_eV = k == pick ? Wp : H.centre[k];
    e.source = cand[k].declared ? "sidecar" : "detected";
    if (k == pick) {
      e.reference = true;
      e.analysed = true;
      e.relative_strength = 1.0;
      e.relative_strength_sigma = 0.0;
      out.reference = static_cast<int>(out.lines.size());
      out.lines.push_back(e);
      out.found.push_back(1);
      out.assumed.push_back(0);
      continue;
    }
    const double c = H.centre[k];
    const bool on_axis = c > 0 && c >= W.front() && c <= W.back();
    if (!H.seen[k] && !assumed[k] && !cand[k].declared) {  // table lines: found or assumed
      if (on_axis) {
        UnseenLine u;
        u.name = cand[k].name;
        u.gas = cand[k].gas;
        u.kinetic_energy_eV = c;
        u.separable = H.measurable[k] && Cr > 0;
        if (u.separable) {
          u.strength = H.cnt[k] / Cr;
          u.strength_sigma = std::sqrt(H.v[k] + H.sys[k] * H.sys[k]) / Cr;
          u.upper_limit = std::max(u.strength, 0.0) + 2.0 * u.strength_sigma;
        }
        out.unseen.push_back(u);
      }
      continue;
    }
    if (H.measurable[k] && Cr > 0) {
      const double r = H.cnt[k] / Cr;
      e.relative_strength = r;
      e.relative_strength_sigma = std::sqrt(H.v[k] / (Cr * Cr) + r * r * Vr / (Cr * Cr));
    }
    if (!H.seen[k] && !cand[k].declared) {
      e.source = "gas table";
      out.warnings.push_back("line " + e.gas + " " + e.name +
                             " (gas table) not seen at its expected " +
                             format_g(*e.kinetic_energy_eV) +
                             " eV: assumed present (deblended and kept out of the analysis "
                             "window); even 1 % of the reference's counts, fitted as XUV "
                             "spectrum, would change the pulse by ~10 %");
    }
    if (cand[k].declared && !H.seen[k]) {
      std::string why =
          H.measurable[k] ? "below " + format_g(o.min_significance) + " sigma at its expected " +
                                format_g(*e.kinetic_energy_eV) + " eV"
                          : "expected at " + format_g(*e.kinetic_energy_eV) +
                                " eV, outside the energy axis or inside the reference line's band";
      out.warnings.push_back("declared line " + e.gas + " " + e.name + " not seen: " + why +
                             (assumed[k]
                                  ? "; assumed present as declared (deblended and kept out of "
                                    "the analysis window)"
                                  : ""));
    }
    out.lines.push_back(e);
    out.found.push_back(H.seen[k]);
    out.assumed.push_back(assumed[k]);
  }
  return out;
}

std::string compare_line_patterns(const LineSearch& a, const LineSearch& b, double tol,
                                  double min_strength) {
  if (a.reference < 0 || b.reference < 0) return "";
  std::string out;
  for (std::size_t k = 0; k < b.lines.size(); ++k) {
    const LineEntry& l = b.lines[k];
    if (static_cast<int>(k) == b.reference || !b.found[k] || !l.kinetic_energy_eV ||
        l.relative_strength.value_or(0.0) < min_strength)
      continue;
    bool there = false;
    for (std::size_t q = 0; q < a.lines.size(); ++q) {
      const LineEntry& m = a.lines[q];
      there = there || (m.name == l.name && m.gas == l.gas && m.kinetic_energy_eV &&
                        (present(a, q) || static_cast<int>(q) == a.reference) &&
                        std::abs(*m.kinetic_energy_eV - *l.kinetic_energy_eV) <= tol);
    }
    if (!there)
      out += std::string(out.empty() ? "" : "; ") + "the unstreaked edge rows show " + l.gas + " " +
             l.name + " at " + format_g(*l.kinetic_energy_eV, 4) + " eV with strength " +
             format_g(*l.relative_strength, 2) +
             ", which the delay-integrated spectrum does not resolve (photon energy " +
             format_g(b.photon_energy_eV, 4) + " eV there, " + format_g(a.photon_energy_eV, 4) +
             " eV from the delay-integrated spectrum)";
  }
  return out;
}

std::string DeblendOptions::validate() const {
  if (!(iterations >= 1)) return "iterations = " + std::to_string(iterations) + ": must be >= 1";
  if (!(quiet_shift_fraction > 0 && quiet_shift_fraction < 1))
    return "quiet_shift_fraction = " + format_g(quiet_shift_fraction) + ": must lie in (0, 1)";
  return "";
}

Eigen::MatrixXd deblend_neighbours(const LineSearch& s, const std::vector<double>& W,
                                   const Eigen::MatrixXd& sig, const DeblendOptions& o,
                                   std::vector<double>* strengths) {
  if (const std::string e = o.validate(); !e.empty()) throw usage_error("deblend: " + e);
  const Eigen::Index nd = sig.rows(), ne = sig.cols();
  Eigen::MatrixXd total = Eigen::MatrixXd::Zero(nd, ne);
  if (strengths) strengths->assign(s.lines.size(), 0.0);
  if (s.reference < 0 || W.size() < 2 || static_cast<Eigen::Index>(W.size()) != ne) return total;
  const double Wr = *s.lines[static_cast<std::size_t>(s.reference)].kinetic_energy_eV;
  const double pr = units::momentum_au(units::eV_to_au(Wr));
  struct Nb {
    std::size_t line;
    double c = 0, ratio = 0;  // centre (eV), 1 - p_k / p_r
    std::vector<char> far;    // bin in the far half of the line
    double scale = 0;
    Eigen::MatrixXd est;
  };
  std::vector<Nb> nb;
  for (std::size_t k = 0; k < s.lines.size(); ++k) {
    const std::optional<double> centre = neighbour_centre(s, k, W);
    if (!centre || !(pr > 0)) continue;
    const double c = *centre;
    Nb b;
    b.line = k;
    b.c = c;
    b.ratio = 1.0 - units::momentum_au(units::eV_to_au(c)) / pr;
    b.far.assign(W.size(), 0);
    for (std::size_t j = 0; j < W.size(); ++j)
      b.far[j] = c < Wr ? (W[j] <= c && W[j] >= c - s.line_below_eV)
                        : (W[j] >= c && W[j] <= c + s.line_above_eV);
    b.est = Eigen::MatrixXd::Zero(nd, ne);
    nb.push_back(std::move(b));
  }
  if (nb.empty()) return total;
  // Linear interpolation of row i of m at energy w (0 outside the axis).
  auto at = [&](const Eigen::MatrixXd& m, Eigen::Index i, double w) {
    std::size_t u = 0;
    double f = 0;
    if (!axis_bracket(W, w, &u, &f)) return 0.0;
    return (1.0 - f) * m(i, static_cast<Eigen::Index>(u - 1)) +
           f * m(i, static_cast<Eigen::Index>(u));
  };
  for (int it = 0; it < o.iterations; ++it) {
    const Eigen::MatrixXd ref = sig - total;  // the reference's image, current estimate
    // Per row: the reference's streaking shift, its centroid over its band minus the mean.
    std::vector<double> shift(static_cast<std::size_t>(nd), 0.0);
    double mean = 0;
    int rows = 0;
    for (Eigen::Index i = 0; i < nd; ++i) {
      double a = 0, d = 0;
      for (Eigen::Index j = 0; j < ne; ++j) {
        const double w = W[static_cast<std::size_t>(j)];
        if (w < Wr - s.line_below_eV || w > Wr + s.line_above_eV) continue;
        a += ref(i, j) * w;
        d += ref(i, j);
      }
      shift[static_cast<std::size_t>(i)] = d > 0 ? a / d : Wr;
      if (d > 0) {
        mean += a / d;
        ++rows;
      }
    }
    mean = rows ? mean / rows : Wr;
    for (double& x : shift) x -= mean;
    // The unstreaked edge rows (both ends' runs of small shift).
    double max_shift = 0;
    for (double x : shift) max_shift = std::max(max_shift, std::abs(x));
    std::vector<char> fit_row(static_cast<std::size_t>(nd), 1);
    {
      auto quiet = [&](Eigen::Index i) {
        return std::abs(shift[static_cast<std::size_t>(i)]) <= o.quiet_shift_fraction * max_shift;
      };
      Eigen::Index a = 0, b = nd - 1;
      while (a < nd && quiet(a)) ++a;
      while (b > a && quiet(b)) --b;
      if (max_shift > 0 && a + (nd - 1 - b) >= 3 && b >= a)
        for (Eigen::Index i = a; i <= b; ++i) fit_row[static_cast<std::size_t>(i)] = 0;
    }
    for (Nb& b : nb) {
      // The reference's row moved by its threshold difference and by the streaking shift the
      // reference has beyond the neighbour's (p_r - p_k) A = shift * (1 - p_k / p_r).
      Eigen::MatrixXd m(nd, ne);
      for (Eigen::Index i = 0; i < nd; ++i)
        for (Eigen::Index j = 0; j < ne; ++j)
          m(i, j) = at(ref, i,
                       W[static_cast<std::size_t>(j)] + (Wr - b.c) +
                           shift[static_cast<std::size_t>(i)] * b.ratio);
      // Data the line must explain: the signal minus the other neighbours.
      const Eigen::MatrixXd rest = sig - (total - b.est);
      double num = 0, den = 0;
      // The reference's own tail there, from its mirror image about the row's centroid
      // (streaked lines are nearly symmetric; the same estimate as find_lines), is not the
      // neighbour's: without it an argon scan without 3s gave s = 0.010.
      for (Eigen::Index i = 0; i < nd; ++i) {
        if (!fit_row[static_cast<std::size_t>(i)]) continue;
        const double centre = mean + shift[static_cast<std::size_t>(i)];
        for (Eigen::Index j = 0; j < ne; ++j)
          if (b.far[static_cast<std::size_t>(j)]) {
            const double tail = at(ref, i, 2.0 * centre - W[static_cast<std::size_t>(j)]);
            num += (rest(i, j) - tail) * m(i, j);
            den += m(i, j) * m(i, j);
          }
      }
      b.scale = den > 0 ? std::max(num / den, 0.0) : 0.0;
      total -= b.est;
      b.est = b.scale * m;
      total += b.est;
    }
  }
  if (strengths)
    for (const Nb& b : nb) (*strengths)[b.line] = b.scale;
  return total;
}

bool choose_window(const LineSearch& s, const std::vector<double>& W, double streak, double* lo_eV,
                   double* hi_eV, std::vector<std::string>* warnings, bool deblended) {
  if (s.reference < 0 || W.empty()) return false;
  const LineEntry& ref = s.lines[static_cast<std::size_t>(s.reference)];
  const double Wr = *ref.kinetic_energy_eV;
  const double lh = s.line_below_eV, rh = s.line_above_eV;
  const double ref_lo = Wr - lh, ref_hi = Wr + rh;  // the reference's uncut support
  // Deblended: a side without a neighbour keeps the axis (the largest centroid shift
  // underestimates how far a streaked band's wings reach: cutting there cost +4 % on a 1560 nm
  // scan, docs/validation.md); a side with one is cut at its centre or at the reference's
  // streaked band, whichever is nearer the reference.
  double lo = deblended ? W.front() : ref_lo - streak, hi = deblended ? W.back() : ref_hi + streak;
  bool other = false;
  for (std::size_t k = 0; k < s.lines.size(); ++k) {
    const std::optional<double> centre = neighbour_centre(s, k, W);
    if (!centre) continue;
    const double c = *centre;
    other = true;
    const std::string who = s.lines[k].gas + " " + s.lines[k].name;
    if (deblended) {  // the neighbour is subtracted: keep the reference's band up to its centre
      // An undetected gas-table line beyond the reference's streaked band does not cut: if it
      // is there it is weak and subtracted, and a cut there would only truncate the band's
      // wings (a misassigned xenon pattern put a phantom 5s there: +5.6 %, docs/validation.md).
      if (!s.found[k] && s.lines[k].source == "gas table" &&
          (c < ref_lo - streak || c > ref_hi + streak))
        continue;
      if (c < Wr)
        lo = std::max(lo, std::max(c, ref_lo - streak));
      else
        hi = std::min(hi, std::min(c, ref_hi + streak));
      continue;
    }
    // The neighbour's support edge facing the reference, and the reference's edge facing it.
    const bool below = c < Wr;
    const double edge = below ? c + rh : c - lh, ref_edge = below ? ref_lo : ref_hi;
    const bool overlaps = below ? edge >= ref_lo : edge <= ref_hi;
    if (overlaps && warnings)
      warnings->push_back(
          "line " + who + " at " + format_g(c) + " eV overlaps the analysed line " + ref.name +
          (below ? " (its band reaches " : " (its band starts at ") + format_g(edge) +
          (below ? " eV, the analysed band starts at " : " eV, the analysed band ends at ") +
          format_g(ref_edge) + " eV): the window is cut half way between the line centres");
    const double cut = overlaps ? 0.5 * (c + Wr) : 0.5 * (edge + ref_edge);
    if (below)
      lo = std::max(lo, cut);
    else
      hi = std::min(hi, cut);
  }
  if (!other) return false;
  *lo_eV = std::max(lo, W.front());
  *hi_eV = std::min(hi, W.back());
  return *hi_eV > *lo_eV;
}

Trace crop_energy(const Trace& t, double lo, double hi, const std::string& where) {
  std::vector<Eigen::Index> keep;
  for (std::size_t j = 0; j < t.energy_au.size(); ++j) {
    const double w = units::au_to_eV(t.energy_au[j]);
    if (w >= lo && w <= hi) keep.push_back(static_cast<Eigen::Index>(j));
  }
  if (keep.size() < 8)
    throw input_error(where + ": energy window [" + format_g(lo) + ", " + format_g(hi) +
                      "] eV keeps " + std::to_string(keep.size()) +
                      " energy bins; expected at least 8 inside the axis " +
                      format_g(units::au_to_eV(t.energy_au.front())) + " .. " +
                      format_g(units::au_to_eV(t.energy_au.back())) + " eV");
  Trace c;
  c.meta = t.meta;
  c.delay_au = t.delay_au;
  c.counts.resize(t.counts.rows(), static_cast<Eigen::Index>(keep.size()));
  for (std::size_t q = 0; q < keep.size(); ++q) {
    c.energy_au.push_back(t.energy_au[static_cast<std::size_t>(keep[q])]);
    c.counts.col(static_cast<Eigen::Index>(q)) = t.counts.col(keep[q]);
  }
  return c;
}

void parse_energy_window(const std::string& text, const std::string& option, double* lo,
                         double* hi) {
  const auto colon = text.find(':');
  auto bad = [&]() {
    throw usage_error(option + " " + text +
                      ": expected LO:HI in eV (photoelectron kinetic energy), finite, LO < HI");
  };
  if (colon == std::string::npos) bad();
  try {
    std::size_t a = 0, b = 0;
    const std::string l = text.substr(0, colon), h = text.substr(colon + 1);
    *lo = std::stod(l, &a);
    *hi = std::stod(h, &b);
    if (a != l.size() || b != h.size()) bad();
  } catch (const std::logic_error&) {
    bad();
  }
  if (!std::isfinite(*lo) || !std::isfinite(*hi) || !(*lo < *hi)) bad();
}

Trace apply_energy_window(const Trace& trace, double lo, double hi, std::string* source) {
  const std::string where = trace.meta.source.empty() ? std::string("trace") : trace.meta.source;
  if (lo != 0 || hi != 0) {
    if (source) *source = "option";
    return crop_energy(trace, lo, hi, where);
  }
  if (trace.meta.energy_window_eV.size() == 2) {
    if (source) *source = "sidecar";
    return crop_energy(trace, trace.meta.energy_window_eV[0], trace.meta.energy_window_eV[1],
                       where);
  }
  if (source) source->clear();
  return trace;
}

}  // namespace sw
