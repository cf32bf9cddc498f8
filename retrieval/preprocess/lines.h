#pragma once
// Photoelectron lines of a scan and the energy window of the analysis.
//
// One XUV pulse ionizing a gas gives one photoelectron line per ionic state that its photons
// can reach: line k sits at kinetic energy W_k = hbar Omega - Ip_k (Ip_k = Gas::lines, NIST
// ASD), so the lines form a fixed pattern: their spacings are differences of thresholds and do
// not depend on the photon energy. Every line is streaked by the same IR field.
//
// Detection (find_lines):
//   1. the delay-integrated, background-subtracted spectrum s(W) and its Poisson variance;
//   2. its strongest peak (after a 5-bin running mean), the reference centre W_peak (the
//      centroid over the peak's half-maximum band) and the peak's support: the contiguous
//      band around it where the smoothed spectrum stays above `support_fraction` of the peak;
//   3. hypotheses: each candidate line in turn is taken to be the peak (photon energy
//      hbar Omega = W_peak + Ip_line); every other candidate then has a predicted position
//      W_k = hbar Omega - Ip_k and a cell: the peak's support moved to W_k, cut half way to
//      the nearest other predicted line. Its counts are the spectrum over the cell minus the
//      reference line's own tail there, estimated by the mirror image of the spectrum about
//      W_peak (streaked lines are nearly symmetric after the delay integration; common
//      practice for peak deblending). The score of a hypothesis is the sum of the
//      significances (counts / sigma) of the candidates found; the highest score wins, ties
//      (within `min_significance`) going to the candidate with the largest typical strength.
//      A candidate within half the peak's half-maximum band of W_peak is not separable;
//   4. a candidate is found when its counts exceed `min_significance` standard deviations
//      (Poisson plus `mirror_systematic_fraction` of the subtracted tail) and
//      `min_relative_strength` of the reference's counts;
//      its relative strength is counts_k / counts_reference (the reference over its own
//      cell, without subtraction: a neighbour's tail inside it is not removed) with the
//      Poisson sigma of the ratio (both counts treated as independent; the mirror estimate's
//      systematic error is not in it: it enters the detection and UnseenLine only).
// Candidates: the sidecar's declared lines when it has any (a value "auto" takes the table's
// threshold; a line of another gas must name its gas), else every line of the sidecar's gas.
// Declared lines are always listed (source "sidecar"), also when they are not seen, and are then
// assumed present (deblended and windowed as found lines: the user knows the target); table
// lines are listed when found (source "detected"); a table line that is not seen but lies on the
// axis is assumed present (source "gas table", LineOptions::assume_expected_lines), else
// reported in LineSearch::unseen with an upper limit of its strength. The reference line is the
// strongest one found.
//
// Window (choose_window): the reference line's support widened on each side by the streaking
// range (the largest shift of the rows' centroids), then cut half way between the reference's
// support edge and the facing support edge of each other found line; a line whose support
// reaches into the reference's support overlaps it (warning). With no other line in the
// scan's energy range the whole axis is kept.

#include <optional>
#include <string>
#include <vector>

#include "retrieval/core/result.h"
#include "retrieval/core/trace.h"
#include "retrieval/physics/gas.h"

