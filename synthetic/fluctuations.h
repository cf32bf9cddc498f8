#pragma once
// Per-row (per delay step) imperfections of the stage and the IR laser. Each row of a scan is
// evaluated with its own perturbed delay and IR pulse; the trace's delay axis and the truth
// record keep the nominal values (what the stage controller reports and what the laser was set
// to). Rows are acquired in ascending delay order.
//
//   delay offset of row i = jitter_i + drift * i + walk_i           (fs)
//     jitter_i ~ N(0, delay_jitter_rms_fs), independent per row;
//     walk_0 = 0, walk_i = walk_{i-1} + N(0, delay_walk_rms_fs)   (random-walk drift);
//   IR intensity factor of row i = max(0, 1 + ir_intensity_rms * N(0, 1));
//   CEP offset of row i = cep_jitter_rms_rad * N(0, 1).
// A disabled effect (rms or rate 0) contributes exactly 0 (or factor 1) and draws nothing.

#include <vector>

#include "synthetic/random_streams.h"
#include "synthetic/scan_config.h"

namespace sw::synthetic {

struct RowPerturbation {
  double delay_offset_fs = 0.0;   ///< actual delay - nominal delay
  double intensity_factor = 1.0;  ///< actual / nominal IR peak intensity
  double cep_offset_rad = 0.0;    ///< actual - nominal CEP
};

/// One perturbation per row (rows = delays in ascending order), drawn from the kDelayJitter,
/// kDelayWalk, kIrIntensity and kCep sub-streams.
std::vector<RowPerturbation> draw_row_perturbations(const NoiseConfig& noise, std::size_t rows,
                                                    RandomStreams& streams);

/// True when any per-row effect is enabled.
bool has_row_perturbations(const NoiseConfig& noise);

}  // namespace sw::synthetic
