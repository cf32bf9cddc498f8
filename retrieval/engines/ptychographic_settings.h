#pragma once
// The ptychographic engine's settings (the engine: retrieval/engines/ptychographic_engine.h), in a
// header of their own that depends only on option_spec.h and the CMA settings, so that
// retrieval/engines/engine_options.h can carry them typed.

#include <string>

#include "retrieval/core/option_spec.h"
#include "retrieval/engines/cma_settings.h"

namespace sw {

/// The engine's typed settings (EngineOptions::settings.ptychographic; their text form is read
/// through describe(), retrieval/engines/engine_options.h).
struct PtychographicSettings {
  double beta_object = 0.1;  ///< ePIE step size of the XUV (object) update
  double beta_gate = 1.5;    ///< ePIE step size of the gate (probe) update
  /// The CMA settings, with this engine's default data projection (Poisson) and momentum nodes
  /// (cma.momentum_bands = 0: auto; the only CMA engine that describes them).
  CmaSettings cma{.projection = CmaProjection::kPoisson, .momentum_bands = 0};

  template <class Self, class V>
  static void describe(Self& self, V& v) {
    v(OptionSpec{.name = "beta_object",
                 .help = "ePIE step size of the XUV (object) update",
                 .min = 1e-6,
                 .max = 2},
      self.beta_object);
    v(OptionSpec{.name = "beta_gate",
                 .help = "ePIE step size of the gate (probe) update",
                 .min = 0,
                 .max = 2},
      self.beta_gate);
    v(
        OptionSpec{
            .name = "momentum_bands",
            .help =
                "momentum nodes of the banded CMA, each a gate with its own central momentum, rows "
                "interpolated between them (cma_problem.h): 1 = one p0, 0 = auto (node spacing <= "
                "0.15 "
                "p0, 2 to 8 nodes; used only when the one-p0 fit stalls above 1.1 x the noise "
                "floor)",
            .min = 0,
            .max = 16},
        self.cma.momentum_bands);
    CmaSettings::describe(self.cma, v);
  }
  std::string validate() const { return validate_described(*this); }  ///< names field and rule
};

}  // namespace sw
