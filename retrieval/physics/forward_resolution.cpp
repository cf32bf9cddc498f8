// The spectrometer resolution of ForwardAdjoint (forward_adjoint.h, "Spectrometer resolution"):
// the Gaussian kernel K along energy, its application to model counts and its transpose for the
// adjoint.
#include "retrieval/physics/forward_adjoint.h"

#include <algorithm>
#include <cmath>
#include <stdexcept>
#include <vector>

namespace sw {

void ForwardAdjoint::set_energy_resolution(double fwhm_au) {
  if (!(fwhm_au >= 0) || !std::isfinite(fwhm_au))
    throw std::invalid_argument(
        "ForwardAdjoint::set_energy_resolution: FWHM must be finite and >= 0");
  resolution_fwhm_ = fwhm_au;
  blur_first_.clear();
  blur_w_.clear();
  const std::size_t ne = energy_.size();
  if (ne < 2 || fwhm_au == 0.0) return;
  const double step = (energy_.back() - energy_.front()) / static_cast<double>(ne - 1);
  if (!(fwhm_au > step / 3.0)) return;
  // Normalised Gaussian weights on the (possibly non-uniform) axis, cut at 4 sigma; each
  // energy's bin width as the quadrature weight, so a non-uniform axis conserves counts.
  const double sigma = fwhm_au / (2.0 * std::sqrt(2.0 * std::log(2.0)));
  blur_first_.resize(ne);
  blur_w_.resize(ne);
  for (std::size_t j = 0; j < ne; ++j) {
    std::size_t a = j, b = j;
    while (a > 0 && energy_[j] - energy_[a - 1] <= 4.0 * sigma) --a;
    while (b + 1 < ne && energy_[b + 1] - energy_[j] <= 4.0 * sigma) ++b;
    std::vector<double> wt(b - a + 1);
    double sum = 0.0;
    for (std::size_t k = a; k <= b; ++k) {
      const double width = 0.5 * (energy_[std::min(k + 1, ne - 1)] - energy_[k > 0 ? k - 1 : 0]);
      const double x = (energy_[k] - energy_[j]) / sigma;
      wt[k - a] = std::exp(-0.5 * x * x) * width;
      sum += wt[k - a];
    }
    for (double& x : wt) x /= sum;
    blur_first_[j] = a;
    blur_w_[j] = std::move(wt);
  }
}

void ForwardAdjoint::blur_row(const double* in, double* out) const {
  for (std::size_t j = 0; j < blur_w_.size(); ++j) {
    const std::vector<double>& wt = blur_w_[j];
    const double* x = in + blur_first_[j];
    double acc = 0.0;
    for (std::size_t t = 0; t < wt.size(); ++t) acc += wt[t] * x[t];
    out[j] = acc;
  }
}

void ForwardAdjoint::blur_row_transpose(const double* in, double* out) const {
  std::fill(out, out + blur_w_.size(), 0.0);
  for (std::size_t j = 0; j < blur_w_.size(); ++j) {
    const std::vector<double>& wt = blur_w_[j];
    double* y = out + blur_first_[j];
    for (std::size_t t = 0; t < wt.size(); ++t) y[t] += wt[t] * in[j];
  }
}

namespace {

// Applies `op` (a row map of the resolution kernel) to every row of c, in place.
template <class Op>
void map_rows(Eigen::MatrixXd& c, std::size_t ne, Op op) {
  if (c.cols() != static_cast<Eigen::Index>(ne))
    throw std::invalid_argument("ForwardAdjoint: blurred counts need one column per energy");
  std::vector<double> row(ne), out(ne);
  for (Eigen::Index i = 0; i < c.rows(); ++i) {
    for (std::size_t j = 0; j < ne; ++j) row[j] = c(i, static_cast<Eigen::Index>(j));
    op(row.data(), out.data());
    for (std::size_t j = 0; j < ne; ++j) c(i, static_cast<Eigen::Index>(j)) = out[j];
  }
}

}  // namespace

void ForwardAdjoint::blur_counts(Eigen::MatrixXd& c) const {
  if (blur_first_.empty()) return;
  map_rows(c, energy_.size(), [&](const double* in, double* out) { blur_row(in, out); });
}

void ForwardAdjoint::blur_counts_transpose(Eigen::MatrixXd& c) const {
  if (blur_first_.empty()) return;
  map_rows(c, energy_.size(), [&](const double* in, double* out) { blur_row_transpose(in, out); });
}

}  // namespace sw
