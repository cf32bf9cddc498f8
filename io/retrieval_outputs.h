#pragma once
// Everything `retrieve` writes into its output folder, from a RetrieveOutput:
//   xuv_temporal.csv   time_as, intensity_norm, phase_rad        (phase about the centre energy)
//   xuv_spectral.csv   photon_energy_eV, spectral_intensity_norm, spectral_phase_rad
//   ir_field.csv       time_fs, vector_potential_au, electric_field_au
//   convergence.csv    engine, iteration, trace_error, seconds
//   trace_comparison.png, xuv_pulse.png, xuv_spectrum.png, ir_field.png, convergence.png
//   report.html        self-contained: numbers, settings, warnings, all figures
//   result.json        written LAST, so its presence means the folder is complete
// Every file is written atomically (temporary name, then rename). The CSV headers carry units.
// Figures are .png, or .svg with figure_format = FigureFormat::kSvg (same names, same
// content; report.html embeds whichever was written).

#include <string>
#include <vector>

#include "io/plot.h"
#include "retrieval/analysis/retrieve.h"
#include "retrieval/core/result.h"
#include "retrieval/core/trace.h"

namespace sw {

/// Writes the folder (created if missing). out.result is written unchanged as result.json (the
/// caller has appended the provenance; analyse_retrieve, retrieval/analysis/analyses.h, the
/// sidecar's extra keys). Figures take the extension of `figure_format`.
void write_retrieval_outputs(const Trace& trace, const RetrieveOutput& out,
                             const std::string& out_dir,
                             plot::FigureFormat figure_format = plot::FigureFormat::kPng);

/// Unwrapped phase of samples where |z|^2 >= threshold * max, NaN elsewhere.
std::vector<double> unwrapped_phase(const std::vector<std::complex<double>>& z, double threshold);

}  // namespace sw
