#pragma once
// Golden-section search for the minimum of a unimodal function on an interval (J. Kiefer,
// Proc. AMS 4, 502 (1953); W. H. Press et al., Numerical Recipes, 3rd ed., sec. 10.2).

#include <cmath>

namespace sw {

/// The midpoint of the bracket [a, b] after `iterations` golden-section reductions of f's
/// minimum (each shrinks the bracket by 0.618).
template <class F>
double golden_section_min(F f, double a, double b, int iterations) {
  const double r = 0.5 * (std::sqrt(5.0) - 1.0);
  double c = b - r * (b - a), d = a + r * (b - a);
  double fc = f(c), fd = f(d);
  for (int k = 0; k < iterations; ++k) {
    if (fc < fd) {
      b = d;
      d = c;
      fd = fc;
      c = b - r * (b - a);
      fc = f(c);
    } else {
      a = c;
      c = d;
      fc = fd;
      d = a + r * (b - a);
      fd = f(d);
    }
  }
  return 0.5 * (a + b);
}

}  // namespace sw
