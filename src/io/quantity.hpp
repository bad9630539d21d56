#pragma once
/// Numbers with SI prefixes and units, as people and instruments write them: "48k", "1MHz",
/// "2 MSa/s", "12ns", "1.5 ms", "1e-6". One reader serves the command line (--rate, --f0,
/// --skew, …) and the CSV preamble's sample rate or interval (docs/capture-formats.md), so a
/// value accepted in one place reads the same in the other.
///
/// Grammar: a decimal number (e-notation allowed), optional spaces, then optionally an SI
/// prefix (p n u µ m k K M G) and optionally a unit: a frequency (Hz, S/s, Sa/s, sps) or a time
/// (s, sec). Units are matched case-insensitively; the prefix follows SI (m = milli,
/// M = mega) under CaseRule::si. Instruments write prefixes in any case ("MHZ", "mhz",
/// "MSA/S"), so CaseRule::instrument reads m and M by the unit: mega before a frequency unit
/// (no instrument states a sample rate in millihertz), milli before a time unit.
///
///   parse_quantity("1MHz")   → {1e6, Dimension::frequency}
///   parse_quantity("1.2k")   → {1200, Dimension::none}
///   parse_frequency("1MQ")   → nullopt
#include <optional>
#include <string_view>

namespace periodfit::io {

enum class Dimension { none, frequency, time };  ///< none: a bare number or prefix, no unit
enum class CaseRule { si, instrument };

struct QuantityValue {
  double value = 0;                    ///< in Hz or s (times the prefix when there is no unit)
  Dimension dimension = Dimension::none;
};

/// The whole of `text` as a quantity, or nullopt when it is not one (an unknown unit or
/// prefix, trailing text, an empty or non-finite number). `decimal` is the decimal mark.
std::optional<QuantityValue> parse_quantity(std::string_view text, char decimal = '.',
                                            CaseRule rule = CaseRule::si);

/// A frequency in Hz: a quantity without a unit or with a frequency unit.
std::optional<double> parse_frequency(std::string_view text);

/// A time in seconds: a quantity without a unit or with a time unit.
std::optional<double> parse_duration(std::string_view text);

}  // namespace periodfit::io
