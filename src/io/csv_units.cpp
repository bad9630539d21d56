// Column units and scales for the CSV reader (io/internal/csv_units.hpp).
#include "io/internal/csv_units.hpp"

#include <algorithm>

#include "core/error.hpp"
#include "io/internal/csv_text.hpp"
#include "io/quantity.hpp"

namespace periodfit::io::csv {

namespace {

constexpr UnitWord kUnitWords[] = {
    {"s", "s", 1},          {"ms", "ms", 1e-3},      {"us", "us", 1e-6},
    {"\xC2\xB5s", "\xC2\xB5s", 1e-6},                {"ns", "ns", 1e-9},
    {"ps", "ps", 1e-12},    {"sec", "s", 1},         {"second", "s", 1},
    {"seconds", "s", 1},    {"min", "min", 60},      {"h", "h", 3600},
    {"V", "V", 0},           {"mV", "mV", 0},
    {"uV", "uV", 0},        {"\xC2\xB5V", "\xC2\xB5V", 0},   {"kV", "kV", 0},
    {"Volt", "V", 0},       {"Volts", "V", 0},       {"volt", "V", 0},
    {"volts", "V", 0},      {"A", "A", 0},           {"mA", "mA", 0},
    {"uA", "uA", 0},        {"\xC2\xB5""A", "\xC2\xB5""A", 0},  {"Amp", "A", 0},
    {"Amps", "A", 0},       {"Ampere", "A", 0},      {"Amperes", "A", 0},
    {"Hz", "Hz", 0},        {"kHz", "kHz", 0},       {"W", "W", 0},
    {"mW", "mW", 0},        {"Ohm", "Ohm", 0},       {"\xCE\xA9", "\xCE\xA9", 0},
    {"FS", "FS", 0},        {"Pa", "Pa", 0},         {"kPa", "kPa", 0},
    {"K", "K", 0},          {"degC", "degC", 0},     {"\xC2\xB0""C", "\xC2\xB0""C", 0},
    {"%", "%", 0},          {"dB", "dB", 0},         {"dBV", "dBV", 0},
    {"g", "g", 0},          {"m/s2", "m/s2", 0},     {"m/s^2", "m/s^2", 0},
    {"N", "N", 0},
};

std::vector<std::string> key_tokens(std::string_view key) {
  std::vector<std::string> tokens;
  std::string current;
  for (char c : key) {
    if (std::isalnum(static_cast<unsigned char>(c))) {
      current += static_cast<char>(std::tolower(static_cast<unsigned char>(c)));
    } else if (!current.empty()) {
      tokens.push_back(current);
      current.clear();
    }
  }
  if (!current.empty()) tokens.push_back(current);
  return tokens;
}

}  // namespace

const UnitWord* find_unit(std::string_view s) {
  for (const auto& u : kUnitWords)
    if (s == u.text) return &u;
  return nullptr;
}

std::string_view strip_unit_brackets(std::string_view s) {
  if (s.size() >= 2 && ((s.front() == '(' && s.back() == ')') || (s.front() == '[' && s.back() == ']')))
    return s.substr(1, s.size() - 2);
  return s;
}

// "v_out (V)", "v_out [V]", "v_out/V" → {v_out, V}; a '/' splits only before a known unit.
NameUnit split_name_unit(std::string_view text) {
  text = trim(text);
  if (text.size() >= 2 && (text.back() == ')' || text.back() == ']')) {
    const char open = text.back() == ')' ? '(' : '[';
    const std::size_t at = text.rfind(open);
    if (at != std::string_view::npos) {
      const auto name = trim(text.substr(0, at));
      const auto unit = trim(text.substr(at + 1, text.size() - at - 2));
      if (!name.empty()) return {std::string(name), std::string(unit)};
      return {std::string(unit), ""};
    }
  }
  if (const std::size_t at = text.rfind('/'); at != std::string_view::npos && at > 0) {
    const auto unit = trim(text.substr(at + 1));
    if (find_unit(unit)) return {std::string(trim(text.substr(0, at))), std::string(unit)};
  }
  return {std::string(text), ""};
}

std::string normal_unit(std::string_view unit) {
  if (const auto* u = find_unit(unit)) return u->normal;
  return std::string(unit);
}

double time_factor(std::string_view unit) {
  if (unit.empty()) return 1;
  const auto* u = find_unit(unit);
  return u ? u->time_factor : 0;
}

bool is_time_name(std::string_view name) {
  const std::string n = lower(name);
  return n == "t" || n == "time" || n == "time_s" || n == "t_s" || n == "times" ||
         n == "seconds" || n == "second" || n == "sec" || n == "s";
}

RateKey rate_key(std::string_view key) {
  for (const auto& t : key_tokens(key)) {
    if (t.find("interval") != std::string::npos || t.find("increment") != std::string::npos)
      return RateKey::interval;
    if (t == "rate" || t == "fs" || t == "samplerate" || t == "samplingrate" || t == "srate")
      return RateKey::rate;
  }
  return RateKey::none;
}

// "1e-06", "1 us", "10kHz", "2 MSa/s": the rate, or nullopt when the value is not one. The
// number and unit reader is io::parse_quantity (shared with the command line), with the
// instrument case rule: "MHz"/"mhz" are mega for rates, "MS"/"ms" milli for intervals.
std::optional<StatedRate> parse_stated_rate(RateKey key, std::string_view value, char decimal,
                                            std::size_t line, std::string_view name) {
  value = trim(value);
  const auto quantity = parse_quantity(value, decimal, CaseRule::instrument);
  if (!quantity) return std::nullopt;
  const bool is_rate = quantity->dimension == Dimension::none ? key == RateKey::rate
                                                              : quantity->dimension == Dimension::frequency;
  const double number = quantity->value;
  if (!(number > 0))
    throw InputError(std::string(name), line, 0,
                     "a sample " + std::string(is_rate ? "rate" : "interval") +
                         " must be > 0, found " + quoted(value));
  StatedRate r;
  r.rate_hz = is_rate ? number : 1.0 / number;
  r.line = line;
  r.text = std::string(value);
  return r;
}

// A preamble row of vertical units ("Vertical Units,V,V", "Units,s,V,V", "Unit,(V),(V)"):
// the unit words, or none when the key is not a units key or a value is not a unit word.
// Horizontal units ("Horizontal Units,s") are left alone: they belong to the time axis.
std::vector<std::string> preamble_units(const std::pair<std::string, std::string>& entry) {
  const std::string key = lower(trim(entry.first));
  const bool units_key = key == "units" || key == "unit" ||
                         (key.find("vertical") != std::string::npos && key.find("unit") != std::string::npos);
  std::vector<std::string> units;
  if (!units_key) return units;
  std::string_view rest = entry.second;
  while (!(rest = trim(rest)).empty()) {
    const std::size_t stop = std::min(rest.find(' '), rest.size());
    std::string_view word = rest.substr(0, stop);
    rest.remove_prefix(stop);
    word = strip_unit_brackets(word);
    if (!find_unit(word)) return {};
    units.push_back(normal_unit(word));
  }
  return units;
}

}  // namespace periodfit::io::csv
