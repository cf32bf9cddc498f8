#include "synthetic/fluctuations.h"

#include <algorithm>

namespace sw::synthetic {

bool has_row_perturbations(const NoiseConfig& n) {
  return n.delay_jitter_rms_fs > 0 || n.delay_drift_fs_per_row != 0 || n.delay_walk_rms_fs > 0 ||
         n.ir_intensity_rms > 0 || n.cep_jitter_rms_rad > 0;
}

std::vector<RowPerturbation> draw_row_perturbations(const NoiseConfig& n, std::size_t rows,
                                                    RandomStreams& streams) {
  std::vector<RowPerturbation> out(rows);
  std::normal_distribution<double> unit(0.0, 1.0);
  if (n.delay_jitter_rms_fs > 0) {
    auto& g = streams[Stream::kDelayJitter];
    for (auto& r : out) r.delay_offset_fs += n.delay_jitter_rms_fs * unit(g);
  }
  if (n.delay_drift_fs_per_row != 0)
    for (std::size_t i = 0; i < rows; ++i)
      out[i].delay_offset_fs += n.delay_drift_fs_per_row * static_cast<double>(i);
  if (n.delay_walk_rms_fs > 0) {
    auto& g = streams[Stream::kDelayWalk];
    double walk = 0.0;
    for (std::size_t i = 0; i < rows; ++i) {
      if (i > 0) walk += n.delay_walk_rms_fs * unit(g);
      out[i].delay_offset_fs += walk;
    }
  }
  if (n.ir_intensity_rms > 0) {
    auto& g = streams[Stream::kIrIntensity];
    for (auto& r : out) r.intensity_factor = std::max(0.0, 1.0 + n.ir_intensity_rms * unit(g));
  }
  if (n.cep_jitter_rms_rad > 0) {
    auto& g = streams[Stream::kCep];
    for (auto& r : out) r.cep_offset_rad = n.cep_jitter_rms_rad * unit(g);
  }
  return out;
}

}  // namespace sw::synthetic
