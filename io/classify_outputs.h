#pragma once
// Everything `classify` writes into its output folder:
//   evidence.csv    key, value: every piece of evidence of the verdict
//   (retrieval/analysis/classifier.h
//                   keys: spectrum.*, delay.*, retrieval.*), numbers or text
//   scan.png        the scan (counts per bin)
//   spectrum.png    the delay-integrated photoelectron spectrum (fringes at 2 hbar omega mean
//                   bursts half an IR period apart)
//   xuv_pulse.png   only with a reconstruction: the retrieved XUV intensity over +-1.5 IR
//                   periods around the main burst, with the +-T/2 satellite positions marked
//   report.html     the class, the reason, the evidence table with the thresholds in use,
//                   warnings, settings, figures
//   result.json     written LAST (io/result_io.h)
// Every file is written atomically.
// Figures are .png, or .svg with figure_format = FigureFormat::kSvg (same names, same
// content; report.html embeds whichever was written).

#include <string>

#include "io/plot.h"

#include "retrieval/core/result.h"
#include "retrieval/core/trace.h"
#include "retrieval/engines/engine.h"

namespace sw {

/// Writes the folder (created if missing). `result` (verdict filled) is written unchanged as
/// result.json. `reconstruction` may be nullptr (no retrieval was run). `ir_wavelength_nm` is
/// the wavelength the classifier used (for the satellite positions and figure titles).
/// Throws sw::Error (kInput) when the folder cannot be created or written.
void write_classify_outputs(const Trace& trace, const AnalysisResult& result,
                            const Reconstruction* reconstruction, double ir_wavelength_nm,
                            const std::string& out_dir,
                            plot::FigureFormat figure_format = plot::FigureFormat::kPng);

}  // namespace sw
