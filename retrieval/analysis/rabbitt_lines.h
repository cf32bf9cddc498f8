#pragma once
// RABBITT with several photoelectron lines: relative photoemission delays of two lines (two
// shells of one gas, or two gases in one jet) ionised by the same harmonic comb.
//
// Physics. Line k (threshold Ip_k) gives harmonic and sideband peaks at W = q hbar omega - Ip_k;
// the set of a second line is the reference's moved down by Delta Ip = Ip_k - Ip_ref. The 2 omega
// phase of sideband q of line k is
//     phi_k(q) = [phi_{q+1} - phi_{q-1}]_XUV + phi_atomic,k(q)   (+ a constant of the IR phase),
// the XUV part (the attochirp) is common to every line at the same order q (same photon
// energies), so the difference
//     Delta phi(q) = phi_k(q) - phi_ref(q),   Delta tau(q) = Delta phi(q) / (2 omega)
// is the relative atomic delay of the two lines at photon energy q hbar omega (K. Kluender et
// al., PRL 106, 143002 (2011); D. Guenot et al., PRA 85, 053424 (2012); review R. Pazourek,
// S. Nagele and J. Burgdoerfer, Rev. Mod. Phys. 87, 765 (2015)). With the sign convention of
// rabbitt.h (S = A + B cos(2 omega tau + phi), tau = t_XUV - t_IR), a later emission gives a
// larger phi: Delta tau > 0 = the line's electrons are emitted later than the reference's.
//
// The measured delay of each line is its one-photon (Wigner-like) delay plus the
// continuum-continuum (measurement-induced, Coulomb-laser) delay tau_cc of the IR transition,
// which depends on the kinetic energy only (retrieval/physics/atomic_delay.h, J. M. Dahlstrom,
// A. L'Huillier and A. Maquet, J. Phys. B 45, 183001 (2012)). The two lines' sidebands of one
// order have different kinetic energies, so the corrected relative delay is
//     Delta tau_corrected(q) = Delta tau(q) - [tau_cc(W_k(q)) - tau_cc(W_ref(q))],
// each tau_cc at that line's own sideband energy W(q) = q hbar omega - Ip.
//
// Steps (inside analyze_rabbitt, retrieval/analysis/rabbitt.h):
//   1. candidates: the sidecar's declared lines, else the gas table's lines of the scan's gas;
//      the reference is the scan gas's outer-valence line (the one the single-line analysis
//      uses);
//   2. fit_comb_peaks: the delay-integrated spectrum is fitted by weighted linear least squares
//      with one Gaussian per harmonic and sideband of every candidate (orders inside the
//      reference's comb) at its aligned centre (align_comb: offset and scale minimising the
//      model's chi^2), a common width (the spectrum's strongest peak's measured FWHM) and a
//      smooth baseline (hat functions every 2 hbar omega); per line the significance of its summed
//      peak area, and the relative strength (areas over the harmonic orders both lines have on the
//      axis: the same photon energies, so the ratio is that of the partial cross-sections). A table
//      line is present when its significance and strength pass the options; a declared one always;
//   3. plan_sideband_window, per sideband of every present line (the reference's too, when a
//      second line is present): d = distance to the nearest peak of another line; the half
//      width is min(window_half_width_fraction hbar omega, d - guard sigma_peak), and the
//      window's leakage is the other lines' fitted Gaussian counts inside it over the line's own.
//      The order is overlapped (no delay) when the half width would fall below sigma_peak, or
//      when the leakage exceeds max_line_leakage;
//   4. the sidebands of every present line are fitted like the reference's (rabbitt.h step 2,
//      same 2 omega frequency); relative_sideband_delays gives Delta phi, Delta tau and the
//      corrected value per common order (sigma^2 = sigma_k^2 + sigma_ref^2: disjoint windows,
//      independent Poisson counts), and weighted_mean_delay the line's weighted mean with the
//      Birge ratio: sigma multiplied by sqrt(chi^2 / dof) when above 1 (the "scale factor" of
//      the Particle Data Group's averages, PDG Review of Particle Physics, Introduction).

