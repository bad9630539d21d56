#pragma once
/// Number formatting for output. Machine-readable doubles use the shortest text that reads
/// back to the same double (std::to_chars); tables for people use fixed significant digits,
/// and a value with an uncertainty is printed with the digits the uncertainty supports.
///
/// The uncertainty convention (docs/methods.md, "How results are stated"): a standard
/// uncertainty u is written `u = …` (or sits in a column whose header says u); an expanded
/// interval is written with its level and coverage factor, `95 %: lo … hi, k = 2.31`. A bare
/// "±" is never printed.
///
///   format_with_u(100.02147, 0.00035, "g")          // "100.02147 g, u = 0.00035 g"
///   format_interval(0.99, 1.01, 0.001, 0.95, 2.31)  // "95 %: 0.9900 … 1.0100, k = 2.31"
#include <string>
#include <string_view>

namespace periodfit {

/// Shortest round-trip decimal form ("0.1", "1e-09", "123456.789"). NaN and infinities are
/// written "nan", "inf", "-inf"; callers that must never emit them check first.
std::string format_shortest(double value);

/// `significant` digits in %g style, for tables read by people.
std::string format_significant(double value, int significant = 6);

/// Fixed decimals ("12.35" for (12.3456, 2)), for dB and degree columns.
std::string format_fixed(double value, int decimals);

/// A value and its standard uncertainty as text, rounded as GUM (JCGM 100:2008) §7.2.6
/// recommends: u to two significant digits, the value to the same decimal place (§7.2.2
/// example: m_s = 100.02147 g with u = 0.35 mg → "100.02147", "0.00035"). Each is in fixed
/// notation when it (for the value: it or u) is at least 1e-4 and the last digit kept is at
/// most the thousands, else in e-notation: "1.00000113, u = 3.3e-08", "-3e-11, u = 2.3e-10".
/// Edge cases: u = 0 (exact, or the noise floor was not resolved) → the value to 6
/// significant digits and u "0"; u NaN → value to 6 significant digits and u "n/a"; u
/// infinite → u "inf"; a value that rounds to zero is written without a sign; u larger than
/// the value keeps the value at u's decimal place ("0.01", u "0.35"); a non-finite value is
/// "nan"/"inf"/"-inf".
struct ValueText {
  std::string value;
  std::string u;
};
ValueText format_value_u(double value, double u);

/// "value unit, u = u unit" (the unit omitted when empty), digits as format_value_u.
std::string format_with_u(double value, double u, std::string_view unit = "");

/// An expanded interval "95 %: lo … hi, k = 2.31" (level in percent, k to 3 significant
/// digits; the bounds rounded to the decimal place of the standard uncertainty `u`, as
/// format_value_u; `unit` follows hi when given). Used wherever an interval is printed, so
/// its level and coverage factor always travel with it.
std::string format_interval(double lo, double hi, double u, double level, double k,
                            std::string_view unit = "");

}  // namespace periodfit
