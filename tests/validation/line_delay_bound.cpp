#include "line_delay_bound.h"

#include <cmath>
#include <functional>
#include <string>
#include <vector>

#include <Eigen/Dense>

#include "retrieval/core/error.h"
#include "synthetic/generator.h"

namespace sw::validation {

namespace {

// One parameter of the bound: how to move it by `h` in a config, and its step.
struct Parameter {
  std::function<void(synthetic::ScanConfig&, double)> move;
  double step;
};

Eigen::MatrixXd clean_density(const synthetic::ScanConfig& c) {
  return synthetic::generate_scan(c, 1).clean;
}

}  // namespace

DelayBound line_delay_cramer_rao(const synthetic::ScanConfig& config) {
  const synthetic::NoiseConfig& n = config.noise;
  if (config.lines.size() != 2 || config.tof.enabled() ||
      n.resolution != synthetic::ResolutionKind::kNone || n.background_counts > 0 ||
      n.background_exp_counts > 0 || n.delay_jitter_rms_fs > 0 || n.delay_walk_rms_fs > 0 ||
      n.delay_drift_fs_per_row != 0 || n.ir_intensity_rms > 0 || n.cep_jitter_rms_rad > 0)
    throw usage_error(
        "line_delay_cramer_rao: expected a two-line scan without time-of-flight recording, "
        "resolution, background, jitter or drift");
  synthetic::ScanConfig base = config;
  base.noise.poisson = false;
  // The parameters: the delay first, then the nuisances. Steps are small against each
  // parameter's scale and large against the quadrature's ~1e-6 relative accuracy.
  std::vector<Parameter> ps = {
      {[](synthetic::ScanConfig& c, double h) { c.lines[1].delay_as += h; }, 1.0},
      {[](synthetic::ScanConfig& c, double h) { c.ir.pulse.center_fs += h; }, 1e-3},
      {[](synthetic::ScanConfig& c, double h) { c.ir.pulse.peak_intensity_Wcm2 *= 1 + h; }, 1e-3},
      {[](synthetic::ScanConfig& c, double h) { c.ir.pulse.cep_rad += h; }, 5e-3},
      {[](synthetic::ScanConfig& c, double h) { c.ir.pulse.fwhm_fs *= 1 + h; }, 1e-3},
      {[](synthetic::ScanConfig& c, double h) { c.ir.pulse.chirp_rad_per_fs2 += h; }, 1e-3},
      {[](synthetic::ScanConfig& c, double h) { c.lines[1].relative_strength *= 1 + h; }, 1e-3},
  };
  if (base.xuv.kind == synthetic::XuvKind::kGaussian) {
    ps.push_back({[](synthetic::ScanConfig& c, double h) { c.xuv.gaussian.center_eV += h; }, 0.02});
    ps.push_back({[](synthetic::ScanConfig& c, double h) {
                    c.xuv.gaussian.transform_limited_fwhm_as *= 1 + h;
                  },
                  2e-3});
    ps.push_back({[](synthetic::ScanConfig& c, double h) { c.xuv.gaussian.gdd_as2 += h; }, 100.0});
    ps.push_back({[](synthetic::ScanConfig& c, double h) { c.xuv.gaussian.tod_as3 += h; }, 5e3});
  }
  const Eigen::MatrixXd mu0_density = clean_density(base);
  const double scale = n.peak_counts / mu0_density.maxCoeff();
  const Eigen::ArrayXd mu = (mu0_density * scale).reshaped().array();
  // Columns: d mu / d theta per pixel; the last one is the count scale (d mu / d A = mu).
  const int np = static_cast<int>(ps.size());
  Eigen::MatrixXd d(mu.size(), np + 1);
  for (int k = 0; k < np; ++k) {
    synthetic::ScanConfig up = base, down = base;
    ps[k].move(up, ps[k].step);
    ps[k].move(down, -ps[k].step);
    d.col(k) = ((clean_density(up) - clean_density(down)) * (scale / (2 * ps[k].step))).reshaped();
  }
  d.col(np) = mu.matrix();
  // Pixels without expected counts carry no information (their derivatives vanish with mu).
  const Eigen::ArrayXd w = (mu > 1e-9 * n.peak_counts).select(1.0 / mu.max(1e-300), 0.0);
  const Eigen::MatrixXd fisher = d.transpose() * w.matrix().asDiagonal() * d;
  DelayBound b;
  b.delay_only_as = 1.0 / std::sqrt(fisher(0, 0));
  const Eigen::MatrixXd cov = fisher.ldlt().solve(Eigen::MatrixXd::Identity(np + 1, np + 1));
  b.with_nuisances_as = std::sqrt(cov(0, 0));
  b.nuisances = np;  // the np - 1 moved parameters besides the delay, and the count scale
  if (!std::isfinite(b.delay_only_as) || !std::isfinite(b.with_nuisances_as) || cov(0, 0) <= 0)
    throw numeric_error("line_delay_cramer_rao: the Fisher information is singular");
  return b;
}

}  // namespace sw::validation
