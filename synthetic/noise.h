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
//                        exp(-(W - onset) / background_exp_decay_eV) [W >= onset, else 0]
//                        expected counts to every bin (onset = background_exp_onset_eV).
//                        With time-of-flight recording, ColumnBackground adds a given level
//                        per column instead (constant per time bin + the moved tail).
//   4. PoissonCounting   replaces every expected count by a Poisson draw (counting statistics).
//   5. ReadoutNoise      adds N(0, readout_rms_counts) to every bin.
//   5b. HotPixels        sets the drawn pixels to factor x max(1, mean of their 8 neighbours).
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
  Background(double constant_counts, double exp_counts, double exp_decay_eV,
             double exp_onset_eV = 0.0)
      : constant_(constant_counts), exp_(exp_counts), decay_(exp_decay_eV), onset_(exp_onset_eV) {}
  std::string name() const override { return "background"; }
  /// Expected background counts per bin at kinetic energy W (eV).
  double level(double W_eV) const;
  void apply(Eigen::MatrixXd& counts, const std::vector<double>& energy_eV,
             RandomStreams& streams) const override;

 private:
  double constant_, exp_, decay_, onset_;
};

/// Adds a fixed expected level to every bin of each column (the same in every row).
class ColumnBackground : public NoiseStage {
 public:
  explicit ColumnBackground(std::vector<double> per_column) : level_(std::move(per_column)) {}
  std::string name() const override { return "background"; }
  void apply(Eigen::MatrixXd& counts, const std::vector<double>& energy_eV,
             RandomStreams& streams) const override;

 private:
  std::vector<double> level_;
};

/// One hot pixel: position and factor over its neighbours' mean counts.
struct HotPixel {
  Eigen::Index row = 0, col = 0;
  double factor = 1.0;
};

/// Draws `noise.hot_pixels` isolated positions (no two within one 3 x 3 neighbourhood) in a
/// rows x cols image and their factors, from the kHotPixels sub-stream. Throws sw::Error
/// (kUsage) when the image cannot hold that many isolated pixels.
std::vector<HotPixel> draw_hot_pixels(const NoiseConfig& noise, Eigen::Index rows,
                                      Eigen::Index cols, RandomStreams& streams);

class HotPixels : public NoiseStage {
 public:
  explicit HotPixels(std::vector<HotPixel> pixels) : pixels_(std::move(pixels)) {}
  std::string name() const override { return "hot_pixels"; }
  /// Each pixel becomes factor x max(1, mean of its (up to 8) neighbours' current counts).
  void apply(Eigen::MatrixXd& counts, const std::vector<double>& energy_eV,
             RandomStreams& streams) const override;

 private:
  std::vector<HotPixel> pixels_;
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
/// always present); `hot` are the drawn hot pixels (draw_hot_pixels), none when empty.
NoisePipeline make_noise_pipeline(const NoiseConfig& noise, const std::vector<HotPixel>& hot = {});

/// The stages after the energy resolution for a scan recorded on flight-time bins: peak scaling,
/// ColumnBackground(background_per_column) when any level is > 0, Poisson, readout, hot pixels,
/// clip.
NoisePipeline make_time_bin_pipeline(const NoiseConfig& noise,
                                     std::vector<double> background_per_column,
                                     const std::vector<HotPixel>& hot = {});

/// Runs the pipeline on `counts`.
void apply_noise(const NoisePipeline& pipeline, Eigen::MatrixXd& counts,
                 const std::vector<double>& energy_eV, RandomStreams& streams);

}  // namespace sw::synthetic
