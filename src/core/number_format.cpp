#include "core/number_format.hpp"

#include <algorithm>
#include <charconv>
#include <cmath>
#include <cstdio>

namespace periodfit {

std::string format_shortest(double value) {
  if (std::isnan(value)) return "nan";
  if (std::isinf(value)) return value > 0 ? "inf" : "-inf";
  char buffer[32];
  const auto [end, ec] = std::to_chars(buffer, buffer + sizeof buffer, value);
  return std::string(buffer, end);
}

std::string format_significant(double value, int significant) {
  char buffer[64];
  std::snprintf(buffer, sizeof buffer, "%.*g", significant, value);
  return buffer;
}

std::string format_fixed(double value, int decimals) {
  char buffer[64];
  std::snprintf(buffer, sizeof buffer, "%.*f", decimals, value);
  return buffer;
}

namespace {

// Fixed notation for a number of at least kMinFixed whose last digit kept is at 10^place with
// place <= kMaxPlace; otherwise e-notation, where leading zeros ("0.0000012") or trailing
// zeros that are no digits ("12000000") would outnumber the digits that carry information.
// A value's decimals may go down to kMinPlace (a double holds about 16 significant digits).
constexpr double kMinFixed = 1e-4;
constexpr int kMaxPlace = 3;
constexpr int kMinPlace = -15;

// "-0.000" reads as a negative result: a value that rounds to zero is printed unsigned.
std::string unsigned_zero(std::string text) {
  if (!text.empty() && text.front() == '-' && text.find_first_of("123456789") == std::string::npos)
    text.erase(0, 1);
  return text;
}

// The decimal place (exponent of the last digit) of u rounded to two significant digits,
// and u so rounded. Rounding can carry into a new digit (0.0996 → 0.10): the place follows.
int two_digit_place(double u, double& rounded) {
  int e = static_cast<int>(std::floor(std::log10(u)));
  int place = e - 1;
  rounded = std::round(u / std::pow(10.0, place)) * std::pow(10.0, place);
  if (rounded >= std::pow(10.0, e + 1)) {
    ++place;
    rounded = std::round(u / std::pow(10.0, place)) * std::pow(10.0, place);
  }
  return place;
}

// `value` rounded to 10^place, fixed or e-notation as decided by the caller.
std::string at_place(double value, int place, bool fixed) {
  if (fixed) {
    if (place >= 0) {
      const double step = std::pow(10.0, place);
      return unsigned_zero(format_fixed(std::round(value / step) * step, 0));
    }
    return unsigned_zero(format_fixed(value, -place));
  }
  const int e = value == 0 ? place : static_cast<int>(std::floor(std::log10(std::abs(value))));
  char buffer[64];
  std::snprintf(buffer, sizeof buffer, "%.*e", std::max(e - place, 0), value);
  return unsigned_zero(buffer);
}

}  // namespace

ValueText format_value_u(double value, double u) {
  if (!std::isfinite(value)) {
    if (!(u > 0) || !std::isfinite(u)) return {format_shortest(value), std::isnan(u) || u < 0 ? "n/a" : format_shortest(u)};
    double rounded = 0;
    const int place = two_digit_place(u, rounded);
    return {format_shortest(value), at_place(rounded, place, place <= kMaxPlace && rounded >= kMinFixed)};
  }
  if (std::isnan(u) || u < 0) return {unsigned_zero(format_significant(value, 6)), "n/a"};
  if (std::isinf(u)) return {unsigned_zero(format_significant(value, 6)), "inf"};
  if (u == 0) return {unsigned_zero(format_significant(value, 6)), "0"};
  double rounded = 0;
  const int place = two_digit_place(u, rounded);
  const bool in_range = place >= kMinPlace && place <= kMaxPlace;
  const bool value_fixed = in_range && std::max(std::abs(value), rounded) >= kMinFixed && std::abs(value) < 1e15;
  const bool u_fixed = in_range && rounded >= kMinFixed;
  return {at_place(value, place, value_fixed), at_place(rounded, place, u_fixed)};
}

std::string format_with_u(double value, double u, std::string_view unit) {
  const ValueText t = format_value_u(value, u);
  const std::string suffix = unit.empty() ? "" : " " + std::string(unit);
  return t.value + suffix + ", u = " + t.u + (t.u == "n/a" ? "" : suffix);
}

std::string format_interval(double lo, double hi, double u, double level, double k, std::string_view unit) {
  const ValueText a = format_value_u(lo, u);
  const ValueText b = format_value_u(hi, u);
  return format_significant(level * 100, 3) + " %: " + a.value + " \xE2\x80\xA6 " + b.value +
         (unit.empty() ? "" : " " + std::string(unit)) + ", k = " + format_significant(k, 3);
}

}  // namespace periodfit
