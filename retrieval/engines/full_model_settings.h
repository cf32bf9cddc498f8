#pragma once
// The full-model engine's settings (the engine and the meaning of each setting:
// retrieval/engines/full_model_engine.h), in a header of their own that depends only on
// option_spec.h, so that retrieval/engines/engine_options.h can carry them typed.

#include <string>

#include "retrieval/core/option_spec.h"

namespace sw {

/// The engine's settings (EngineOptions::settings.full_model). Each field is described once, in
/// describe() (bounds, unit, help): validate(), the text form (apply_engine_option_text) and the
/// settings listing (engine_options_help, retrieval/engines/engine_options.h) walk that
/// description.
struct FullModelSettings {
  std::string ir = "auto";            ///< auto | parametric | spline
  int lbfgs_per_iteration = 10;       ///< L-BFGS iterations per engine iteration
  int lbfgs_memory = 20;              ///< L-BFGS rank (pairs of past steps kept)
  double knots_per_period = 6.0;      ///< spline knot spacing = T_IR / knots_per_period
  double ir_samples_per_period = 64;  ///< IR sample step <= T_IR / value
  int chebyshev_nodes = 10;           ///< ForwardModelOptions::chebyshev_nodes
  double block_phase_rad = 2.0;       ///< ForwardModelOptions::max_block_phase_rad
  std::string node_plan = "fewest";   ///< fewest | fixed (ForwardModelOptions::fewest_nodes)
  double variance_floor = 1e-4;       ///< weight floor = value x max variance
  double support_threshold = 1e-5;    ///< field-free spectrum fraction that frees an XUV bin
  double support_margin_eV = 1.0;     ///< widening of the XUV support on each side
  double spectrum_weight = 0.01;      ///< used with spectrum_constraint = amplitude
  std::string spectrum_constraint = "centroid";  ///< centroid | amplitude | off
  double ir_lowpass_weight = 100.0;              ///< weight of the IR low-frequency penalty
  int variance_smoothing_bins = 2;               ///< half-width of the variance average (bins)
  int line_polish_sweeps = 2;  ///< joint lines: golden-section sweeps over delays and strengths
  int line_polish_rounds = 4;  ///< joint lines: at most this many polishes, L-BFGS between them

  /// The one description (retrieval/core/option_spec.h). The text form is checked against the
  /// closed ends of these bounds, validate() against the exact rules (the upper end of
  /// support_threshold is open: at 1 no bin would be free).
  template <class Self, class V>
  static void describe(Self& self, V& v) {
    v(
        OptionSpec{
            .name = "ir",
            .help =
                "IR form: parametric (Gaussian pulse, 6 parameters), spline (cubic B-spline), auto "
                "(spline with a warm start, else parametric)",
            .choices = "auto|parametric|spline"},
        self.ir);
    v(OptionSpec{.name = "lbfgs_per_iteration",
                 .help = "L-BFGS iterations per engine iteration",
                 .min = 1,
                 .max = 1e5},
      self.lbfgs_per_iteration);
    v(
        OptionSpec{
            .name = "lbfgs_memory", .help = "L-BFGS rank (past steps kept)", .min = 1, .max = 1000},
        self.lbfgs_memory);
    v(OptionSpec{.name = "knots_per_period",
                 .help = "spline IR: knots per IR period (knot spacing T / value)",
                 .min = 1e-3,
                 .max = 1e3},
      self.knots_per_period);
    v(OptionSpec{.name = "ir_samples_per_period",
                 .help = "samples per IR period of the fitted vector potential",
                 .min = 8,
                 .max = 1e4},
      self.ir_samples_per_period);
    v(OptionSpec{.name = "chebyshev_nodes",
                 .help = "full model: Chebyshev nodes per momentum block",
                 .min = 2,
                 .max = 64},
      self.chebyshev_nodes);
    v(OptionSpec{.name = "block_phase_rad",
                 .unit = "rad",
                 .help = "full model: largest phase excursion (p - p_mid)(I1 - I1_mid) per block",
                 .min = 1e-3,
                 .max = 50},
      self.block_phase_rad);
    v(OptionSpec{.name = "node_plan",
                 .help = "full model: momentum blocks with the fewest nodes in all whose "
                         "interpolation bound is that of chebyshev_nodes over block_phase_rad "
                         "(fewest), or blocks of block_phase_rad with chebyshev_nodes each (fixed)",
                 .choices = "fewest|fixed"},
      self.node_plan);
    v(OptionSpec{.name = "variance_floor",
                 .help = "least-squares weights 1/max(variance, value x largest variance)",
                 .min = 0,
                 .max = 1},
      self.variance_floor);
    v(
        OptionSpec{
            .name = "support_threshold",
            .help =
                "XUV bins free where the field-free spectrum exceeds value x its maximum (0 = all)",
            .min = 0,
            .max = 1,
            .max_open = true},
        self.support_threshold);
    v(OptionSpec{.name = "support_margin_eV",
                 .unit = "eV",
                 .help = "widening of the XUV spectral support on each side",
                 .min = 0,
                 .max = 1e4},
      self.support_margin_eV);
    v(OptionSpec{.name = "spectrum_weight",
                 .help = "weight of the field-free-spectrum term relative to the trace (0 = off)",
                 .min = 0,
                 .max = 1e6},
      self.spectrum_weight);
    v(OptionSpec{.name = "spectrum_constraint",
                 .help = "use of the field-free spectrum: centroid (carrier, support and initial "
                         "guess only), "
                         "amplitude (also a least-squares term of weight spectrum_weight), off (as "
                         "centroid)",
                 .choices = "amplitude|centroid|off"},
      self.spectrum_constraint);
    v(OptionSpec{.name = "ir_lowpass_weight",
                 .help = "weight of the penalty on the IR's content below ~omega/4 (Gaussian low "
                         "pass, sigma = "
                         "one IR period); 0 = off",
                 .min = 0,
                 .max = 1e6},
      self.ir_lowpass_weight);
    v(
        OptionSpec{
            .name = "variance_smoothing_bins",
            .help =
                "weights from variances averaged over +-n energy bins and +-1 delay (0 = per bin)",
            .min = 0,
            .max = 100},
        self.variance_smoothing_bins);
    v(OptionSpec{.name = "line_polish_sweeps",
                 .help = "joint lines: after L-BFGS, sweeps of golden-section minimisations of the "
                         "cost over each line's delay (+-30 as) and strength (x e^+-0.5) with the "
                         "pulse and field held (0 = off)",
                 .min = 0,
                 .max = 20},
      self.line_polish_sweeps);
    v(OptionSpec{.name = "line_polish_rounds",
                 .help = "joint lines: at most this many polishes, each after 3 engine "
                         "iterations' worth of L-BFGS, until no delay moves by more than 0.05 of "
                         "its curvature sigma",
                 .min = 1,
                 .max = 20},
      self.line_polish_rounds);
  }
  /// "" when valid; else names field, value and rule (validate_described).
  std::string validate() const { return validate_described(*this); }
};

}  // namespace sw
