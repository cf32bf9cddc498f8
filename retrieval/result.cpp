#include "retrieval/result.h"

namespace sw {

const char* to_string(PulseClass c) {
  switch (c) {
    case PulseClass::kIsolated: return "isolated";
    case PulseClass::kIsolatedWithSatellites: return "isolated_with_satellites";
    case PulseClass::kTrain: return "train";
    default: return "undetermined";
  }
}

bool parse_pulse_class(const std::string& s, PulseClass* out) {
  if (s == "isolated") *out = PulseClass::kIsolated;
  else if (s == "isolated_with_satellites") *out = PulseClass::kIsolatedWithSatellites;
  else if (s == "train") *out = PulseClass::kTrain;
  else if (s == "undetermined") *out = PulseClass::kUndetermined;
  else return false;
  return true;
}

}  // namespace sw
