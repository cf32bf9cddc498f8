#include "retrieval/analysis/quality.h"

#include <algorithm>
#include <cmath>
#include <limits>

#include "retrieval/core/error.h"
#include "retrieval/core/format.h"
#include "retrieval/core/units.h"

namespace sw {

std::string QualityOptions::validate() const {
  if (std::string e = validate_described(*this); !e.empty()) return e;
  if (!(low_count_accuracy_target >= accuracy_target))
    return "low_count_accuracy_target = " + format_g(low_count_accuracy_target) +
           ": must be in [accuracy_target, 1)";
  return "";
}

double delay_dependence_sigma(const Eigen::MatrixXd& c) {
  const Eigen::Index nd = c.rows(), ne = c.cols();
  if (nd < 2) return 0.0;
  double chi2 = 0, dof = 0;
  for (Eigen::Index j = 0; j < ne; ++j) {
    const double m = c.col(j).mean();
    if (!(m > 1e-12)) continue;
    chi2 += (c.col(j).array() - m).square().sum() / m;
    dof += static_cast<double>(nd - 1);
  }
  if (!(dof > 0)) return 0.0;
  return (chi2 - dof) / std::sqrt(2.0 * dof);
}

void add_signal_checks(QualitySection& q, const Eigen::MatrixXd& counts, double bg,
                       const QualityOptions& o) {
  q.add("total_counts", counts.sum(), o.min_total_counts, ">=", "counts in the whole scan");
  double snr = 0;
  if (counts.size() > 0) {
    Eigen::Index i = 0, j = 0;
    (counts.array() - bg).maxCoeff(&i, &j);
    snr = (counts(i, j) - bg) / std::sqrt(std::max(counts(i, j), 1.0));
  }
  q.add("peak_snr", snr, o.min_peak_snr,
        ">=", "largest background-subtracted count of one element over its Poisson deviation");
  if (counts.rows() >= 3)
    q.add(
        "delay_dependence_sigma", delay_dependence_sigma(counts), o.min_delay_dependence_sigma,
        ">=",
        "Pearson chi^2 of the scan against its delay average, (chi^2 - dof) / sqrt(2 dof): "
        "below the limit the counts do not depend on the delay (no streaking or sideband signal)");
}

double peak_signal_counts(const Eigen::MatrixXd& c, double bg) {
  const Eigen::Index nr = c.rows(), nc = c.cols();
  double best = 0;
  for (Eigen::Index i = 0; i < nr; ++i)
    for (Eigen::Index j = 0; j < nc; ++j) {
      const Eigen::Index i0 = std::max<Eigen::Index>(i - 1, 0),
                         i1 = std::min<Eigen::Index>(i + 1, nr - 1);
      const Eigen::Index j0 = std::max<Eigen::Index>(j - 1, 0),
                         j1 = std::min<Eigen::Index>(j + 1, nc - 1);
      const auto block = c.block(i0, j0, i1 - i0 + 1, j1 - j0 + 1);
      best = std::max(best, block.mean() - bg);
    }
  return best;
}

double spectrum_mismatch(const Eigen::VectorXd& m, const Eigen::VectorXd& r,
                         const Eigen::VectorXd& v, Eigen::Index lo, Eigen::Index hi,
                         double* noise_out) {
  const double nan = std::numeric_limits<double>::quiet_NaN();
  if (noise_out) *noise_out = nan;
  lo = std::max<Eigen::Index>(lo, 0);
  hi = std::min<Eigen::Index>(hi, m.size() - 1);
  if (hi < lo || r.size() != m.size() || v.size() != m.size()) return nan;
  const Eigen::Index n = hi - lo + 1;
  const Eigen::VectorXd ms = m.segment(lo, n), rs = r.segment(lo, n);
  const double mm = ms.squaredNorm(), rr = rs.squaredNorm();
  if (!(mm > 0) || !(rr > 0)) return nan;
  const double c = ms.dot(rs) / rr;
  if (noise_out) *noise_out = std::sqrt(v.segment(lo, n).cwiseMax(0.0).sum() / mm);
  return std::sqrt((ms - c * rs).squaredNorm() / mm);
}

void add_retrieval_checks(QualitySection& q, const RetrievalEvidence& e, const QualityOptions& o) {
  if (e.noise_floor_trace_error > 0)
    q.add("trace_error_vs_noise_floor", e.trace_error / e.noise_floor_trace_error,
          o.max_trace_error_ratio,
          "<=", "trace error G over the G expected from counting noise alone");
  q.add("fwhm_vs_transform_limit",
        e.transform_limited_fwhm_as > 0 ? e.fwhm_as / e.transform_limited_fwhm_as
                                        : std::numeric_limits<double>::quiet_NaN(),
        o.min_fwhm_to_transform_limit, ">=",
        "retrieved FWHM over the transform limit of the same (in-support) spectrum: a pulse "
        "shorter than its transform limit is a failed retrieval");
  if (e.spectrum_mismatch) {
    const double noise = e.spectrum_mismatch_noise.value_or(0.0);
    q.add("spectrum_vs_measured", *e.spectrum_mismatch,
          o.max_spectrum_mismatch + 3.0 * (std::isfinite(noise) ? noise : 0.0), "<=",
          "relative L2 difference of the retrieved and measured delay-integrated spectra inside "
          "the energy support (limit: max_spectrum_mismatch + 3 x the counting-noise expectation)");
  }
  if (e.energy_outside_support)
    q.add("energy_outside_support", *e.energy_outside_support, o.max_energy_outside_support,
          "<=", "share of the retrieved spectral energy outside the signal's energy support");
  // A headline number without an error bar is not a trusted result (every headline number
  // comes with a sigma): with fewer than 2 bootstrap replicas there is none.
  q.add("uncertainty_reported", e.fwhm_as_sigma ? 1.0 : 0.0, 1.0,
        ">=", "1 when the FWHM and A0 carry a bootstrap sigma (--bootstrap >= 2), 0 otherwise");
  // The +-2 sigma interval inside the accuracy target (the weak-scan target below the limit).
  const bool weak = e.peak_counts && *e.peak_counts < o.low_count_peak_counts;
  const double target = weak ? o.low_count_accuracy_target : o.accuracy_target;
  const std::string why = weak ? " (+-2 sigma inside the weak-scan accuracy target)"
                               : " (+-2 sigma inside the accuracy target)";
  if (e.fwhm_as_sigma && e.fwhm_as > 0)
    q.add("fwhm_sigma_over_value", *e.fwhm_as_sigma / e.fwhm_as, 0.5 * target,
          "<=", "uncertainty of the XUV FWHM relative to its value" + why);
  if (e.peak_vector_potential_au_sigma && e.peak_vector_potential_au &&
      *e.peak_vector_potential_au > 0)
    q.add("a0_sigma_over_value", *e.peak_vector_potential_au_sigma / *e.peak_vector_potential_au,
          0.5 * target,
          "<=", "uncertainty of the IR peak vector potential relative to its value" + why);
  if (e.cma_phase_error_rad)
    q.add("cma_phase_error_rad", *e.cma_phase_error_rad, e.cma_phase_error_max_rad, "<=",
          e.momentum_nodes
              ? "phase the central momentum approximation neglects at the band edges (rad); "
                "reported only: the result used momentum nodes"
              : "phase the central momentum approximation neglects at the band edges (rad)",
          !e.momentum_nodes);
  if (e.cma_signal_counts && e.cma_min_signal_counts > 0)
    q.add("cma_signal_counts", *e.cma_signal_counts, e.cma_min_signal_counts, ">=",
          "counts per delay row in the strongest analysed bin of a CMA result: fewer, and the CMA "
          "engine's error follows the counting noise beyond its replicas' spread (the full model, "
          "which auto runs below the limit, fits such scans)");
  if (e.start_disagreement)
    q.add("starts_agreement", *e.start_disagreement, o.max_start_disagreement, "<=",
          e.starts_comparable
              ? "relative FWHM difference of two full-model starts with equally good fits"
              : "relative FWHM difference of two full-model starts (reported only: one "
                "fit is clearly worse)",
          e.starts_comparable);
  if (e.engine_disagreement)
    q.add("engines_agreement", *e.engine_disagreement, o.max_start_disagreement, "<=",
          "relative FWHM difference of the CMA run and the full model (reported only: the full "
          "model runs when the CMA is in doubt)",
          false);
  if (e.field_free_rows && o.min_field_free_rows > 0)
    q.add(
        "field_free_rows", *e.field_free_rows, o.min_field_free_rows, ">=",
        "delay rows at the scan edges without streaking; with none the XUV spectral amplitude and "
        "the frequency shift are fixed by the zero-mean A(t) convention, not by the data");
  if (e.class_margin_sigma && o.min_class_margin_sigma > 0)
    q.add("class_margin_sigma", *e.class_margin_sigma, o.min_class_margin_sigma, ">=",
          "distance of the satellite intensity ratio from the nearest class threshold, in "
          "bootstrap sigmas: "
          "closer than the limit, the class (isolated or with satellites) is not decided by the "
          "data");
  if (e.bias_over_sigma)
    q.add("bootstrap_bias_over_sigma", *e.bias_over_sigma, 1.0, "<=",
          "|bootstrap bias| of the FWHM over the replicas' spread (reported only: above 1 the "
          "value is not corrected and sigma is widened by the bias)",
          false);
  if (e.line_pattern_agreement)
    q.add("line_pattern_agreement", *e.line_pattern_agreement, 1.0, ">=",
          e.line_pattern_detail.empty()
              ? "1 when the photoelectron lines found on the unstreaked edge rows agree with the "
                "delay-integrated detection, 0 when not"
              : "the lines found on the unstreaked edge rows disagree: " + e.line_pattern_detail);
  if (e.line_delay_reduced_chi2)
    q.add("line_delay_fit_chi2", *e.line_delay_reduced_chi2, o.max_line_delay_chi2, "<=",
          "reduced chi^2 of the centre-of-energy fit of the lines' streaking curves: above the "
          "limit a line's moments are not one shifted copy of the reference's (a neighbour's "
          "tail inside its band), and its relative delay is biased beyond its sigma");
  if (e.line_separation_widths)
    q.add("line_separation_widths", *e.line_separation_widths, o.min_line_separation_widths, ">=",
          "smallest distance of two analysed lines' field-free centres in their rms widths in a "
          "delay row: closer lines' tails overlap, and the centre-of-energy delay then depends on "
          "the pulse's spectral phase (a chirp moved argon 3s/3p by 10-18 as); the joint fit of "
          "the lines models it");
  if (e.unseen_line_strength)
    q.add("unseen_line_strength", *e.unseen_line_strength, o.max_unseen_line_strength, "<=",
          "upper limit (2 sigma) of the relative strength of " + e.unseen_line +
              ": a line of the gas expected inside the signal's support but not seen is fitted "
              "as part of the XUV spectrum, and even 1 % of the reference's counts changes the "
              "FWHM by ~10 % (declare the line in the sidecar to have it deblended)");
  if (e.ir_period_mismatch)
    q.add(
        "ir_period_vs_sidecar", *e.ir_period_mismatch, o.max_ir_period_mismatch, "<=",
        "relative difference of the period of the retrieved A(t) and the sidecar's IR wavelength");
  if (e.ir_field_ratio)
    q.add("ir_field_vs_vector_potential", *e.ir_field_ratio, o.max_ir_field_ratio, "<=",
          "largest |E(t)| over omega_IR x largest |A(t)| of the retrieved IR field (about 1 for a "
          "field at the IR frequency; larger when A(t) carries noise)");
  if (e.energy_support_share)
    q.add("energy_support_share", *e.energy_support_share, 0.999, "<=",
          "width of the signal's energy support over the energy axis (1: signal and background "
          "not separated)",
          false);
}

QualitySection classify_quality(const Eigen::MatrixXd& counts, double bg, const VerdictSection& v,
                                const QualitySection* retrieval, const QualityOptions& o) {
  QualitySection q;
  add_signal_checks(q, counts, bg, o);
  if (retrieval)
    for (const QualityCheck& c : retrieval->checks)
      if (c.name != "total_counts" && c.name != "peak_snr" && c.name != "delay_dependence_sigma")
        q.checks.push_back(c);
  q.add("verdict_determined", v.pulse_class == PulseClass::kUndetermined ? 0.0 : 1.0, 1.0,
        ">=", "1 when the evidence decided a class, 0 for undetermined (reported only)", false);
  q.finalize();
  return q;
}

QualitySection rabbitt_quality(const Eigen::MatrixXd& counts, double bg, const RabbittSection& r,
                               const QualityOptions& o,
                               const std::vector<RabbittLineEvidence>& lines) {
  QualitySection q;
  add_signal_checks(q, counts, bg, o);
  q.add("sidebands_analysed", static_cast<double>(r.sidebands.size()),
        static_cast<double>(o.min_sidebands),
        ">=", "sidebands with a measured phase (an attochirp needs at least min_sidebands)");
  if (!lines.empty()) {
    const RabbittLineEvidence* few = &lines.front();
    const RabbittLineEvidence* near = &lines.front();
    for (const RabbittLineEvidence& e : lines) {
      if (e.sidebands_with_delay < few->sidebands_with_delay) few = &e;
      if (e.separation_sigmas < near->separation_sigmas) near = &e;
    }
    q.add("line_sidebands_for_delay", static_cast<double>(few->sidebands_with_delay),
          static_cast<double>(o.min_line_sidebands), ">=",
          "sideband orders giving a relative delay of line " + few->line +
              (few->why.empty() ? std::string() : " (" + few->why + ")"));
    q.add("line_sideband_separation_sigmas", near->separation_sigmas, o.min_line_separation_sigmas,
          ">=",
          "distance between a sideband of line " + near->line +
              " and the nearest peak of the other line, in peak sigmas (below the limit the two "
              "sets of sidebands overlap)");
  }
  q.finalize();
  return q;
}

BootstrapEstimate bootstrap_estimate(double estimate, const std::vector<double>& reps, double sys) {
  const int B = static_cast<int>(reps.size());
  if (B < 2) throw usage_error("bootstrap_estimate: " + std::to_string(B) + " replicas: need >= 2");
  double mean = 0;
  for (double x : reps) mean += x / B;
  double ss = 0;
  for (double x : reps) ss += (x - mean) * (x - mean);
  BootstrapEstimate e;
  e.spread = student_one_sigma_factor(B) * std::sqrt(ss / (B - 1));
  e.bias = mean - estimate;
  // The bias estimate is a mean of B replicas: its own standard error is about spread / sqrt(B).
  // Corrected only when it stands out of that (>= 2 standard errors) and is still small against
  // sigma; a bias that is neither negligible (< spread / 4) nor corrected widens sigma.
  const double a = std::abs(e.bias);
  e.corrected = a >= 2.0 * e.spread / std::sqrt(static_cast<double>(B)) && a <= e.spread;
  e.sigma_statistical = e.corrected ? e.spread * std::sqrt(1.0 + 1.0 / B) : e.spread;
  e.sigma_bias = !e.corrected && a > 0.25 * e.spread ? a : 0.0;
  e.sigma_systematic = sys;
  e.value = e.corrected ? estimate - e.bias : estimate;
  e.sigma = std::sqrt(e.sigma_statistical * e.sigma_statistical + sys * sys +
                      e.sigma_bias * e.sigma_bias);
  return e;
}

double student_one_sigma_factor(int B) {
  if (B < 2)
    throw usage_error("student_one_sigma_factor: samples = " + std::to_string(B) +
                      ": must be >= 2");
  if (B > 200) return 1.0;
  const double nu = B - 1.0;
  const double norm =
      std::exp(std::lgamma(0.5 * (nu + 1)) - std::lgamma(0.5 * nu)) / std::sqrt(nu * units::kPi);
  auto pdf = [&](double t) { return norm * std::pow(1.0 + t * t / nu, -0.5 * (nu + 1)); };
  // P(|T| <= x) by Simpson's rule on [0, x].
  auto central = [&](double x) {
    const int n = 2000;
    const double h = x / n;
    double s = pdf(0) + pdf(x);
    for (int k = 1; k < n; ++k) s += (k % 2 ? 4.0 : 2.0) * pdf(k * h);
    return 2.0 * s * h / 3.0;
  };
  const double target = std::erf(1.0 / std::sqrt(2.0));  // 0.682689...
  double a = 0.5, b = 3.0;
  for (int it = 0; it < 50; ++it) {
    const double m = 0.5 * (a + b);
    (central(m) < target ? a : b) = m;
  }
  return 0.5 * (a + b);
}

}  // namespace sw
