#include "retrieval/analysis/uncertainty.h"

namespace sw {

const char* to_string(UncertaintyMethod m) {
  switch (m) {
    case UncertaintyMethod::kFull:
      return "full";
    case UncertaintyMethod::kWarm:
      return "warm";
  }
  return "full";
}

bool parse_uncertainty_method(const std::string& s, UncertaintyMethod* m) {
  if (s == "full")
    *m = UncertaintyMethod::kFull;
  else if (s == "warm")
    *m = UncertaintyMethod::kWarm;
  else
    return false;
  return true;
}

}  // namespace sw