#include <string>
#include <vector>

#include "retrieval/core/result.h"
#include "retrieval/core/trace.h"
#include "retrieval/physics/gas.h"

namespace sw {

/// One candidate line of a RABBITT scan.
struct RabbittLineCandidate {
  std::string name;  ///< hole orbital or the sidecar's label
  std::string gas;   ///< gas symbol
  double ionization_energy_eV = 0.0;
  int channel_l0 = 1;  ///< angular momentum of the ionised shell (from the name's letter)
  bool reference = false;
  bool declared = false;  ///< from the sidecar (always analysed)
};

/// Step 1: the sidecar's declared lines (a line of another gas names its gas; "auto" takes the
/// table's threshold), else every line of `gas` in the table; the reference (gas.lines[0]) is
/// always first, added when the sidecar does not declare it. A declared name that is not in
/// its gas's table and has no threshold is left out with a warning.
std::vector<RabbittLineCandidate> rabbitt_line_candidates(const Gas& gas,
                                                          const std::vector<DeclaredLine>& declared,
                                                          std::vector<std::string>* warnings);

/// Orbital angular momentum of a hole named "3s", "2p", "4d", "4f" (last letter); -1 otherwise.
int orbital_l_of_name(const std::string& name);

/// One Gaussian peak of the comb model.
struct CombPeak {
  int line = 0;   ///< index into the candidates
  int order = 0;  ///< harmonic or sideband order q
  bool sideband = false;
  double centre_eV = 0.0;
  double area = 0.0, area_sigma = 0.0;  ///< fitted counts (delay-integrated) and sigma
};

/// The fit of step 2 (header comment).
struct CombPeakModel {
  double peak_fwhm_eV = 0.0;   ///< measured on the reference's strongest peak
  double peak_sigma_eV = 0.0;  ///< FWHM / (2 sqrt(2 ln 2))
  std::vector<CombPeak> peaks;
  std::vector<double> line_area, line_area_sigma;  ///< per candidate: summed area and sigma
  std::vector<double> line_significance;           ///< area / sigma
  /// Per candidate: harmonic area over the reference's at common orders, and sigma.
  std::vector<double> relative_strength, relative_strength_sigma;
  double chi2 = 0.0, reduced_chi2 = 0.0;
  bool fitted = false;
};

/// Full width at half maximum (eV) of the peak of `spectrum` nearest to `centre_eV` inside
/// +-`half_range_eV`: walks down from the maximum to half of (max - min) above the minimum
/// on both sides, interpolating linearly. 0 when no crossing is found on either side.
double measure_peak_fwhm_eV(const std::vector<double>& W_eV, const std::vector<double>& spectrum,
                            double centre_eV, double half_range_eV);

/// A peak position of a candidate line: order, aligned centre (eV), harmonic or sideband.
struct PeakCentre {
  int order = 0;
  double centre_eV = 0.0;
  bool sideband = false;
};
/// Step 2: `centres[k]` are candidate k's peaks on the axis, `reference` the index of the
/// reference candidate. `spectrum` is the delay-integrated spectrum (counts, W_eV ascending),
/// its Poisson variance max(spectrum, 1). Gaussians of FWHM `peak_fwhm_eV` (> 0), integrated
/// over each bin; baseline hat functions every `baseline_spacing_eV`. The covariance is scaled
/// by the reduced chi^2 when above 1. Throws sw::Error (kUsage) on bad arguments.
CombPeakModel fit_comb_peaks(const std::vector<double>& W_eV, const std::vector<double>& spectrum,
                             const std::vector<std::vector<PeakCentre>>& centres, int reference,
                             double peak_fwhm_eV, double baseline_spacing_eV);

/// Energy-axis alignment by the comb model (used with several candidate lines: the centroids
/// of the single-line alignment, rabbitt.h step 1, are pulled by the other line's peaks inside
/// their +-hbar omega / 2 windows, and its 2 hbar omega Fourier phase by the other set).
/// Every candidate's peak is placed at reference_eV + offset + scale (predicted - reference_eV)
/// (`predicted`: centres before alignment); the offset is searched over start_offset_eV +-
/// hbar omega / 2 (a shift by hbar omega swaps harmonics and sidebands and fits equally well,
/// so the start decides that), on a grid of half peak sigmas and then by golden section; the
/// scale over 1 +- max_scale_error by golden section; offset and scale refined once more.
/// Objective: chi^2 of fit_comb_peaks. Sigmas from the chi^2 curvature (Delta chi^2 = 1, scaled
/// by the reduced chi^2 when above 1).
struct CombAlignment {
  double offset_eV = 0.0, offset_eV_sigma = 0.0;
  double scale = 1.0, scale_sigma = 0.0;
  CombPeakModel model;  ///< the fit at the result
};
CombAlignment align_comb(const std::vector<double>& W_eV, const std::vector<double>& spectrum,
                         const std::vector<std::vector<PeakCentre>>& predicted, int reference,
                         double peak_fwhm_eV, double baseline_spacing_eV, double reference_eV,
                         double start_offset_eV, double hbar_omega_eV, double max_scale_error);

/// Step 3 for sideband `order` of `line` at `centre_eV`, among the peaks of the lines marked in
/// `present` (the model's other lines that are not present are ignored).
struct SidebandWindowPlan {
  double half_width_eV = 0.0;
  double nearest_other_eV = 0.0;  ///< distance to the nearest peak of another present line
  int nearest_other_line = -1;    ///< its line (-1: no other line)
  double leakage = 0.0;           ///< other lines' model counts in the window / the line's own
  bool overlapped = false;
  std::string why;  ///< reason when overlapped
};
SidebandWindowPlan plan_sideband_window(const CombPeakModel& model,
                                        const std::vector<char>& present, int line, int order,
                                        double centre_eV, double max_half_width_eV,
                                        double guard_sigmas, double max_leakage);

/// One sideband order present for a line and for the reference (step 4).
struct RelativeSidebandDelay {
  int order = 0;
  double energy_eV = 0.0;            ///< the line's sideband kinetic energy q hbar omega - Ip_k
  double reference_energy_eV = 0.0;  ///< the reference's
  double relative_phase_rad = 0.0, relative_phase_rad_sigma = 0.0;  ///< phi_k - phi_ref
  double relative_delay_as = 0.0, relative_delay_as_sigma = 0.0;
  bool corrected = false;         ///< both kinetic energies above hbar omega (tau_cc defined)
  double cc_correction_as = 0.0;  ///< tau_cc(W_k) - tau_cc(W_ref), subtracted
  double relative_delay_as_corrected = 0.0;
};

/// Per common order: phases phi (rad, any branch) and sigmas of both lines; the relative phase
/// is wrapped into (-pi, pi] (relative delays are far below the T/2 period of 2 omega).
/// omega_au: IR photon energy; charge: residual ion charge for tau_cc.
RelativeSidebandDelay relative_sideband_delay(int order, double line_energy_au, double line_phase,
                                              double line_phase_sigma, double ref_energy_au,
                                              double ref_phase, double ref_phase_sigma,
                                              double omega_au, double charge);

/// Weighted mean of values with sigmas: mean, sigma = 1 / sqrt(sum w), chi^2 / dof about the
/// mean (dof = n - 1; 0 for n = 1) and sigma multiplied by sqrt(chi^2 / dof) when above 1.
struct WeightedMean {
  double mean = 0.0, sigma = 0.0;
  double reduced_chi2 = 0.0;
  bool scaled = false;
  int count = 0;
};
/// Throws sw::Error (kUsage) on empty input, mismatched lengths or a sigma that is not > 0.
WeightedMean weighted_mean_delay(const std::vector<double>& values,
                                 const std::vector<double>& sigmas);

}  // namespace sw
