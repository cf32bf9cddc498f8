// The one precision policy of retrieval/core/format.h.
#include "retrieval/core/format.h"

#include <catch2/catch.hpp>

#include <cmath>
#include <cstdio>
#include <cstdlib>
#include <limits>
#include <random>
#include <string>

namespace {
std::string printf_g(double v, int digits) {
  char b[64];
  std::snprintf(b, sizeof b, "%.*g", digits, v);
  return b;
}
}  // namespace

TEST_CASE("format_g prints what printf %g prints", "[format]") {
  // Source: the C standard's %g conversion (ISO C 7.21.6.1), taken from the C library here.
  for (double v : {0.0, 1.0, -2.5, 149.9, 0.01097, 1e-7, 123456789.0, 6.02214076e23, -3.14159265})
    for (int d : {1, 2, 4, 6, 10}) CHECK(sw::format_g(v, d) == printf_g(v, d));
  CHECK(sw::format_g(std::numeric_limits<double>::infinity()) == "inf");
  CHECK(sw::format_g(-std::numeric_limits<double>::infinity()) == "-inf");
  CHECK(sw::format_g(std::numeric_limits<double>::quiet_NaN()) == "nan");
  CHECK(sw::format_g(1.5, 0) == "2");  // significant < 1 counts as 1 (round half to even: printf)
}

TEST_CASE("format_exact reads back as the same double and is the shortest such text", "[format]") {
  // Round trip through strtod (C standard library) on random doubles of every magnitude.
  std::mt19937_64 rng(12);
  std::uniform_real_distribution<double> mant(-1.0, 1.0);
  std::uniform_int_distribution<int> ex(-300, 300);
  for (int k = 0; k < 2000; ++k) {
    const double v = std::ldexp(mant(rng), ex(rng));
    const std::string s = sw::format_exact(v);
    CHECK(std::strtod(s.c_str(), nullptr) == v);
  }
  CHECK(sw::format_exact(0.1) == "0.1");  // shortest: 17 digits would read 0.10000000000000001
  CHECK(sw::format_exact(150.0) == "150");
  CHECK(sw::format_cell(std::numeric_limits<double>::quiet_NaN()).empty());
  CHECK(sw::format_cell(2.5) == "2.5");
}

TEST_CASE("value +- sigma: sigma to two significant digits, value to the same decimal place",
          "[format]") {
  // Examples of the Particle Data Group's rounding section (R. L. Workman et al., PTEP 2022,
  // 083C01; from memory): 0.827 +- 0.119 -> 0.83 +- 0.12 (two digits, leading digits 119).
  auto t = sw::round_value_sigma(0.827, 0.119);
  CHECK(t.value == "0.83");
  CHECK(t.sigma == "0.12");
  // PDG would give one digit for leading digits 355-949 (0.827 +- 0.367 -> 0.8 +- 0.4); our
  // policy keeps two (common practice): 0.83 +- 0.37.
  t = sw::round_value_sigma(0.827, 0.367);
  CHECK(t.value == "0.83");
  CHECK(t.sigma == "0.37");
  // The CLI's former "149.9 +- 0.01097 as": now three decimals on both.
  CHECK(sw::format_value_sigma(149.9, 0.01097, "as") == "149.900 +- 0.011 as");
  // sigma >= 10: rounded to tens, and the value with it.
  t = sw::round_value_sigma(12345.0, 678.0);
  CHECK(t.value == "12350");  // 1234.5 tens round half away from zero
  CHECK(t.sigma == "680");
  // Large magnitudes use %g with the digits that reach sigma's decimal place.
  t = sw::round_value_sigma(1.234567e7, 2.3e4);
  CHECK(t.value == "1.2346e+07");
  CHECK(t.sigma == "2.3e+04");
  // A negative sigma counts by its size; no sigma, or one that is 0 or not finite, falls back.
  CHECK(sw::format_value_sigma(-2.0, -0.25) == "-2.00 +- 0.25");
  CHECK(sw::format_value_sigma(151.27, std::nullopt, "as") == "151.3 as");
  t = sw::round_value_sigma(151.27, std::numeric_limits<double>::quiet_NaN());
  CHECK(t.value == "151.3");
  CHECK(t.sigma == "nan");
}
