#include "retrieval/core/format.h"

#include <algorithm>
#include <charconv>
#include <cmath>

#include <fmt/format.h>

namespace sw {

std::string format_g(double v, int significant) {
  return fmt::format("{:.{}g}", v, std::max(1, significant));
}

std::string format_exact(double v) {
  char buf[32];
  const auto r = std::to_chars(buf, buf + sizeof buf, v);
  return std::string(buf, r.ptr);
}

std::string format_cell(double v) { return std::isfinite(v) ? format_exact(v) : std::string(); }

ValueSigmaText round_value_sigma(double value, double sigma) {
  const double s = std::abs(sigma);
  if (!std::isfinite(s) || s == 0.0 || !std::isfinite(value))
    return {format_g(value, kDisplayDigits), format_g(s, kSigmaDigits)};
  // kSigmaDigits significant digits of sigma fix the last decimal place 10^place of both.
  const int place = static_cast<int>(std::floor(std::log10(s))) - (kSigmaDigits - 1);
  const double mag = std::max(std::abs(value), s);
  if (mag >= 1e6 || mag < 1e-3) {
    const int digits =
        std::max(kSigmaDigits, static_cast<int>(std::floor(std::log10(mag))) - place + 1);
    return {format_g(value, digits), format_g(s, kSigmaDigits)};
  }
  if (place < 0) return {fmt::format("{:.{}f}", value, -place), fmt::format("{:.{}f}", s, -place)};
  const double q = std::pow(10.0, place);
  return {fmt::format("{:.0f}", std::round(value / q) * q),
          fmt::format("{:.0f}", std::round(s / q) * q)};
}

std::string format_value_sigma(double value, std::optional<double> sigma, std::string_view unit) {
  std::string out;
  if (sigma) {
    const ValueSigmaText t = round_value_sigma(value, *sigma);
    out = t.value + " +- " + t.sigma;
  } else {
    out = format_g(value, kDisplayDigits);
  }
  if (!unit.empty()) {
    out += ' ';
    out += unit;
  }
  return out;
}

std::string invalid_value(std::string_view field, double value, std::string_view constraint) {
  return std::string(field) + " = " + format_g(value) + " is invalid: it must be " +
         std::string(constraint) + ".";
}

}  // namespace sw
