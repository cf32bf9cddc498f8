#pragma once
// What an engine is asked to explain (RetrievalProblem): a preprocessed trace on engine-ready
// axes, built by retrieval/preprocess/preprocess.h. One concept of the engine layer
// (retrieval/engines/engine.h includes it).
#include <string>
#include <vector>

#include <Eigen/Core>

#include "retrieval/core/grid.h"
#include "retrieval/physics/dipole.h"

namespace sw {

/// The reference photoelectron spectrum of a RetrievalProblem:
///   kFieldFree    measured without IR (or on edge rows spanning an IR period): fixes
///                 |E_X| and the frequency-shift ambiguity (its centroid);
///   kEdgeRows     weakly streaked edge rows: fixes the shape of |E_X| only; the centroid comes
///                 from a zero time-average of A(t) over the scan;
///   kDelayAverage the delay-averaged, streaking-broadened spectrum: an initial guess only;
///                 the centroid as for kEdgeRows.
enum class ReferenceSpectrum { kFieldFree, kEdgeRows, kDelayAverage };

/// A further photoelectron line of the same XUV and IR fields (joint fit of several lines,
/// retrieval/analysis/multi_line_fit.h): its own binding energy, relative strength and relative
/// photoemission delay; its counts lie at kinetic energies [energy_lo_au, energy_hi_au].
struct ExtraLine {
  std::string name;                           ///< "2s", "Kr 4p", ...
  double ionization_energy_au = 0;            ///< > 0
  double energy_lo_au = 0, energy_hi_au = 0;  ///< kinetic band of its counts (a.u.)
  double strength = 1.0;                      ///< initial |d_line|^2 / |d_reference|^2 (> 0)
  double delay_au = 0.0;                      ///< initial relative delay (+ = emitted later)
};

/// What an engine is asked to explain: a preprocessed trace on engine-ready axes.
/// Built by retrieval/preprocess/preprocess.h from a measured Trace.
struct RetrievalProblem {
  /// Measured photoelectron energy density after background subtraction, divided by the
  /// energy Jacobian p (so it is comparable to |a|^2); rows = delays, cols = energies.
  Eigen::MatrixXd intensity;
  /// Poisson variance estimate of each element of `intensity` (same layout; > 0). May be
  /// empty (noise-free synthetic data): the noise-floor rule is then off.
  Eigen::MatrixXd variance;
  std::vector<double> energy_au;  ///< uniform, step == grid.dw()
  std::vector<double> delay_au;   ///< ascending, any spacing
  TimeGrid grid;                  ///< XUV grid matched to the energy step
  double ionization_energy_au = 0.0;
  double central_momentum_au = 0.0;  ///< p0 at the photoelectron-spectrum centroid
  double ir_omega_au = 0.0;          ///< IR angular frequency from the sidecar
  /// Field-free (or delay-averaged) photoelectron spectrum on energy_au, |a|^2 units:
  /// constrains |E_X(Omega = W + Ip)|^2.
  std::vector<double> field_free_spectrum;
  /// What field_free_spectrum is, and so what it may fix (retrieval/engines/cma_problem.h).
  ReferenceSpectrum reference = ReferenceSpectrum::kFieldFree;
  DipoleModel dipole;
  /// Energy support of the signal (photoelectron kinetic energy, a.u.): the band where the
  /// delay-integrated signal stands above the noise (retrieval/preprocess/preprocess.h). Engines
  /// keep the XUV spectrum zero at photon energies outside [support_lo + Ip, support_hi + Ip]; both
  /// 0 = no support known (the whole axis).
  double support_lo_au = 0.0, support_hi_au = 0.0;
  /// Spectrometer resolution, Gaussian FWHM in energy (a.u.; 0 = not known): from the
  /// sidecar's energy_resolution_eV. The full model convolves its model counts with it
  /// (retrieval/physics/forward_adjoint.h); the CMA engines, which project measured amplitudes, do
  /// not.
  double energy_resolution_au = 0.0;
  /// Per-element weight of `intensity` in [0, 1] (same layout); empty = every element 1. A
  /// weight of 0 (saturated bins) means the element is not data: projections keep the model
  /// there and least squares ignore it.
  Eigen::MatrixXd weight;
  /// Further lines fitted jointly with the reference (the full-model engine, and the
  /// ptychographic engine with its joint_lines setting; empty = one line).
  std::vector<ExtraLine> extra_lines;
};

}  // namespace sw
