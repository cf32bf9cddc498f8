// The built-in reconstruction engines, one line each (DESIGN.md "Engines": adding an engine is
// one file and one registration line here). Explicit registration, so that linking the static
// library never drops an engine.
#include "retrieval/engines/engine.h"
#include "retrieval/engines/full_model_engine.h"
#include "retrieval/engines/projections_engine.h"
#include "retrieval/engines/ptychographic_engine.h"
// New engines: include their factory header above and add one line below.

namespace sw::detail {

std::vector<std::pair<std::string, EngineFactory>> builtin_engines() {
  return {
      {"ptychographic", make_ptychographic_engine},
      {"projections", make_projections_engine},
      {"full-model", make_full_model_engine},
  };
}

}  // namespace sw::detail
