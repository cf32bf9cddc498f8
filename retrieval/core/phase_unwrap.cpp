#include "retrieval/core/phase_unwrap.h"

#include <cmath>

#include "retrieval/core/units.h"

namespace sw {

double wrapped_phase_step(double step_rad) {
  if (std::abs(step_rad) < units::kPi) return step_rad;
  // numpy.mod is a floored modulo (result with the divisor's sign).
  double m = std::fmod(step_rad + units::kPi, units::kTwoPi);
  if (m < 0) m += units::kTwoPi;
  m -= units::kPi;
  if (m == -units::kPi && step_rad > 0) m = units::kPi;
  return m;
}

double unwrap_next(double previous_rad, double raw_rad) {
  return previous_rad + wrapped_phase_step(raw_rad - previous_rad);
}

std::vector<double> unwrap_phase(const std::vector<double>& phases_rad) {
  std::vector<double> out(phases_rad);
  double correction = 0.0;
  for (std::size_t k = 1; k < out.size(); ++k) {
    const double step = phases_rad[k] - phases_rad[k - 1];
    correction += wrapped_phase_step(step) - step;
    out[k] = phases_rad[k] + correction;
  }
  return out;
}

}  // namespace sw
