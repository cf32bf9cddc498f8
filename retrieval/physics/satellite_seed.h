#pragma once
// A start for the full model that holds the satellite hypothesis: the burst found so far plus
// copies of itself half an IR period before and after it.
//
// Why: from a start without satellites, the full model can settle at the noise floor's edge
// with satellites far weaker than the scan's (a held-out validation scan with 17 % satellites
// came out at 6 %, class isolated, trusted; docs/validation.md). Half-cycle gating produces
// satellites at +-T/2 with the field sign of the neighbouring half-cycle (Sansone et al.,
// Science 314, 443 (2006); Kienberger et al., Nature 427, 817 (2004)), so the hypothesis has a
// fixed shape; retrieve() runs the full model from it and keeps it only when it fits better
// (retrieval/analysis/retrieve.h).
//
// E_seed(t) = E(t) + c [E(t + T/2) + E(t - T/2)], c = sign sqrt(ratio), formed exactly in the
// spectral view: E~_seed(Omega) = E~(Omega) (1 + 2 c cos(Omega T/2)) (Fourier shift theorem in
// the convention of retrieval/core/grid.h; Omega the absolute photon energy; circular on the grid).
#include "retrieval/physics/xuv_field.h"

namespace sw {

/// The burst `x` with satellites of intensity ratio `intensity_ratio` (> 0) at -+ delay_au
/// (> 0), each multiplied by `sign` (+1 or -1).
XuvField with_satellites(const XuvField& x, double delay_au, double intensity_ratio, double sign);

}  // namespace sw
