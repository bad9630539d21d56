#pragma once
/// Internal to the CSV reader (io/csv_reader.hpp): column units and scales. The unit words a
/// header, a units row or a preamble may use (and the seconds per unit of the time units), the
/// name/unit split of a header cell, and the sample rate or interval a preamble states, with
/// its scale ("1 us", "10kHz", "2 MSa/s"). docs/capture-formats.md states the rules.
/// Not installed (cmake/InstallHeaders.cmake copies src/io/*.hpp, not this folder).
#include <cstddef>
#include <optional>
#include <string>
#include <string_view>
#include <utility>
#include <vector>

namespace periodfit::io::csv {

struct UnitWord {
  const char* text;
  const char* normal;  ///< how the unit is stored
  double time_factor;  ///< seconds per unit for time units, else 0
};

/// The unit word `s` is, or nullptr for text that is no unit word.
const UnitWord* find_unit(std::string_view s);
/// "(V)" or "[V]" → "V"; any other text unchanged.
std::string_view strip_unit_brackets(std::string_view s);

struct NameUnit {
  std::string name;
  std::string unit;
};

/// "v_out (V)", "v_out [V]", "v_out/V" → {v_out, V}; a '/' splits only before a known unit.
NameUnit split_name_unit(std::string_view text);
/// The stored form of a unit word ("Volts" → "V"); other text unchanged.
std::string normal_unit(std::string_view unit);
/// Seconds per unit of a time unit; 1 for no unit; 0 for a unit that is not one of time.
double time_factor(std::string_view unit);
/// Whether a header name says "time" (t, time, time_s, seconds, …).
bool is_time_name(std::string_view name);

/// A sample rate stated in the preamble.
struct StatedRate {
  double rate_hz = 0;
  std::size_t line = 0;
  std::string text;         ///< as written, for messages
};

/// What a preamble key names: a sample interval, a sample rate, or neither.
enum class RateKey { none, interval, rate };

RateKey rate_key(std::string_view key);
/// The rate a preamble value gives, or nullopt when the value is not one; throws InputError
/// (name:line) for a rate or interval that is not > 0.
std::optional<StatedRate> parse_stated_rate(RateKey key, std::string_view value, char decimal,
                                            std::size_t line, std::string_view name);
/// The unit words of a preamble units row, or none (see csv_units.cpp).
std::vector<std::string> preamble_units(const std::pair<std::string, std::string>& entry);

}  // namespace periodfit::io::csv
