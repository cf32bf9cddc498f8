#pragma once
// Everything `rabbitt` writes into its output folder, from the RABBITT analysis
// (retrieval/analysis/rabbitt.h), the average burst of the train (retrieval/analysis/train_burst.h)
// and the finished AnalysisResult:
//   sidebands.csv   order, energy_eV, phase_rad, phase_rad_sigma, group_delay_as,
//                   group_delay_as_sigma, modulation_depth, atomic_delay_as, then
//                   photon_energy_eV, measured_delay_as, wigner_delay_as,
//                   continuum_continuum_delay_as, reduced_chi2, window_low_eV, window_high_eV
//                   (atomic columns empty when no correction was applied)
//   rainbow.csv     order, energy_eV, phase_rad, phase_rad_sigma, modulation_depth: the fit per
//                   energy bin across each sideband (rainbow RABBITT)
//   harmonics.csv   order, photon_energy_eV, intensity_norm, phase_rad (the burst's harmonics)
//   burst.csv       time_as, intensity_norm, transform_limited_intensity_norm
//   scan.png        the scan with the sideband windows' centres marked (SBq)
//   spectrum.png    delay-integrated spectrum with the predicted and observed peak energies
//   phase.png       sideband phase vs photoelectron energy with 1-sigma error bars
//   group_delay.png group delay vs photon energy with error bars and the attochirp fit line
//                   (and, when atomic delays were subtracted, the uncorrected delays)
//   rainbow.png     rainbow phases across each sideband
//   burst.png       the average burst and its transform limit over the sampled IR period(s)
//   report.html     self-contained: numbers, the method's assumptions, the energy-axis
//                   alignment and delay-calibration checks, the atomic corrections, the
//                   verdict with its evidence, warnings, settings, all figures
//   result.json     written LAST (io/result_io.h), so its presence means the folder is complete
// Every file is written atomically; CSV headers carry units. Non-finite numbers are written
// as empty CSV cells.
// Figures are .png, or .svg with figure_format = FigureFormat::kSvg (same names, same
// content; report.html embeds whichever was written).

#include <string>

#include "io/plot.h"

#include "retrieval/analysis/rabbitt.h"
#include "retrieval/analysis/train_burst.h"
#include "retrieval/core/result.h"
#include "retrieval/core/trace.h"

namespace sw {

/// Writes the folder (created if missing). `result` is written unchanged as result.json (the
/// caller has filled the rabbitt and verdict sections, warnings, params and provenance).
/// `burst` may be nullptr (the burst could not be built: no burst files or figure).
/// Throws sw::Error (kInput) when the folder cannot be created or written.
void write_rabbitt_outputs(const Trace& trace, const RabbittAnalysis& analysis,
                           const TrainBurst* burst, const AnalysisResult& result,
                           const std::string& out_dir,
                           plot::FigureFormat figure_format = plot::FigureFormat::kPng);

}  // namespace sw
