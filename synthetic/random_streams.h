#pragma once
// Reproducible random numbers for one synthetic scan.
//
// Every draw descends from one std::mt19937_64 seeded with the scan's `seed`. That master
// engine is used for nothing but seeding: its first kStreamCount outputs, in the fixed order of
// the Stream enumeration, seed one std::mt19937_64 per random effect. Each effect then draws
// from its own sub-stream in a fixed order (rows in ascending delay, energies ascending within a
// row), always on one thread, before (row perturbations) or after (detector noise) the parallel
// amplitude evaluation. Consequences:
//   - the same seed gives the same scan on any number of threads;
//   - switching one effect on or off, or changing its size, never changes another effect's
//     realisation (e.g. adding readout noise keeps the Poisson draws);
//   - different seeds give different realisations of every effect.
// Distributions are those of the C++ standard library (std::normal_distribution,
// std::poisson_distribution), whose algorithms are implementation-defined: bit-identical
// results are guaranteed for one standard library, not across them.

#include <array>
#include <cstddef>
#include <random>

namespace sw::synthetic {

/// The random effects, each with its own sub-stream (order fixes the seeding; append only).
enum class Stream : std::size_t {
  kDelayJitter = 0,
  kDelayWalk,
  kIrIntensity,
  kCep,
  kPoisson,
  kReadout,
  kHotPixels,
  kCount
};

class RandomStreams {
 public:
  explicit RandomStreams(unsigned long long seed);
  std::mt19937_64& operator[](Stream s) { return engines_[static_cast<std::size_t>(s)]; }
  unsigned long long seed() const { return seed_; }

 private:
  unsigned long long seed_;
  std::array<std::mt19937_64, static_cast<std::size_t>(Stream::kCount)> engines_;
};

}  // namespace sw::synthetic
