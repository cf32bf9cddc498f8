#pragma once
// The unstreaked edge rows of a scan.
//
// The delays at either end of a streaking scan often lie outside the IR pulse: there the
// photoelectron line is not shifted. Both the preprocessing's cross-check of the line pattern
// (preprocess.cpp, step 2b) and the line-delay analysis (line_delays.cpp, the lines found on
// the field-free rows alone) sum those rows, and take them from here.
//
// Inputs: one centroid per row (delay), in any unit, from the caller's own energy band and
// background; has[i] non-zero when row i has one (centroid[i] is read only there); both of the
// same length n; `fraction` >= 0.
// Method: mean = the average centroid over the rows that have one (summed in row order, divided
// by their number; 0 when there are none), big = the largest |centroid - mean| over those rows.
// Row i is quiet with respect to an edge row e (0 or n - 1) when both have a centroid and
// |centroid[i] - centroid[e]| <= fraction * big: measured from the edge row's own centroid,
// since the mean is itself pulled by the streaked rows.
// Returns: the unbroken run of quiet rows from row 0 forward (rows i < n / 2), then the one from
// row n - 1 backward (rows i >= n / 2), in that order; empty when big is not > 0 (nothing
// streaked, or no centroid at all) or fewer than 3 rows are quiet.

#include <vector>

#include <Eigen/Core>

namespace sw {

std::vector<Eigen::Index> quiet_edge_rows(const std::vector<double>& centroid,
                                          const std::vector<char>& has, double fraction);

}  // namespace sw
