#include "retrieval/preprocess/edge_rows.h"

#include <algorithm>
#include <cmath>
#include <cstddef>

namespace sw {

std::vector<Eigen::Index> quiet_edge_rows(const std::vector<double>& centroid,
                                          const std::vector<char>& has, double fraction) {
  const Eigen::Index n = static_cast<Eigen::Index>(centroid.size());
  double mean = 0, m = 0, big = 0;
  for (Eigen::Index i = 0; i < n; ++i)
    if (has[static_cast<std::size_t>(i)]) {
      mean += centroid[static_cast<std::size_t>(i)];
      ++m;
    }
  mean = m > 0 ? mean / m : 0.0;
  for (Eigen::Index i = 0; i < n; ++i)
    if (has[static_cast<std::size_t>(i)])
      big = std::max(big, std::abs(centroid[static_cast<std::size_t>(i)] - mean));
  auto quiet = [&](Eigen::Index i, Eigen::Index edge) {
    return has[static_cast<std::size_t>(i)] && has[static_cast<std::size_t>(edge)] &&
           std::abs(centroid[static_cast<std::size_t>(i)] -
                    centroid[static_cast<std::size_t>(edge)]) <= fraction * big;
  };
  std::vector<Eigen::Index> rows;
  for (Eigen::Index i = 0; i < n / 2 && quiet(i, 0); ++i) rows.push_back(i);
  for (Eigen::Index i = n - 1; i >= n / 2 && quiet(i, n - 1); --i) rows.push_back(i);
  if (!(big > 0) || rows.size() < 3) rows.clear();
  return rows;
}

}  // namespace sw
