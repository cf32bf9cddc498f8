#include "retrieval/engines/trace_error.h"

#include <algorithm>
#include <cmath>
#include <limits>
#include <string>

#include "retrieval/core/error.h"

namespace sw {

namespace {
// The weight matrix to use: null when absent or empty (every element 1).
const Eigen::MatrixXd* usable_weight(const Eigen::MatrixXd& measured, const Eigen::MatrixXd* w) {
  if (!w || w->size() == 0) return nullptr;
  if (w->rows() != measured.rows() || w->cols() != measured.cols())
    throw Error(ErrorKind::kInternal, "trace_error: weight and measured differ in size");
  return w;
}
double weighted_peak(const Eigen::MatrixXd& measured, const Eigen::MatrixXd* w) {
  if (!w) return measured.size() ? measured.maxCoeff() : 0.0;
  double peak = -std::numeric_limits<double>::infinity();
  for (Eigen::Index i = 0; i < measured.size(); ++i)
    if (w->data()[i] > 0) peak = std::max(peak, measured.data()[i]);
  return peak;
}
}  // namespace

double trace_error(const Eigen::MatrixXd& measured, const Eigen::MatrixXd& model, double* mu,
                   const Eigen::MatrixXd* weight) {
  if (measured.rows() != model.rows() || measured.cols() != model.cols())
    throw Error(ErrorKind::kInternal,
                "trace_error: measured is " + std::to_string(measured.rows()) + "x" +
                    std::to_string(measured.cols()) + " but model is " +
                    std::to_string(model.rows()) + "x" + std::to_string(model.cols()));
  const Eigen::MatrixXd* w = usable_weight(measured, weight);
  const double n = w ? w->sum() : static_cast<double>(measured.size());
  const double peak = weighted_peak(measured, w);
  const double mm = w ? w->cwiseProduct(model.cwiseAbs2()).sum() : model.squaredNorm();
  const double im =
      w ? w->cwiseProduct(measured.cwiseProduct(model)).sum() : measured.cwiseProduct(model).sum();
  const double m = mm > 0 ? im / mm : 0.0;
  if (mu) *mu = m;
  if (!(peak > 0) || !(n > 0)) return 0.0;
  const double r2 = w ? w->cwiseProduct((measured - m * model).cwiseAbs2()).sum()
                      : (measured - m * model).squaredNorm();
  return std::sqrt(r2 / (n * peak * peak));
}

double noise_floor_trace_error(const Eigen::MatrixXd& measured, const Eigen::MatrixXd& variance,
                               const Eigen::MatrixXd* weight) {
  if (variance.size() == 0 || measured.size() == 0) return 0.0;
  if (measured.rows() != variance.rows() || measured.cols() != variance.cols())
    throw Error(ErrorKind::kInternal,
                "noise_floor_trace_error: measured and variance differ in size");
  const Eigen::MatrixXd* w = usable_weight(measured, weight);
  const double peak = weighted_peak(measured, w);
  const double n = w ? w->sum() : static_cast<double>(measured.size());
  if (!(peak > 0) || !(n > 0)) return 0.0;
  const double v = w ? w->cwiseProduct(variance.cwiseMax(0.0)).sum() : variance.cwiseMax(0.0).sum();
  return std::sqrt(v / (n * peak * peak));
}

}  // namespace sw
