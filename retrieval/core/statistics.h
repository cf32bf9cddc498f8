#pragma once
// Small order statistics and smoothing shared by the analyses and engines.

#include <algorithm>
#include <vector>

namespace sw {

/// The seed of bootstrap replica b (>= 0) of an analysis seeded with `seed`: every replica draws
/// from (seed, b) alone, so the replicas are the same for any thread count and order
/// (retrieval/analysis/thread_pool.h; docs/theory.md "Replicas in parallel").
inline unsigned long long replica_seed(unsigned long long seed, int b) {
  return seed * 1000003ULL + static_cast<unsigned long long>(b) + 1;
}

/// The upper median of v (element size / 2 after a partial sort; the mean of the two middle
/// elements is not taken), 0 for an empty v. Takes v by value: the caller's order is kept.
inline double median(std::vector<double> v) {
  if (v.empty()) return 0.0;
  std::nth_element(v.begin(), v.begin() + static_cast<long>(v.size() / 2), v.end());
  return v[v.size() / 2];
}

/// Moving average of v over the 2 half_width + 1 samples centred on each element; near the ends
/// the window is cut to the samples that exist (the mean of those, no padding).
inline std::vector<double> moving_average(const std::vector<double>& v, long half_width) {
  const long n = static_cast<long>(v.size());
  std::vector<double> out(v.size(), 0.0);
  for (long j = 0; j < n; ++j) {
    double sum = 0;
    int count = 0;
    for (long k = std::max(j - half_width, 0L); k <= std::min(j + half_width, n - 1); ++k) {
      sum += v[static_cast<std::size_t>(k)];
      ++count;
    }
    out[static_cast<std::size_t>(j)] = sum / count;
  }
  return out;
}

}  // namespace sw
