// retrieval/core/phase_unwrap.h against numpy.unwrap.
#include "retrieval/core/phase_unwrap.h"

#include <catch2/catch.hpp>

#include <cmath>
#include <random>
#include <vector>

#include "retrieval/core/units.h"

using sw::units::kPi;

TEST_CASE("unwrap_phase gives numpy.unwrap's output", "[phase_unwrap]") {
  // Expected values: numpy 1.24.2, numpy.unwrap(p) with its defaults (period 2 pi, discont pi),
  // printed with repr() and pasted here; the inputs include steps of exactly +-pi and of several
  // periods.
  struct Case {
    std::vector<double> in, numpy;
  };
  const std::vector<Case> cases = {
      {{3.0, -3.0, -2.5, 3.1}, {3.0, 3.2831853071795862, 3.7831853071795862, 3.1}},
      {{0.0, kPi, 0.0, -kPi, 0.0}, {0.0, 3.141592653589793, 0.0, -3.141592653589793, 0.0}},
      {{0.0, 7.0, -7.0, 20.0, -1.0},
       {0.0, 0.7168146928204138, -0.7168146928204138, 1.1504440784612413, -1.0}},
      {{1.0, 1.0 + kPi, 1.0 + 2 * kPi + 1e-9, -10.0},
       {1.0, 4.141592653589793, 1.000000001, 2.5663706143591725}},
      {{0.5, 0.5 + 3 * kPi, 0.5 - 3 * kPi}, {0.5, 3.641592653589793, 3.641592653589793}},
  };
  for (const Case& c : cases) {
    const std::vector<double> u = sw::unwrap_phase(c.in);
    REQUIRE(u.size() == c.numpy.size());
    for (std::size_t k = 0; k < u.size(); ++k) CHECK(u[k] == Approx(c.numpy[k]).margin(1e-12));
  }
  CHECK(sw::unwrap_phase({}).empty());
}

TEST_CASE("unwrap_next follows the same branches as unwrap_phase", "[phase_unwrap]") {
  // A smooth phase (quadratic, 40 rad over the record) wrapped into (-pi, pi] and unwrapped back:
  // both forms recover it up to the constant 2 pi m of the first sample (common practice: a
  // phase sampled finer than pi per step is recovered exactly by unwrapping).
  std::mt19937 rng(3);
  std::normal_distribution<double> noise(0.0, 0.05);
  std::vector<double> truth(200), wrapped(200);
  for (std::size_t k = 0; k < truth.size(); ++k) {
    const double x = static_cast<double>(k) / 199.0;
    truth[k] = 40.0 * x * x - 3.0 * x + noise(rng);
    wrapped[k] = std::remainder(truth[k], 2 * kPi);
  }
  const std::vector<double> u = sw::unwrap_phase(wrapped);
  double chain = wrapped[0];
  for (std::size_t k = 0; k < truth.size(); ++k) {
    if (k > 0) chain = sw::unwrap_next(chain, wrapped[k]);
    CHECK(u[k] - u[0] == Approx(truth[k] - truth[0]).margin(1e-9));
    CHECK(chain == Approx(u[k]).margin(1e-9));
  }
  CHECK(sw::wrapped_phase_step(3 * kPi) == Approx(kPi));  // numpy keeps +pi for a positive step
  CHECK(sw::wrapped_phase_step(-3 * kPi) == Approx(-kPi));
  CHECK(sw::wrapped_phase_step(1.0) == 1.0);
}
