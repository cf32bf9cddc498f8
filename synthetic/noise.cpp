#include "synthetic/noise.h"

#include <algorithm>
#include <cmath>
#include <random>
#include <sstream>

#include "retrieval/error.h"
#include "retrieval/units.h"

namespace sw::synthetic {

EnergyResolution::EnergyResolution(double constant_fwhm_eV, double relative)
    : constant_fwhm_eV_(constant_fwhm_eV), relative_(relative) {}

void EnergyResolution::apply(Eigen::MatrixXd& counts, const std::vector<double>& E,
                             RandomStreams&) const {
  const std::size_t n = E.size();
  if (n < 2 || counts.cols() != static_cast<Eigen::Index>(n)) return;
  // Bin edges halfway between centres; the outer edges mirror the neighbouring half-widths.
  std::vector<double> edge(n + 1);
  for (std::size_t j = 1; j < n; ++j) edge[j] = 0.5 * (E[j - 1] + E[j]);
  edge[0] = E[0] - (edge[1] - E[0]);
  edge[n] = E[n - 1] + (E[n - 1] - edge[n - 1]);
  // Sparse kernel: source j -> targets [first[j], first[j] + w[j].size()).
  std::vector<std::size_t> first(n);
  std::vector<std::vector<double>> w(n);
  auto Phi = [](double x) { return 0.5 * std::erfc(-x / std::sqrt(2.0)); };
  for (std::size_t j = 0; j < n; ++j) {
    const double sigma = (constant_fwhm_eV_ + relative_ * std::abs(E[j])) / units::kFwhmPerSigma;
    if (!(sigma > 0)) {
      first[j] = j;
      w[j] = {1.0};
      continue;
    }
    const double lo = E[j] - 8 * sigma, hi = E[j] + 8 * sigma;
    std::size_t a = j, b = j;
    while (a > 0 && edge[a] > lo) --a;
    while (b + 1 < n && edge[b + 1] < hi) ++b;
    first[j] = a;
    double sum = 0;
    for (std::size_t k = a; k <= b; ++k) {
      const double v = Phi((edge[k + 1] - E[j]) / sigma) - Phi((edge[k] - E[j]) / sigma);
      w[j].push_back(v);
      sum += v;
    }
    for (double& v : w[j]) v /= sum;
  }
  Eigen::VectorXd out(static_cast<Eigen::Index>(n));
  for (Eigen::Index i = 0; i < counts.rows(); ++i) {
    out.setZero();
    for (std::size_t j = 0; j < n; ++j) {
      const double c = counts(i, static_cast<Eigen::Index>(j));
      if (c == 0.0) continue;
      for (std::size_t k = 0; k < w[j].size(); ++k)
        out(static_cast<Eigen::Index>(first[j] + k)) += c * w[j][k];
    }
    counts.row(i) = out.transpose();
  }
}

void PeakScaling::apply(Eigen::MatrixXd& counts, const std::vector<double>&, RandomStreams&) const {
  const double m = counts.size() > 0 ? counts.maxCoeff() : 0.0;
  if (!(m > 0) || !std::isfinite(m))
    throw input_error(
        "synthetic scan: the noise-free trace has no positive value on the energy axis, so it "
        "cannot be scaled to noise.peak_counts; the energy axis (energy_eV) must cover the "
        "photoelectron spectrum at W = photon energy - Ip.");
  counts *= peak_ / m;
}

double Background::level(double W) const { return constant_ + exp_ * std::exp(-W / decay_); }

void Background::apply(Eigen::MatrixXd& counts, const std::vector<double>& E,
                       RandomStreams&) const {
  for (Eigen::Index j = 0; j < counts.cols(); ++j)
    counts.col(j).array() += level(E[static_cast<std::size_t>(j)]);
}

void PoissonCounting::apply(Eigen::MatrixXd& counts, const std::vector<double>&,
                            RandomStreams& streams) const {
  auto& g = streams[Stream::kPoisson];
  for (Eigen::Index i = 0; i < counts.rows(); ++i)
    for (Eigen::Index j = 0; j < counts.cols(); ++j) {
      const double lambda = counts(i, j);
      if (!(lambda > 0)) {
        counts(i, j) = 0.0;
        continue;
      }
      std::poisson_distribution<long long> d(lambda);
      counts(i, j) = static_cast<double>(d(g));
    }
}

void ReadoutNoise::apply(Eigen::MatrixXd& counts, const std::vector<double>&,
                         RandomStreams& streams) const {
  auto& g = streams[Stream::kReadout];
  std::normal_distribution<double> d(0.0, rms_);
  for (Eigen::Index i = 0; i < counts.rows(); ++i)
    for (Eigen::Index j = 0; j < counts.cols(); ++j) counts(i, j) += d(g);
}

void DetectorClip::apply(Eigen::MatrixXd& counts, const std::vector<double>&,
                         RandomStreams&) const {
  counts = counts.cwiseMax(0.0);
  if (saturation_ > 0) counts = counts.cwiseMin(saturation_);
}

NoisePipeline make_noise_pipeline(const NoiseConfig& n) {
  NoisePipeline p;
  if (n.resolution == ResolutionKind::kConstant)
    p.push_back(std::make_unique<EnergyResolution>(n.resolution_fwhm_eV, 0.0));
  else if (n.resolution == ResolutionKind::kRelative)
    p.push_back(std::make_unique<EnergyResolution>(0.0, n.resolution_relative));
  p.push_back(std::make_unique<PeakScaling>(n.peak_counts));
  if (n.background_counts > 0 || n.background_exp_counts > 0)
    p.push_back(std::make_unique<Background>(n.background_counts, n.background_exp_counts,
                                             n.background_exp_decay_eV));
  if (n.poisson) p.push_back(std::make_unique<PoissonCounting>());
  if (n.readout_rms_counts > 0) p.push_back(std::make_unique<ReadoutNoise>(n.readout_rms_counts));
  p.push_back(std::make_unique<DetectorClip>(n.saturation_counts));
  return p;
}

void apply_noise(const NoisePipeline& pipeline, Eigen::MatrixXd& counts,
                 const std::vector<double>& energy_eV, RandomStreams& streams) {
  for (const auto& stage : pipeline) stage->apply(counts, energy_eV, streams);
}

}  // namespace sw::synthetic
