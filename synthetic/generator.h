#pragma once
// The synthetic scan generator: a ScanConfig and a seed in, a Trace with its truth record out.
//
// Steps of generate_scan():
//   1. validate the config (sw::Error kUsage naming the field otherwise);
//   2. draw the per-row perturbations (synthetic/fluctuations.h) from the seed's sub-streams;
//   3. build the exact XUV field on a grid chosen for the quadrature (synthetic/xuv_source.h);
//   4. evaluate the SFA amplitude of every row by direct quadrature with the full momentum
//      dependence at the row's actual delay and IR pulse (synthetic/sfa_quadrature.h), giving the
//      noise-free photoelectron energy density p |a|^2 (OpenMP over delays), once per
//      photoelectron line (ScanConfig::lines: its own Ip, its |dipole|^2 factor, its
//      photoemission delay d entering as the delay tau + d of E_X(t - tau - d)); the lines'
//      densities add incoherently;
//   5. apply the detector noise pipeline (synthetic/noise.h) on one thread; with time-of-flight
//      recording the counts move to flight-time bins after the energy resolution
//      (synthetic/tof_recording.h);
//   6. fill the trace (axes in a.u. at the nominal delays, counts, metadata) and the truth
//      record (synthetic/truth.h) from the exact, finely sampled field.
// The result depends only on (config, seed): not on the number of threads.

#include <optional>
#include <vector>

#include <Eigen/Core>

#include "retrieval/core/result.h"
#include "retrieval/core/trace.h"
#include "retrieval/physics/xuv_field.h"
#include "synthetic/fluctuations.h"
#include "synthetic/noise.h"
#include "synthetic/scan_config.h"

namespace sw::synthetic {

/// The flight-time axis of a scan recorded with ScanConfig::tof (one value per trace column).
struct TofRecording {
  std::vector<double> tof_ns;     ///< flight time of each column's bin centre (descending)
  double length_m = 0.0;          ///< calibration: drift length (m)
  double t0_ns = 0.0;             ///< calibration: time zero (ns)
  double energy_offset_eV = 0.0;  ///< calibration: energy offset (eV)
};

struct SyntheticScan {
  /// Counts after noise; energy_au and delay_au (nominal: the stage's recorded delays, never
  /// the drifted or jittered ones) in a.u.; meta: gas (the scan's gas), ir_wavelength_nm
  /// (0 without IR), kind, energy_resolution_eV (when a resolution is modelled; for a relative
  /// resolution its value at the central kinetic energy), background (when purely constant),
  /// scale = 1, notes.
  /// With time-of-flight recording (`tof` set) the columns are the flight-time bins in order of
  /// ascending kinetic energy, counts are per time bin (not per energy bin), and energy_au holds
  /// the kinetic energy of each bin centre (a non-uniform axis): write it with the flight-time
  /// axis (io/trace_writer.h, TraceWriteOptions::tof) and read it back to analyse it.
  Trace trace;
  /// The flight-time axis and calibration when ScanConfig::tof is enabled.
  std::optional<TofRecording> tof;
  /// What a perfect analysis would report (synthetic/truth.h); analysis = "simulate";
  /// truth.extra holds `parameters`.
  AnalysisResult truth;
  /// Every generator parameter under "generator." (config fields, seed, numerics, realised
  /// per-row perturbations).
  std::vector<Param> parameters;

  // --- beyond the brief: useful to tests and figures ---
  /// The exact XUV field on the finely sampled truth grid.
  XuvField xuv;
  /// Noise-free energy density p |a|^2 (a.u.) of every row at its actual delay and IR pulse,
  /// before resolution and scaling, summed over the lines; rows = delays, columns = the config's
  /// energy axis (the layout of trace.counts, except with time-of-flight recording).
  Eigen::MatrixXd clean;
  /// The realised per-row perturbations (all zero / one when disabled).
  std::vector<RowPerturbation> rows;
  /// The drawn hot pixels (positions in trace.counts, factors).
  std::vector<HotPixel> hot_pixels;
  /// Delay- and energy-integrated noise-free density of each line (ScanConfig::resolved_lines
  /// order), a.u.; the truth record's relative strengths are their ratios to the first line.
  std::vector<double> line_totals;
  double quadrature_step_au = 0.0;   ///< trapezoid step of the SFA integral
  std::size_t quadrature_nodes = 0;  ///< active quadrature nodes per row
  double seconds = 0.0;              ///< wall time of generate_scan
};

SyntheticScan generate_scan(const ScanConfig& config, unsigned long long seed);

/// The scan at another count level from the same noise-free density: scan.clean scaled to
/// `peak_counts` expected counts at its largest element and drawn again with Poisson noise
/// (`seed` for the draws); no other noise stage (ideal spectrometer). The scan must be recorded
/// on its energy axis (no time-of-flight); throws sw::Error (kUsage) otherwise.
Trace redraw_counts(const SyntheticScan& scan, double peak_counts, unsigned long long seed);

}  // namespace sw::synthetic
