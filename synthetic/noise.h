#pragma once
// Detector noise models as small strategy objects, applied to a scan (rows = delays, columns =
// energies) in the order of make_noise_pipeline():
//
//   1. EnergyResolution  Gaussian spectrometer response along energy. Source bin j (centre W_j)
//                        spreads its content over the bins j' with weights proportional to the
//                        Gaussian of FWHM dE(W_j) integrated over bin j' (edges halfway between
//                        centres), normalised over the bins of the axis: the total counts of a row
//                        are conserved exactly (content that would leave the axis is kept in
//                        it). dE = resolution_fwhm_eV (constant) or resolution_relative * W_j.
//   2. PeakScaling       multiplies by peak_counts / max: the largest element becomes
//                        peak_counts (expected counts before background and noise).
//   3. Background        adds B(W) = background_counts + background_exp_counts *
//                        exp(-W / background_exp_decay_eV) expected counts to every bin.
//   4. PoissonCounting   replaces every expected count by a Poisson draw (counting statistics).
//   5. ReadoutNoise      adds N(0, readout_rms_counts) to every bin.
//   6. DetectorClip      clips at saturation_counts (when > 0) and at 0 from below (a detector
//                        image holds no negative counts; readout noise can produce them).
// Random stages draw from their own sub-streams (synthetic/random_streams.h) row by row,
// energies ascending, on one thread.

#include <memory>
#include <string>
#include <vector>

#include <Eigen/Core>

#include "synthetic/random_streams.h"
#include "synthetic/scan_config.h"

namespace sw::synthetic {

class NoiseStage {
 public:
  virtual ~NoiseStage() = default;
  /// Short lower-case name, e.g. "poisson".
  virtual std::string name() const = 0;
  /// Transforms `counts` in place; energy_eV are the column centres (ascending).
  virtual void apply(Eigen::MatrixXd& counts, const std::vector<double>& energy_eV,
                     RandomStreams& streams) const = 0;
};

class EnergyResolution : public NoiseStage {
 public:
  /// FWHM (eV) = constant_fwhm_eV + relative * W.
  EnergyResolution(double constant_fwhm_eV, double relative);
  std::string name() const override { return "energy_resolution"; }
  void apply(Eigen::MatrixXd& counts, const std::vector<double>& energy_eV,
             RandomStreams& streams) const override;

 private:
  double constant_fwhm_eV_, relative_;
};

class PeakScaling : public NoiseStage {
 public:
  explicit PeakScaling(double peak_counts) : peak_(peak_counts) {}
  std::string name() const override { return "peak_scaling"; }
  /// Throws sw::Error (kInput) when the trace has no positive element.
  void apply(Eigen::MatrixXd& counts, const std::vector<double>& energy_eV,
             RandomStreams& streams) const override;

 private:
  double peak_;
};

class Background : public NoiseStage {
 public:
  Background(double constant_counts, double exp_counts, double exp_decay_eV)
      : constant_(constant_counts), exp_(exp_counts), decay_(exp_decay_eV) {}
  std::string name() const override { return "background"; }
  /// Expected background counts per bin at kinetic energy W (eV).
  double level(double W_eV) const;
  void apply(Eigen::MatrixXd& counts, const std::vector<double>& energy_eV,
             RandomStreams& streams) const override;

 private:
  double constant_, exp_, decay_;
};

class PoissonCounting : public NoiseStage {
 public:
  std::string name() const override { return "poisson"; }
  void apply(Eigen::MatrixXd& counts, const std::vector<double>& energy_eV,
             RandomStreams& streams) const override;
};

class ReadoutNoise : public NoiseStage {
 public:
  explicit ReadoutNoise(double rms_counts) : rms_(rms_counts) {}
  std::string name() const override { return "readout"; }
  void apply(Eigen::MatrixXd& counts, const std::vector<double>& energy_eV,
             RandomStreams& streams) const override;

 private:
  double rms_;
};

class DetectorClip : public NoiseStage {
 public:
  /// saturation_counts <= 0: no upper clip.
  explicit DetectorClip(double saturation_counts) : saturation_(saturation_counts) {}
  std::string name() const override { return "clip"; }
  void apply(Eigen::MatrixXd& counts, const std::vector<double>& energy_eV,
             RandomStreams& streams) const override;

 private:
  double saturation_;
};

using NoisePipeline = std::vector<std::unique_ptr<NoiseStage>>;

/// The enabled stages of `noise`, in the documented order (peak scaling and the final clip are
/// always present).
NoisePipeline make_noise_pipeline(const NoiseConfig& noise);

/// Runs the pipeline on `counts`.
void apply_noise(const NoisePipeline& pipeline, Eigen::MatrixXd& counts,
                 const std::vector<double>& energy_eV, RandomStreams& streams);

}  // namespace sw::synthetic
