#include "io/quantity.hpp"

#include <cctype>
#include <charconv>
#include <cmath>
#include <string>

namespace periodfit::io {

namespace {

struct UnitSpelling {
  const char* lower;  ///< compared with the lower-cased tail of the text
  Dimension dimension;
};
// Longest first: "ms/s" is a rate ("s/s" is tried before "s"), "msec" a time.
constexpr UnitSpelling kUnits[] = {
    {"sa/s", Dimension::frequency}, {"sps", Dimension::frequency}, {"s/s", Dimension::frequency},
    {"sec", Dimension::time},       {"hz", Dimension::frequency},  {"s", Dimension::time},
};

bool is_space(char c) { return c == ' ' || c == '\t'; }

std::string_view trim(std::string_view s) {
  while (!s.empty() && is_space(s.front())) s.remove_prefix(1);
  while (!s.empty() && is_space(s.back())) s.remove_suffix(1);
  return s;
}

// The prefix as a power of ten, added to the number's decimal exponent before it is converted,
// so "100us" reads as exactly the double nearest 1e-4 (100 × 1e-6 in doubles is not).
std::optional<int> prefix_exponent(std::string_view prefix, Dimension dimension, CaseRule rule) {
  if (prefix.empty()) return 0;
  if (prefix == "\xC2\xB5") return -6;  // µ in UTF-8
  if (prefix.size() != 1) return std::nullopt;
  switch (prefix.front()) {
    case 'p': return -12;
    case 'n': return -9;
    case 'u': return -6;
    case 'k': case 'K': return 3;
    case 'G': return 9;
    case 'g': if (rule == CaseRule::instrument) return 9; return std::nullopt;
    case 'm': case 'M':
      if (rule == CaseRule::instrument && dimension != Dimension::none)
        return dimension == Dimension::frequency ? 6 : -3;
      return prefix.front() == 'm' ? -3 : 6;
    default: return std::nullopt;
  }
}

}  // namespace

std::optional<QuantityValue> parse_quantity(std::string_view text, char decimal, CaseRule rule) {
  text = trim(text);
  // The number: its characters copied with the decimal mark made '.', for from_chars.
  std::string number;
  std::size_t at = 0;
  for (; at < text.size(); ++at) {
    const char c = text[at];
    const bool exponent_sign = (c == '-' || c == '+') && at > 0 && (text[at - 1] == 'e' || text[at - 1] == 'E');
    const bool exponent = (c == 'e' || c == 'E') && at + 1 < text.size() &&
                          (std::isdigit(static_cast<unsigned char>(text[at + 1])) ||
                           ((text[at + 1] == '-' || text[at + 1] == '+') && at + 2 < text.size() &&
                            std::isdigit(static_cast<unsigned char>(text[at + 2]))));
    if (std::isdigit(static_cast<unsigned char>(c)) || ((c == '-' || c == '+') && at == 0) || exponent_sign ||
        exponent)
      number += c;
    else if (c == decimal)
      number += '.';
    else
      break;
  }
  if (!number.empty() && number.front() == '+') number.erase(0, 1);
  double value = 0;
  {
    const auto [ptr, ec] = std::from_chars(number.data(), number.data() + number.size(), value);
    if (number.empty() || ec != std::errc{} || ptr != number.data() + number.size() || !std::isfinite(value))
      return std::nullopt;
  }
  const std::string_view suffix = trim(text.substr(at));
  std::string lower(suffix);
  for (auto& c : lower) c = static_cast<char>(std::tolower(static_cast<unsigned char>(c)));
  QuantityValue q;
  std::string_view prefix = suffix;
  for (const auto& u : kUnits) {
    const std::string_view unit = u.lower;
    if (lower.size() >= unit.size() && std::string_view(lower).substr(lower.size() - unit.size()) == unit) {
      prefix = suffix.substr(0, suffix.size() - unit.size());
      q.dimension = u.dimension;
      break;
    }
  }
  const auto exponent = prefix_exponent(prefix, q.dimension, rule);
  if (!exponent) return std::nullopt;
  if (*exponent != 0) {
    // mantissa e (its exponent + the prefix's), converted once: correctly rounded.
    // The written exponent is read as long long: "0e2147483647k" must not overflow an int.
    const std::size_t e = number.find_first_of("eE");
    long long written = 0;
    if (e != std::string::npos) {
      const char* first = number.data() + e + 1;
      if (*first == '+') ++first;
      const auto [end, error] = std::from_chars(first, number.data() + number.size(), written);
      if (error != std::errc{} || end != number.data() + number.size()) return std::nullopt;
      number.resize(e);
    }
    number += "e" + std::to_string(written + *exponent);
    const auto [ptr, ec] = std::from_chars(number.data(), number.data() + number.size(), value);
    if (ec != std::errc{} || ptr != number.data() + number.size()) return std::nullopt;
  }
  q.value = value;
  if (!std::isfinite(q.value)) return std::nullopt;
  return q;
}

std::optional<double> parse_frequency(std::string_view text) {
  const auto q = parse_quantity(text);
  if (!q || q->dimension == Dimension::time) return std::nullopt;
  return q->value;
}

std::optional<double> parse_duration(std::string_view text) {
  const auto q = parse_quantity(text);
  if (!q || q->dimension == Dimension::frequency) return std::nullopt;
  return q->value;
}

}  // namespace periodfit::io
