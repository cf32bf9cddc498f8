// The unstreaked edge rows (retrieval/preprocess/edge_rows.h), on centroid series whose quiet
// runs are known by construction: a streaked middle (a cosine of amplitude 1) between flat
// edges. Expected rows are written out by hand from the header's definition.
#include <catch2/catch.hpp>

#include <cmath>
#include <vector>

#include "retrieval/preprocess/edge_rows.h"

using namespace sw;

namespace {

// 20 rows: rows 0-4 and 15-19 flat at 10 (+ a small offset), rows 5-14 streaked by +-1.
std::vector<double> series(double edge_wobble) {
  std::vector<double> c(20, 10.0);
  for (int i = 5; i < 15; ++i) c[static_cast<std::size_t>(i)] = 10.0 + std::cos(0.7 * i);
  c[2] += edge_wobble;
  return c;
}

}  // namespace

TEST_CASE("quiet edge rows: the flat runs at both ends, in order", "[preprocess][edge_rows]") {
  const std::vector<double> c = series(0.0);
  const std::vector<char> has(c.size(), 1);
  // The largest shift from the mean is close to 1; a fraction of 0.1 keeps only the flat rows
  // (the first streaked rows, cos(3.5) = -0.94 and cos(10.5) = -0.48, are far off).
  const std::vector<Eigen::Index> rows = quiet_edge_rows(c, has, 0.1);
  CHECK(rows == std::vector<Eigen::Index>{0, 1, 2, 3, 4, 19, 18, 17, 16, 15});
}

TEST_CASE("quiet edge rows: a run stops at its first loud row", "[preprocess][edge_rows]") {
  // Row 2 moved by 0.5 (half the streaking range): the forward run ends before it.
  const std::vector<double> c = series(0.5);
  const std::vector<char> has(c.size(), 1);
  CHECK(quiet_edge_rows(c, has, 0.1) == std::vector<Eigen::Index>{0, 1, 19, 18, 17, 16, 15});
}

TEST_CASE("quiet edge rows: rows without a centroid and the empty cases",
          "[preprocess][edge_rows]") {
  std::vector<double> c = series(0.0);
  std::vector<char> has(c.size(), 1);
  // A row without a centroid breaks its run (its value is never read).
  has[1] = 0;
  c[1] = 1e300;
  CHECK(quiet_edge_rows(c, has, 0.1) == std::vector<Eigen::Index>{0, 19, 18, 17, 16, 15});
  // The edge row itself without a centroid: no run from that end.
  has.assign(c.size(), 1);
  has[19] = 0;
  c = series(0.0);
  CHECK(quiet_edge_rows(c, has, 0.1) == std::vector<Eigen::Index>{0, 1, 2, 3, 4});
  // Nothing streaked (every centroid equal): no largest shift, no rows.
  const std::vector<double> flat(20, 3.0);
  CHECK(quiet_edge_rows(flat, std::vector<char>(20, 1), 0.1).empty());
  // Fewer than 3 quiet rows in all: none.
  std::vector<double> loud = series(0.0);
  loud[1] = loud[18] = 11.0;
  CHECK(quiet_edge_rows(loud, std::vector<char>(20, 1), 0.1).empty());
}
