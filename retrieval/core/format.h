#pragma once
// Number formatting: the one precision policy of every text the project writes.
//
//   machine-read files (CSV tables; result.json keeps its own full-precision writer)
//       format_exact: the shortest text that reads back as the same double (round trip);
//       format_cell:  the same, or an empty cell for a value that is not finite.
//   a number with its standard uncertainty (CLI lines, HTML report, figure titles)
//       format_value_sigma / round_value_sigma: sigma to kSigmaDigits = 2 significant
//       digits and the value to the same decimal place, "149.90 +- 0.011 as".
//   a number without an uncertainty shown to a reader (CLI lines, HTML, figure titles)
//       format_g(v, kDisplayDigits) = 4 significant digits, printf %g style.
//   numbers inside messages (validation errors, warnings, notes)
//       format_g(v) = 6 significant digits (kMessageDigits), printf %g style.
//
// Rounding rule for value +- sigma: the Particle Data Group's rule (R. L. Workman et al.
// (Particle Data Group), "Review of Particle Physics", Prog. Theor. Exp. Phys. 2022, 083C01,
// Introduction, section "Rounding"; from memory) quotes the value to the decimal place of the
// uncertainty's last kept digit and keeps two significant digits of the uncertainty when its
// three leading digits are 100-354 (one digit above that). We keep two digits always, the
// simpler common practice, so that a sigma of 0.5 reads 0.50, not 0.5.
// Implemented with {fmt} (libfmt), so the same text comes out on every platform and locale.

#include <optional>
#include <string>
#include <string_view>

namespace sw {

/// Significant digits of a sigma shown to a reader (PDG-style rounding, see above).
inline constexpr int kSigmaDigits = 2;
/// Significant digits of a value shown to a reader without an uncertainty.
inline constexpr int kDisplayDigits = 4;
/// Significant digits of a number inside a message (error, warning, note).
inline constexpr int kMessageDigits = 6;

/// printf "%.<significant>g" text of v ("nan", "inf", "-inf" for non-finite values);
/// significant < 1 counts as 1.
std::string format_g(double v, int significant = kMessageDigits);

/// Shortest text that reads back (std::from_chars / strtod) as the same double.
std::string format_exact(double v);

/// A CSV cell: format_exact(v), or "" for a value that is not finite (an empty cell).
std::string format_cell(double v);

/// Value and sigma as two texts rounded by the rule above: sigma to kSigmaDigits significant
/// digits, the value to the same decimal place. Fixed notation while max(|value|, sigma) lies in
/// [1e-3, 1e6), otherwise %g notation with the digits that reach that decimal place. A sigma
/// that is zero, negative or not finite, or a value that is not finite, gives
/// {format_g(value, kDisplayDigits), format_g(|sigma|, kSigmaDigits)}.
struct ValueSigmaText {
  std::string value;
  std::string sigma;
};
ValueSigmaText round_value_sigma(double value, double sigma);

/// "value +- sigma unit" by round_value_sigma ("value unit" without a sigma: value to
/// kDisplayDigits); the unit and its leading space are left out when unit is empty.
std::string format_value_sigma(double value, std::optional<double> sigma,
                               std::string_view unit = {});

/// The text of an option validation error: "FIELD = VALUE is invalid: it must be CONSTRAINT."
/// (the value by format_g).
std::string invalid_value(std::string_view field, double value, std::string_view constraint);

}  // namespace sw
