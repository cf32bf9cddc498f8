#pragma once
// Helpers shared by the tests and validation programs that build scans by hand: the density of
// the full-momentum forward model on given axes, and Poisson counts drawn from a density.

#include <Eigen/Dense>
#include <random>
#include <vector>

#include "retrieval/physics/forward_model.h"

namespace sw::test {

/// p |a|^2 of sw::ForwardModel with the full momentum dependence (MomentumModel::kFull) and a
/// constant dipole: rows = `delay_au`, columns = `energy_au`.
inline Eigen::MatrixXd full_momentum_density(double ip_au, const XuvField& xuv, const IrField& ir,
                                             const std::vector<double>& delay_au,
                                             const std::vector<double>& energy_au) {
  ForwardModelOptions o;
  o.momentum = MomentumModel::kFull;
  return ForwardModel(ip_au, DipoleModel(), o).trace(xuv, ir, delay_au, energy_au);
}

/// Counts ~ Poisson(scale x expected(i, j)), drawn bin by bin (row by row) from `rng`.
inline Eigen::MatrixXd poisson_counts(const Eigen::MatrixXd& expected, double scale,
                                      std::mt19937_64& rng) {
  Eigen::MatrixXd counts(expected.rows(), expected.cols());
  for (Eigen::Index i = 0; i < expected.rows(); ++i)
    for (Eigen::Index j = 0; j < expected.cols(); ++j) {
      std::poisson_distribution<long long> pd(scale * expected(i, j));
      counts(i, j) = static_cast<double>(pd(rng));
    }
  return counts;
}

}  // namespace sw::test
