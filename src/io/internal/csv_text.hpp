#pragma once
/// Internal to the CSV reader (io/csv_reader.hpp): the text and number primitives that its
/// dialect detection (csv_dialect), unit parsing (csv_units) and row parsing (csv_rows) share.
/// Inline: the number scanner runs once per cell on the reader's fast path. Not installed
/// (cmake/InstallHeaders.cmake copies src/io/*.hpp, not this folder).
#include <cctype>
#include <charconv>
#include <cmath>
#include <string>
#include <string_view>
#include <system_error>

namespace periodfit::io::csv {

inline bool is_blank(char c) { return c == ' ' || c == '\t'; }
inline bool is_digit(char c) { return c >= '0' && c <= '9'; }

inline std::string_view trim(std::string_view s) {
  while (!s.empty() && (is_blank(s.front()) || s.front() == '\r')) s.remove_prefix(1);
  while (!s.empty() && (is_blank(s.back()) || s.back() == '\r')) s.remove_suffix(1);
  return s;
}

inline std::string lower(std::string_view s) {
  std::string out(s);
  for (auto& c : out) c = static_cast<char>(std::tolower(static_cast<unsigned char>(c)));
  return out;
}

inline std::string quoted(std::string_view s) { return "\"" + std::string(s) + "\""; }

// ---- numbers ---------------------------------------------------------------------------

enum class NumberStatus { ok, not_number, out_of_range, not_finite };

// Parses a number starting at p (no leading blanks). Returns its end, or nullptr when no
// number starts here. The decimal comma is handled by copying the one field into a small
// buffer with ',' replaced, never the whole text.
inline const char* scan_number(const char* p, const char* end, char decimal, double& value,
                               NumberStatus& status) {
  status = NumberStatus::ok;
  if (p != end && *p == '+') {
    ++p;
    if (p == end || !(is_digit(*p) || *p == decimal)) return nullptr;
  }
  const char* stop = nullptr;
  std::errc ec{};
  if (decimal == '.') {
    const auto r = std::from_chars(p, end, value);
    stop = r.ptr;
    ec = r.ec;
  } else {
    char buffer[96];
    std::size_t n = 0;
    const char* q = p;
    while (q != end && n < sizeof buffer) {
      const char c = *q;
      if (c == ',') {
        buffer[n++] = '.';
      } else if (std::isalnum(static_cast<unsigned char>(c)) || c == '-' || c == '+') {
        buffer[n++] = c;
      } else {
        break;  // a '.' is no decimal mark in a decimal-comma file
      }
      ++q;
    }
    const auto r = std::from_chars(buffer, buffer + n, value);
    stop = p + (r.ptr - buffer);
    ec = r.ec;
  }
  if (ec == std::errc::invalid_argument) return nullptr;
  if (ec == std::errc::result_out_of_range) status = NumberStatus::out_of_range;
  else if (!std::isfinite(value)) status = NumberStatus::not_finite;
  return stop;
}

// Whole-field parse: the field must be exactly one number.
inline NumberStatus parse_field(std::string_view text, char decimal, double& value) {
  text = trim(text);
  if (text.empty()) return NumberStatus::not_number;
  NumberStatus status;
  const char* end = text.data() + text.size();
  const char* stop = scan_number(text.data(), end, decimal, value, status);
  if (stop != end) return NumberStatus::not_number;
  return status;
}

}  // namespace periodfit::io::csv