namespace sw {

struct LineOptions {
  /// Significance (counts / Poisson sigma over the line's window) for a line to count as found.
  double min_significance = 5.0;  ///< > 0
  /// Fraction of the peak of the delay-integrated spectrum that bounds a line's support.
  double support_fraction = 0.05;  ///< in (0, 1)
  /// Weakest line listed, as a fraction of the reference's counts over its support (our
  /// choice: below the weakest inner-valence line of the gas table, 0.1, and above the
  /// few-percent residue the mirror estimate leaves of a streaked line's asymmetric tail).
  double min_relative_strength = 0.03;  ///< in [0, 1)
  /// Systematic error of the mirrored tail, as a fraction of the counts subtracted; added in
  /// quadrature to the Poisson noise in the significance (our choice).
  double mirror_systematic_fraction = 0.1;  ///< >= 0
  /// Treat every line of the gas table that the photon energy puts on the energy axis (outside
  /// the reference's half-maximum band) as present, also when it is not seen: it is listed
  /// (source "gas table"), deblended and kept out of the analysis window like a found line.
  /// A weak line left inside the window is fitted as XUV spectrum and beats with it: measured,
  /// strength 0.01 gave FWHM -11 % (argon 3s) and -26 % (neon 2s); assumed present, the error
  /// was +4.3 % and -2.0 % (docs/validation.md, "Lines that are not seen"). Off: such lines are
  /// only reported (LineSearch::unseen) and the quality check unseen_line_strength judges them.
  bool assume_expected_lines = true;
  /// The peak's bands (support and half-maximum) stop where the smoothed spectrum rises again
  /// by this fraction of the peak above its lowest value so far: the dip between two resolved
  /// lines. 0 = off (the default for the delay-integrated spectrum, whose streaked lines are
  /// double-humped); preprocess's cross-check on the unstreaked edge rows uses 0.1.
  double dip_fraction = 0.0;  ///< in [0, 1)
  /// The cross-check on the unstreaked edge rows (preprocess, compare_line_patterns): its
  /// dip_fraction (our choice: 0.1, well above the 5-bin smoothed noise at 300 peak counts) ...
  double pattern_dip_fraction = 0.1;  ///< in (0, 1)
  /// ... the weakest line there that must also be in the delay-integrated detection (our
  /// choice: 0.3; weaker lines are assumed present anyway) ...
  double pattern_min_strength = 0.3;  ///< in (0, 1]
  /// ... and the position tolerance as a fraction of the edge-row line's support width (our
  /// choice: 0.15, about 0.3 FWHM; photon energies on satellites' fringes differ by 1-2 eV).
  double pattern_tolerance_fraction = 0.15;  ///< > 0
  std::string validate() const;              ///< "" when valid; else names field, value and rule
};

/// A line of the gas table that the photon energy reaches inside the energy axis but that was
/// not seen (table candidates only: a declared line is the user's statement and is assumed
/// present). Its electrons, if any, are inside the analysed data and would be taken for part of
/// the XUV spectrum: a weak line beats with the spectrum it overlaps and modulates the pulse's
/// intensity by about +-2 sqrt(strength) (docs/validation.md, "Lines that are not seen").
struct UnseenLine {
  std::string name, gas;
  double kinetic_energy_eV = 0.0;  ///< expected centre, photon energy - Ip
  /// False when the line lies inside the reference's own half-maximum band: not separable,
  /// its strength has no bound (upper_limit = 1).
  bool separable = false;
  /// Counts over its cell minus the reference's mirrored tail, relative to the reference's
  /// counts, with its sigma (Poisson and the mirror's systematic error).
  double strength = 0.0, strength_sigma = 0.0;
  double upper_limit = 1.0;  ///< max(strength, 0) + 2 strength_sigma (~97.7 % one-sided)
};

struct LineSearch {
  std::vector<LineEntry> lines;  ///< every line found or declared
  std::vector<char> found;       ///< per line: seen above min_significance (1) or not
  /// Per line: treated as present although not seen (a declared line inside the axis and outside
  /// the reference's half-maximum band): deblended and windowed like a found line.
  std::vector<char> assumed;
  std::vector<UnseenLine> unseen;  ///< table lines inside the axis that were not seen
  int reference = -1;              ///< index into lines of the reference (-1: none found)
  double photon_energy_eV = 0.0;   ///< hbar Omega of the winning hypothesis
  /// The reference line's support (cut half way to every other line found).
  double support_lo_eV = 0.0, support_hi_eV = 0.0;
  /// Extent of one line below / above its centre (eV): the uncut support's half widths.
  double line_below_eV = 0.0, line_above_eV = 0.0;
  std::vector<std::string> warnings;
};

/// Line k is present: found, or assumed present (declared, or expected from the gas table).
bool present(const LineSearch& search, std::size_t k);

/// The centre (eV) of line k when it is a present line other than the reference with its centre
/// on the axis W_eV (eV, ascending, > 0); nothing otherwise.
std::optional<double> neighbour_centre(const LineSearch& search, std::size_t k,
                                       const std::vector<double>& W_eV);

/// A line other than the reference is present with its centre on the axis W_eV (eV, ascending).
bool has_neighbours(const LineSearch& search, const std::vector<double>& W_eV);

/// Linear interpolation on the ascending axis W: the value at w is (1 - f) y[u - 1] + f y[u].
/// False (u, f unchanged) when w lies outside [W.front(), W.back()] or W has < 2 points.
bool axis_bracket(const std::vector<double>& W, double w, std::size_t* u, double* f);

/// Runs the detection on a delay-integrated spectrum: W_eV ascending (uniform or not), counts
/// (background subtracted, may be negative) and their variance, both summed over delays.
/// `gas` is the sidecar's gas; `declared` the sidecar's lines (may be empty).
LineSearch find_lines(const std::vector<double>& W_eV, const std::vector<double>& counts,
                      const std::vector<double>& variance, const Gas& gas,
                      const std::vector<DeclaredLine>& declared, const LineOptions& options);

/// Cross-check of a detection on the delay-integrated spectrum (`integrated`) against one on
/// the unstreaked edge rows alone (`unstreaked`, same candidates). Streaking broadens every line
/// of the integrated spectrum by twice the streaking range, so two lines that the edge rows
/// resolve can merge into one peak there: the pattern is then placed between them (measured:
/// argon 3p and 3s of equal strength, 13.5 eV apart, read as one line at the wrong photon
/// energy, FWHM -37 %, trusted). Returns "" when every line the edge rows detect with relative
/// strength >= `min_strength` is also present (found, assumed or the reference) in `integrated`
/// within `tolerance_eV`; otherwise what differs, for a warning and the quality check
/// line_pattern_agreement. (Weaker lines are assumed present anyway; the photon energies alone
/// differ by 1-2 eV on satellites' fringes, so they are not compared.)
std::string compare_line_patterns(const LineSearch& integrated, const LineSearch& unstreaked,
                                  double tolerance_eV, double min_strength);

/// The analysis window [lo, hi] (eV) around the reference line (see the header comment);
/// `streak_range_eV` >= 0. Returns false (window = whole axis) when no other line was found
/// inside [W_eV.front(), W_eV.back()] or when there is no reference. Warnings on overlap.
/// With `deblended`, the found neighbours have been subtracted (deblend_neighbours): the window
/// then keeps the whole axis on a side without a neighbour; a side with one is cut at the
/// neighbour's centre or at the reference's support widened by the streaking range, whichever
/// is nearer the reference.
bool choose_window(const LineSearch& search, const std::vector<double>& W_eV,
                   double streak_range_eV, double* lo_eV, double* hi_eV,
                   std::vector<std::string>* warnings, bool deblended = false);

/// Deblending of the reference line's neighbours (per delay row, before the window cut).
/// A line k of the same pulse and IR field differs from the reference by its threshold and by
/// its streaking: its electrons take the same XUV spectrum shifted down by dIp = W_r - W_k, and
/// the IR moves them by p_k A(t) instead of p_r A(t) (classical streaking, shift ~ p A). So
/// row i of line k is row i of the reference moved in energy:
///   N_k(W, i) = s_k * R(W + dIp + delta_i (1 - p_k / p_r), i)
/// with delta_i the reference's centroid shift in row i (over its band W_r - line_below_eV ..
/// W_r + line_above_eV, minus the rows' mean). R is the observed signal minus the current
/// estimate of all neighbours (iterated `iterations` times); s_k is the least-squares scale over
/// the neighbour's far half (the side of its centre away from the reference, out to one line
/// half width), where the reference contributes least, in the unstreaked edge rows when there
/// are >= 3 (DeblendOptions::quiet_shift_fraction), else in every row. Neglected: the line's own
/// photoemission delay, the energy dependence of the dipole ratio and the difference of the
/// streaking broadening (residuals measured in tests/test_lines.cpp).
struct DeblendOptions {
  int iterations = 4;  ///< fixed-point iterations of the joint estimate (>= 1)
  /// Edge rows whose centroid shift stays within this fraction of the largest are unstreaked;
  /// with >= 3 of them the scale s_k is fitted over them alone: there the reference's own tail
  /// does not reach the neighbour's far half, whereas the streaked rows push it there (on an
  /// argon scan without 3s, all rows gave s = 0.010, a false 1 % line). Same default as
  /// PreprocessOptions::field_free_shift_fraction.
  double quiet_shift_fraction = 0.1;  ///< in (0, 1)
  std::string validate() const;       ///< "" when valid; else names field, value and rule
};

/// Estimated counts of every found, non-reference line whose centre lies inside the axis, on the
/// grid of `signal` (rows = delays, columns = W_eV, background subtracted). `strengths`
/// (optional) receives, per entry of search.lines, the fitted s_k (0 for lines not deblended).
/// Returns an all-zero matrix when there is no such line.
Eigen::MatrixXd deblend_neighbours(const LineSearch& search, const std::vector<double>& W_eV,
                                   const Eigen::MatrixXd& signal, const DeblendOptions& options,
                                   std::vector<double>* strengths = nullptr);

/// Parses "LO:HI" (eV, finite, LO < HI) as given to --energy-window; throws sw::Error(kUsage)
/// naming `option` and the text otherwise.
void parse_energy_window(const std::string& text, const std::string& option, double* lo_eV,
                         double* hi_eV);

/// The scan inside an explicit window: [lo_eV, hi_eV] when not both 0 (source "option"),
/// else the sidecar's energy_window_eV (source "sidecar"), else the scan unchanged (source "").
/// For analyses without the automatic line window (rabbitt, classify).
Trace apply_energy_window(const Trace& trace, double lo_eV, double hi_eV, std::string* source);

/// The scan restricted to energy bins with lo_eV <= W <= hi_eV (metadata kept). Throws
/// sw::Error(kInput) naming `where` and the window when fewer than 8 bins remain.
Trace crop_energy(const Trace& trace, double lo_eV, double hi_eV, const std::string& where);

}  // namespace sw
