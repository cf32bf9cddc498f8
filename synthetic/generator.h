#pragma once
// The synthetic scan generator: a ScanConfig and a seed in, a Trace with its truth record out.
//
// Steps of generate_scan():
//   1. validate the config (sw::Error kUsage naming the field otherwise);
//   2. draw the per-row perturbations (synthetic/fluctuations.h) from the seed's sub-streams;
//   3. build the exact XUV field on a grid chosen for the quadrature (synthetic/xuv_source.h);
//   4. evaluate the SFA amplitude of every row by direct quadrature with the full momentum
//      dependence at the row's actual delay and IR pulse (synthetic/sfa_quadrature.h), giving the
//      noise-free photoelectron energy density p |a|^2 (OpenMP over delays);
//   5. apply the detector noise pipeline (synthetic/noise.h) on one thread;
//   6. fill the trace (axes in a.u. at the nominal delays, counts, metadata) and the truth
//      record (synthetic/truth.h) from the exact, finely sampled field.
// The result depends only on (config, seed): not on the number of threads.

#include <vector>

#include <Eigen/Core>

#include "retrieval/result.h"
#include "retrieval/trace.h"
#include "retrieval/xuv_field.h"
#include "synthetic/fluctuations.h"
#include "synthetic/scan_config.h"

namespace sw::synthetic {

struct SyntheticScan {
  /// Counts after noise; energy_au and delay_au (nominal) in a.u.; meta: gas, ir_wavelength_nm
  /// (0 without IR), kind, energy_resolution_eV (when a resolution is modelled; for a relative
  /// resolution its value at the central kinetic energy), background (when purely constant),
  /// scale = 1, notes.
  Trace trace;
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
  /// before resolution and scaling; same layout as trace.counts.
  Eigen::MatrixXd clean;
  /// The realised per-row perturbations (all zero / one when disabled).
  std::vector<RowPerturbation> rows;
  double quadrature_step_au = 0.0;   ///< trapezoid step of the SFA integral
  std::size_t quadrature_nodes = 0;  ///< active quadrature nodes per row
  double seconds = 0.0;              ///< wall time of generate_scan
};

SyntheticScan generate_scan(const ScanConfig& config, unsigned long long seed);

}  // namespace sw::synthetic
