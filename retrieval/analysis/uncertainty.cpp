#include "retrieval/analysis/uncertainty.h"

#include "retrieval/core/enum_names.h"

namespace sw {

namespace {

constexpr EnumNames<UncertaintyMethod, 3> kUncertaintyMethodNames{
    {{{UncertaintyMethod::kFull, "full"},
      {UncertaintyMethod::kWarm, "warm"},
      {UncertaintyMethod::kLaplace, "laplace"}}}};

}  // namespace

SW_ENUM_NAME_FUNCTIONS(UncertaintyMethod, parse_uncertainty_method, kUncertaintyMethodNames)

}  // namespace sw
