#pragma once
// Small order statistics shared by the analyses.

#include <algorithm>
#include <vector>

namespace sw {

/// The upper median of v (element size / 2 after a partial sort; the mean of the two middle
/// elements is not taken), 0 for an empty v. Takes v by value: the caller's order is kept.
inline double median(std::vector<double> v) {
  if (v.empty()) return 0.0;
  std::nth_element(v.begin(), v.begin() + static_cast<long>(v.size() / 2), v.end());
  return v[v.size() / 2];
}

}  // namespace sw
