#pragma once
// The Cramér–Rao bound of a second line's relative photoemission delay on a synthetic scan:
// the smallest σ any unbiased estimator can reach on Poisson counts with the scan's expected
// counts, computed from the generator alone (synthetic/generator.h), never from the analysis
// whose σ it bounds.
//
// Method (H. Cramér, Mathematical Methods of Statistics (1946); C. R. Rao, Bull. Calcutta Math.
// Soc. 37, 81 (1945)): with expected counts μ_px(θ) and independent Poisson counts, the Fisher
// information is I_ij = Σ_px ∂_i μ ∂_j μ / μ, and var(θ̂_0) ≥ (I⁻¹)_00. The derivatives are
// central differences of the generator's noise-free density (SyntheticScan::clean) scaled by the
// base scan's peak scaling, so the peak normalisation does not leak into them.
//
// Two bounds:
//   delay_only_as: every other parameter known (a strict lower bound of the next one);
//   with_nuisances_as: jointly with the parameters a measurement also has to find — the common
//     time zero (the IR envelope centre), the IR peak intensity, CEP, duration and chirp, the
//     second line's strength, the overall count scale and, for a Gaussian XUV, its centre,
//     FWHM, GDD and TOD.
// The real problem has more unknowns (the full pulse and field), so its bound is at least
// with_nuisances_as: a σ target below it cannot be met by any unbiased method.
// Requires a scan with two lines, no time-of-flight recording, no resolution, background,
// jitter or drift (the two-line targets of two_line_targets.h); throws sw::Error otherwise.

#include "synthetic/scan_config.h"

namespace sw::validation {

struct DelayBound {
  double delay_only_as = 0.0;      ///< σ bound with every other parameter known (as)
  double with_nuisances_as = 0.0;  ///< σ bound jointly with the nuisances above (as)
  int nuisances = 0;               ///< how many nuisance parameters entered the second bound
};

DelayBound line_delay_cramer_rao(const synthetic::ScanConfig& config);

}  // namespace sw::validation
