#include "synthetic/noise.h"

#include <algorithm>
#include <cmath>
#include <random>
#include <sstream>

#include "retrieval/core/error.h"
#include "retrieval/core/units.h"

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

double Background::level(double W) const {
  return constant_ + (W >= onset_ ? exp_ * std::exp(-(W - onset_) / decay_) : 0.0);
}

void ColumnBackground::apply(Eigen::MatrixXd& counts, const std::vector<double>&,
                             RandomStreams&) const {
  for (Eigen::Index j = 0; j < counts.cols(); ++j)
    counts.col(j).array() += level_[static_cast<std::size_t>(j)];
}

std::vector<HotPixel> draw_hot_pixels(const NoiseConfig& n, Eigen::Index rows, Eigen::Index cols,
                                      RandomStreams& streams) {
  std::vector<HotPixel> out;
  if (n.hot_pixels <= 0) return out;
  // At most one pixel per 3 x 3 block keeps the rejection sampling short.
  if (static_cast<double>(n.hot_pixels) > 0.1 * static_cast<double>(rows * cols) / 9.0)
    throw usage_error("noise.hot_pixels = " + std::to_string(n.hot_pixels) + " is too many for a " +
                      std::to_string(rows) + " x " + std::to_string(cols) +
                      " scan: at most 1 per 90 pixels");
  auto& g = streams[Stream::kHotPixels];
  std::uniform_int_distribution<Eigen::Index> r(0, rows - 1), c(0, cols - 1);
  std::uniform_real_distribution<double> f(n.hot_pixel_factor_min, n.hot_pixel_factor_max);
  while (static_cast<int>(out.size()) < n.hot_pixels) {
    HotPixel p{r(g), c(g), 0.0};
    bool isolated = true;
    for (const HotPixel& q : out)
      if (std::abs(q.row - p.row) <= 1 && std::abs(q.col - p.col) <= 1) isolated = false;
    p.factor = f(g);
    if (isolated) out.push_back(p);
  }
  return out;
}

void HotPixels::apply(Eigen::MatrixXd& counts, const std::vector<double>&, RandomStreams&) const {
  const Eigen::MatrixXd before = counts;
  for (const HotPixel& p : pixels_) {
    double sum = 0;
    int k = 0;
    for (Eigen::Index a = p.row - 1; a <= p.row + 1; ++a)
      for (Eigen::Index b = p.col - 1; b <= p.col + 1; ++b) {
        if ((a == p.row && b == p.col) || a < 0 || b < 0 || a >= counts.rows() ||
            b >= counts.cols())
          continue;
        sum += before(a, b);
        ++k;
      }
    counts(p.row, p.col) = std::round(p.factor * std::max(1.0, k > 0 ? sum / k : 0.0));
  }
}

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

namespace {

void add_counting_stages(NoisePipeline& p, const NoiseConfig& n, const std::vector<HotPixel>& hot) {
  if (n.poisson) p.push_back(std::make_unique<PoissonCounting>());
  if (n.readout_rms_counts > 0) p.push_back(std::make_unique<ReadoutNoise>(n.readout_rms_counts));
  if (!hot.empty()) p.push_back(std::make_unique<HotPixels>(hot));
  p.push_back(std::make_unique<DetectorClip>(n.saturation_counts));
}

}  // namespace

NoisePipeline make_noise_pipeline(const NoiseConfig& n, const std::vector<HotPixel>& hot) {
  NoisePipeline p;
  if (n.resolution == ResolutionKind::kConstant)
    p.push_back(std::make_unique<EnergyResolution>(n.resolution_fwhm_eV, 0.0));
  else if (n.resolution == ResolutionKind::kRelative)
    p.push_back(std::make_unique<EnergyResolution>(0.0, n.resolution_relative));
  p.push_back(std::make_unique<PeakScaling>(n.peak_counts));
  if (n.background_counts > 0 || n.background_exp_counts > 0)
    p.push_back(std::make_unique<Background>(n.background_counts, n.background_exp_counts,
                                             n.background_exp_decay_eV, n.background_exp_onset_eV));
  add_counting_stages(p, n, hot);
  return p;
}

NoisePipeline make_time_bin_pipeline(const NoiseConfig& n, std::vector<double> level,
                                     const std::vector<HotPixel>& hot) {
  NoisePipeline p;
  p.push_back(std::make_unique<PeakScaling>(n.peak_counts));
  if (std::any_of(level.begin(), level.end(), [](double v) { return v > 0; }))
    p.push_back(std::make_unique<ColumnBackground>(std::move(level)));
  add_counting_stages(p, n, hot);
  return p;
}

void apply_noise(const NoisePipeline& pipeline, Eigen::MatrixXd& counts,
                 const std::vector<double>& energy_eV, RandomStreams& streams) {
  for (const auto& stage : pipeline) stage->apply(counts, energy_eV, streams);
}

}  // namespace sw::synthetic
