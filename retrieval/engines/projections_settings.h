#pragma once
// The projections engine's settings (the engine: retrieval/engines/projections_engine.h), in a
// header of their own that depends only on option_spec.h and the CMA settings, so that
// retrieval/engines/engine_options.h can carry them typed.

#include <string>

#include "retrieval/core/option_spec.h"
#include "retrieval/engines/cma_settings.h"

namespace sw {

/// The engine's typed settings (EngineOptions::settings.projections; their text form is read
/// through describe(), retrieval/engines/engine_options.h).
struct ProjectionsSettings {
  std::string mode = "auto";  ///< auto (pcgpa on a matched delay grid, else lsgpa) | pcgpa | lsgpa
  double gate_relaxation = 1.8;  ///< over-relaxation omega of the gate update
  /// The CMA settings, with this engine's default data projection (amplitude: generalized
  /// projections need a true projection).
  CmaSettings cma{.projection = CmaProjection::kAmplitude};

  template <class Self, class V>
  static void describe(Self& self, V& v) {
    v(OptionSpec{.name = "mode",
                 .help = "auto (pcgpa on a matched delay grid, else lsgpa), pcgpa or lsgpa",
                 .choices = "auto|pcgpa|lsgpa"},
      self.mode);
    v(OptionSpec{.name = "gate_relaxation",
                 .help =
                     "over-relaxation omega of the gate update G <- G + omega (G_projected - G)",
                 .min = 0.1,
                 .max = 2},
      self.gate_relaxation);
    CmaSettings::describe(self.cma, v);
  }
  std::string validate() const { return validate_described(*this); }  ///< names field and rule
};

}  // namespace sw
