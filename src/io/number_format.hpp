#pragma once
/// Number formatting for output. Machine-readable doubles use the shortest text that reads
/// back to the same double (std::to_chars); tables for people use fixed significant digits.
#include <string>

namespace periodfit::io {

/// Shortest round-trip decimal form ("0.1", "1e-09", "123456.789"). NaN and infinities are
/// written "nan", "inf", "-inf"; callers that must never emit them check first.
std::string format_shortest(double value);

/// `significant` digits in %g style, for tables read by people.
std::string format_significant(double value, int significant = 6);

/// Fixed decimals ("12.35" for (12.3456, 2)), for dB and degree columns.
std::string format_fixed(double value, int decimals);

}  // namespace periodfit::io
