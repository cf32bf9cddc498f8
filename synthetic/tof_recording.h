#pragma once
// Time-of-flight recording of a synthetic scan (ScanConfig::tof): the flight-time axis and the
// count-conserving move of counts from energy bins to flight-time bins. Written independently of
// io/tof_calibration.cpp (which reads such scans back), so a round trip tests both.
//
//   E(t) = (m_e / 2) (L / (t - t0))^2 / e + E_offset      [eV; m_e, e: CODATA 2018]
//
// Energy bins: edges half-way between the centres of the energy axis, the outer edges mirrored
// (as synthetic/noise.h's EnergyResolution). Flight-time bins: `bins` uniform bins spanning
// exactly [t(E_top edge), t(E_bottom edge)]. The counts of energy bin j are spread uniformly
// over its energy interval (a piecewise-constant density in energy); time bin k receives the
// share of that interval that falls into its own energy interval [E(t_k+), E(t_k-)]. Every
// energy interval lies inside the union of the time bins, so the total counts of each row are
// conserved up to rounding. Columns are ordered by ascending kinetic energy (descending flight
// time), so that the kinetic energies of the time-bin centres form an ascending axis.

#include <vector>

#include <Eigen/Core>

#include "synthetic/scan_config.h"

namespace sw::synthetic {

/// Kinetic energy (eV) of an electron arriving at t_ns (> t0_ns).
double tof_energy_eV(double t_ns, const TofConfig& tof);
/// Flight time (ns) of an electron of kinetic energy E_eV (> energy_offset_eV).
double tof_time_ns(double E_eV, const TofConfig& tof);

class TofRecorder {
 public:
  /// energy_eV: centres of the (ascending) energy axis; the config must be enabled and valid.
  TofRecorder(const TofConfig& tof, const std::vector<double>& energy_eV);
  /// Flight time (ns) of each output column (descending).
  const std::vector<double>& tof_ns() const { return tof_ns_; }
  /// Kinetic energy (eV) of each output column's centre (ascending).
  const std::vector<double>& energy_eV() const { return energy_eV_; }
  /// Counts per energy bin (rows x energy bins) -> counts per flight-time bin (rows x bins).
  Eigen::MatrixXd rebin(const Eigen::MatrixXd& per_energy_bin) const;

 private:
  struct Share {
    Eigen::Index in, out;
    double fraction;
  };
  std::vector<double> tof_ns_, energy_eV_;
  std::vector<Share> shares_;
  Eigen::Index n_in_ = 0, n_out_ = 0;
};

}  // namespace sw::synthetic
