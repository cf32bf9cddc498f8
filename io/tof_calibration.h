#pragma once
// Time-of-flight (TOF) electron spectrometer calibration: flight time -> kinetic energy, and
// the count-conserving change of variable of a TOF spectrum onto a uniform energy axis.
//
// Field-free drift of length L after a start time t0: v = L / (t - t0), so
//   E(t) = (m_e / 2) (L / (t - t0))^2 / e + E_offset        [eV]
// with m_e and e from CODATA 2018 (retrieval/core/units.h). E_offset absorbs retarding potentials
// and contact potentials (common practice for magnetic-bottle and field-free TOF
// spectrometers). E(t) decreases monotonically for t > t0.
//
// Densities: counts per unit energy = counts per unit time * |dt/dE|, with
//   |dE/dt| = m_e L^2 / (t - t0)^3 / e   (the "t^3 Jacobian" of DESIGN.md, Pitfalls).
// Rather than evaluating the density at points (which loses counts), the converter treats each
// time bin as an interval (edges half-way between neighbouring bin centres, end bins
// symmetric), maps its edges to energy, and spreads its counts uniformly over that energy
// interval; each uniform output bin receives the overlap share. This is exactly the integral of
// the piecewise-constant density counts*|dt/dE| over the output bin, so the total is conserved
// (up to rounding) for everything inside the output energy window.

#include <optional>
#include <string>
#include <vector>

#include <Eigen/Core>

namespace sw {

struct TofCalibration {
  double length_m = 0.0;          ///< drift length L (m), > 0
  double t0_ns = 0.0;             ///< time zero t0 (ns): the photoemission instant on the TOF clock
  double energy_offset_eV = 0.0;  ///< added to the drift energy (eV)
  /// Number of uniform output energy bins; 0 = as many as time bins.
  int energy_count = 0;
  /// Optional output energy window (eV); default = the full range covered by the time bins
  /// (from the latest bin's upper time edge to the earliest bin's lower edge). Counts outside
  /// the window are dropped and their share reported (TofConversion::fraction_outside).
  std::optional<double> energy_min_eV, energy_max_eV;
  /// Empty if valid, else a message naming the field, its value and the constraint.
  std::string validate() const;
};

/// Kinetic energy (eV) of an electron arriving at time t_ns (> t0_ns).
double tof_to_energy_eV(double t_ns, const TofCalibration& cal);
/// |dE/dt| in eV per ns at time t_ns.
double tof_energy_jacobian_eV_per_ns(double t_ns, const TofCalibration& cal);

/// Result of converting spectra recorded on a TOF axis.
struct TofConversion {
  std::vector<double> energy_eV;  ///< uniform, ascending bin centres
  Eigen::MatrixXd counts;         ///< rows as the input, columns = energy bins (counts per bin)
  double fraction_outside = 0.0;  ///< share of the total counts that fell outside the window
};

/// Converts `counts` (rows = spectra, columns = TOF bins at centres tof_ns, strictly
/// monotonic) onto a uniform energy axis. Throws sw::Error(kInput) naming `where` if a bin
/// centre or edge is not after t0 or the calibration is invalid.
TofConversion tof_to_energy(const Eigen::MatrixXd& counts, const std::vector<double>& tof_ns,
                            const TofCalibration& cal, const std::string& where);

}  // namespace sw
