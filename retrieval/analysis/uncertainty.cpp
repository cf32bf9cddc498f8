#include "retrieval/analysis/uncertainty.h"

#include <cmath>
#include <limits>

#include "retrieval/core/enum_names.h"

namespace sw {

namespace {

constexpr EnumNames<UncertaintyMethod, 3> kUncertaintyMethodNames{
    {{{UncertaintyMethod::kFull, "full"},
      {UncertaintyMethod::kWarm, "warm"},
      {UncertaintyMethod::kLaplace, "laplace"}}}};

}  // namespace

SW_ENUM_NAME_FUNCTIONS(UncertaintyMethod, parse_uncertainty_method, kUncertaintyMethodNames)

double chi_square_quantile_99(int dof) {
  constexpr double z99 = 2.3263478740408408;  // the normal 99 % quantile (scipy.stats.norm.ppf)
  const double k = dof < 1 ? 1.0 : static_cast<double>(dof);
  const double c = 2.0 / (9.0 * k);
  return k * std::pow(1.0 - c + z99 * std::sqrt(c), 3);
}

SigmaCheck check_sigma(double estimate, double sigma, const std::vector<double>& replicas) {
  SigmaCheck c;
  if (replicas.empty()) return c;
  c.limit = chi_square_quantile_99(static_cast<int>(replicas.size()));
  for (const double x : replicas) {
    const double d = x - estimate;
    if (!std::isfinite(d)) {
      c.chi2 = std::numeric_limits<double>::infinity();
      break;
    }
    if (d == 0.0) continue;
    c.chi2 += sigma > 0 && std::isfinite(sigma) ? (d / sigma) * (d / sigma)
                                                : std::numeric_limits<double>::infinity();
  }
  c.pass = c.chi2 <= c.limit;
  return c;
}

}  // namespace sw
