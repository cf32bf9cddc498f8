#pragma once
// Helpers shared by the tests of sw::retrieve on generated scans (test_retrieve.cpp,
// test_thread_pool.cpp, test_uncertainty.cpp, ...): the neon reference scan at a given count
// level, the few-counts scan, and the ptychographic engine's options.

#include "retrieval/analysis/retrieve.h"
#include "synthetic/presets.h"
#include "synthetic/scan_config.h"

namespace sw::test {

/// The neon reference scan (preset neon-150as) on 61 delays of 0.2 fs from -6 fs, with
/// `peak_counts` expected counts at the peak.
inline synthetic::ScanConfig neon_reference_61_delays(double peak_counts) {
  synthetic::ScanConfig cfg = synthetic::find_preset("neon-150as").config;
  cfg.geometry.delay_fs = {-6.0, 0.2, 61};
  cfg.noise.peak_counts = peak_counts;
  return cfg;
}

/// The few-counts scan (preset neon-chirped-neg at 40 expected peak counts, no background),
/// which `auto` hands to the full model (RetrieveOptions::cma_min_signal_counts).
inline synthetic::ScanConfig neon_few_counts() {
  synthetic::ScanConfig cfg = synthetic::find_preset("neon-chirped-neg").config;
  cfg.noise.peak_counts = 40.0;
  cfg.noise.background_counts = 0.0;
  return cfg;
}

/// sw::retrieve with the ptychographic engine and `bootstrap` replicas (other fields default).
inline RetrieveOptions ptychographic_options(int bootstrap) {
  RetrieveOptions o;
  o.engine = "ptychographic";
  o.bootstrap = bootstrap;
  return o;
}

}  // namespace sw::test
