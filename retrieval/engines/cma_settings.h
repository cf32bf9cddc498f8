#pragma once
// The settings shared by the CMA engines (ptychographic, projections): how the field-free
// spectrum and the data projection are used, the smooth-gate projection and the momentum nodes
// (their meaning: retrieval/engines/cma_problem.h). A header of its own that depends only on
// option_spec.h, so that retrieval/engines/engine_options.h can carry the engines' settings typed.

#include <string>

#include "retrieval/core/option_spec.h"

namespace sw {

/// How the field-free spectrum is used every spectrum_interval iterations: kAmplitude imposes
/// |eps~| (and aligns the centroid), kCentroid only aligns the centroid (the frequency-shift
/// ambiguity), kOff ignores it.
enum class CmaSpectrum { kAmplitude, kCentroid, kOff };
const char* to_string(CmaSpectrum s);
bool parse_option(const std::string& s, CmaSpectrum* out);
/// The data projection (retrieval/engines/cma_problem.h): kPoisson (intensity-unbiased) or
/// kAmplitude (modulus replacement).
enum class CmaProjection { kPoisson, kAmplitude };
const char* to_string(CmaProjection p);
bool parse_option(const std::string& s, CmaProjection* out);

/// The most momentum nodes a CmaProblem makes (the ptychographic engine's momentum_bands
/// accepts 0 to this; a larger count set directly on CmaSettings is clamped to it).
inline constexpr int kMaxMomentumBands = 16;

/// Settings shared by the CMA engines (EngineOptions::settings carries them typed, inside each
/// engine's own settings); describe() is the one description of their names, defaults, limits and
/// help (retrieval/core/option_spec.h).
struct CmaSettings {
  using Spectrum = CmaSpectrum;
  Spectrum spectrum = Spectrum::kAmplitude;
  int spectrum_interval = 1;  ///< use the field-free spectrum every n iterations (0 = never)
  int gate_smoothing_interval =
      4;  ///< smooth the gate phase every n iterations (0 = at the end only)
  double gate_knots_per_period = 32;  ///< B-spline knots per IR period for the smooth gate phase
  double unmeasured_damping = 1.0;    ///< exit-wave factor on unmeasured FFT bins (1 free, 0 zero)
  /// The Poisson (intensity-unbiased) projection or the amplitude one (cma_problem.h); the
  /// engines' defaults differ (PtychographicSettings, ProjectionsSettings).
  CmaProjection projection = CmaProjection::kAmplitude;
  double noise_tolerance = 0.0;  ///< half-width of the modulus band in standard deviations
  /// Number of momentum nodes of the gate (see MomentumBand): 1 = the one-p0 CMA, 0 = auto
  /// (auto_momentum_bands). Only the ptychographic engine offers more than one (described
  /// there, PtychographicSettings, with its default 0).
  int momentum_bands = 1;

  template <class Self, class V>
  static void describe(Self& self, V& v) {
    v(
        OptionSpec{
            .name = "spectrum_constraint",
            .help =
                "use of the field-free spectrum: amplitude (impose |E_X| and align the centroid), "
                "centroid (align only), off",
            .choices = "amplitude|centroid|off"},
        self.spectrum);
    v(OptionSpec{.name = "spectrum_interval",
                 .help = "apply the field-free-spectrum constraint (spectrum_constraint) every n "
                         "iterations (0 = "
                         "never)",
                 .min = 0,
                 .max = 1e6},
      self.spectrum_interval);
    v(OptionSpec{.name = "gate_smoothing_interval",
                 .help = "project the gate phase onto a cubic B-spline every n iterations (0 = at "
                         "the end only)",
                 .min = 0,
                 .max = 1e6},
      self.gate_smoothing_interval);
    v(OptionSpec{.name = "gate_knots_per_period",
                 .help = "B-spline knots per IR period of the smooth gate phase",
                 .min = 8,
                 .max = 1e4},
      self.gate_knots_per_period);
    v(
        OptionSpec{
            .name = "unmeasured_damping",
            .help =
                "exit-wave spectrum factor on FFT bins outside the energy window (1 free, 0 zero)",
            .min = 0,
            .max = 1},
        self.unmeasured_damping);
    v(
        OptionSpec{
            .name = "projection",
            .help =
                "data projection of the exit waves: poisson (step (|psi| + I/|psi|)/2, unbiased in "
                "intensity at low counts) or amplitude (|psi| <- sqrt(I))",
            .choices = "poisson|amplitude"},
        self.projection);
    v(OptionSpec{.name = "noise_tolerance",
                 .help = "half-width of the accepted modulus band, in standard deviations of "
                         "sqrt(I) (0 = exact "
                         "modulus replacement)",
                 .min = 0,
                 .max = 10},
      self.noise_tolerance);
  }
  std::string validate() const { return validate_described(*this); }  ///< names field and rule
};

}  // namespace sw
