#pragma once
// Energy support of a scan's signal: the band of photoelectron kinetic energy where the
// delay-integrated signal (after background subtraction) stands above its Poisson noise.
// The engines keep the XUV spectrum zero at photon energies outside [lo + Ip, hi + Ip], so
// noise in a wide energy window cannot become spectral content (a flat background over a
// 90 eV window otherwise turns into a "pulse" with a 180 eV bandwidth).
//
// Method (our choice, common practice for peak finding in counting spectra):
//   1. S_j = sum over delays of the background-subtracted counts of energy bin j, and its
//      Poisson variance V_j = sum over delays of the raw counts (>= 1 per element);
//   2. both summed over a box of `smoothing_bins` bins (a matched filter for features of that
//      width): z_j = S_box,j / sqrt(V_box,j), the significance of the box around bin j;
//   3. the band grows outward from the bin of largest S_box while bins with z >= `min_sigma`
//      are reachable through gaps (runs of bins below the threshold) no wider than
//      `max_gap_eV` (bridges the gaps of a harmonic comb: the default 2 x IR photon energy
//      is filled in by the caller when max_gap_eV = 0);
//   4. the band is widened on each side by a margin: `margin_bins` bins plus
//      `margin_fraction` of its width (the wings below the detection threshold: for a
//      Gaussian spectrum whose z peaks at 50, the 5-sigma edge sits at 10 % of the peak,
//      2.15 sigma_E from the centre, and the 1 % level at 3.03 sigma_E; the default 4 bins plus
//      a tenth of the band's width add about 1 sigma_E for a band of 4 sigma_E spanning 20
//      bins), clipped to the axis. The delay-integrated band already contains the streaking
//      range on both sides of the field-free spectrum, so the margin matters for weakly
//      streaked scans only.
// A support that reaches both ends of the axis means the signal was not separated from the
// noise (or fills the window); `fills_axis` says so and the quality section reports it.

#include <string>
#include <vector>

#include <Eigen/Core>

namespace sw {

struct SupportOptions {
  /// Significance (Poisson standard deviations of the box sum) a bin needs to seed the band.
  double min_sigma = 5.0;  ///< > 0
  /// Box width (energy bins) of the smoothing sum before the threshold.
  int smoothing_bins = 5;  ///< >= 1
  /// Widest run of sub-threshold bins (eV) bridged inside the band; 0 = the caller's default
  /// (preprocess uses 2 x the IR photon energy: the harmonic spacing of a train).
  double max_gap_eV = 0.0;  ///< >= 0
  /// Margin on each side: this many bins ...
  int margin_bins = 4;  ///< >= 0
  /// ... plus this fraction of the band's width.
  double margin_fraction = 0.1;  ///< >= 0
  std::string validate() const;
};

struct EnergySupport {
  double lo_au = 0.0, hi_au = 0.0;         ///< kinetic-energy band (a.u.); 0, 0 = none found
  std::size_t lo_index = 0, hi_index = 0;  ///< inclusive bin indices of the band
  double peak_sigma = 0.0;                 ///< largest z (box significance) over the axis
  bool found = false;                      ///< false: no bin reaches min_sigma (no signal)
  bool fills_axis = false;  ///< the band (before the margin) reaches both ends of the axis
  double core_share = 0.0;  ///< width of the band before the margin / the axis
};

/// The support of `signal` (delays x energies, background-subtracted counts per bin) with
/// Poisson variances `raw_counts` (same layout; the counts before subtraction) on the uniform
/// kinetic-energy axis `energy_au` (one value per column). Throws sw::Error(kUsage) for bad
/// options and sw::Error(kInternal) for mismatched sizes.
EnergySupport find_energy_support(const Eigen::MatrixXd& signal, const Eigen::MatrixXd& raw_counts,
                                  const std::vector<double>& energy_au,
                                  const SupportOptions& options);

}  // namespace sw
