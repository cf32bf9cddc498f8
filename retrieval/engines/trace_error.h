#pragma once
// The trace error G of a model against a measured trace, and the G that noise alone gives.
#include <Eigen/Core>

namespace sw {

/// G = sqrt( sum (I_meas - mu I_model)^2 / (N max(I_meas)^2) ) with the optimal scale
/// mu = sum I_meas I_model / sum I_model^2 (Fittinghoff et al. 1995, normalised to the
/// measured peak). Also returns mu. With `weight` (RetrievalProblem::weight, same layout, not
/// empty) every sum carries the element's weight, N = sum of the weights and the peak is taken
/// over elements of weight > 0 (weight-0 elements, e.g. saturated bins, are not data).
double trace_error(const Eigen::MatrixXd& measured, const Eigen::MatrixXd& model,
                   double* mu = nullptr, const Eigen::MatrixXd* weight = nullptr);
/// G expected from noise alone: sqrt(sum variance / (N max^2)); with `weight` as above.
double noise_floor_trace_error(const Eigen::MatrixXd& measured, const Eigen::MatrixXd& variance,
                               const Eigen::MatrixXd* weight = nullptr);

}  // namespace sw
