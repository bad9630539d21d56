// The CSV reader's rows (io/internal/csv_parser.hpp): the number parser's fast path over the
// text, the careful path for an unusual line, and the time column's check.
#include <cstdint>
#include <cstring>

#include "core/number_format.hpp"
#include "io/internal/csv_parser.hpp"

namespace periodfit::io::csv {

double printed_resolution(std::string_view s, char decimal) {
  const std::size_t epos = s.find_first_of("eE");
  const std::string_view mantissa = s.substr(0, epos);
  int exponent = 0;
  if (epos != std::string_view::npos) {
    std::string_view e = s.substr(epos + 1);
    if (!e.empty() && e.front() == '+') e.remove_prefix(1);
    std::from_chars(e.data(), e.data() + e.size(), exponent);
  }
  const std::size_t dot = mantissa.find(decimal);
  if (dot == std::string_view::npos && epos == std::string_view::npos) return 0;
  const int fraction = dot == std::string_view::npos ? 0 : static_cast<int>(mantissa.size() - dot - 1);
  return std::pow(10.0, exponent - fraction);
}

// Number of '\n' in [p, end), eight bytes at a time: an exact per-byte zero test leaves 1 in
// each byte that held '\n'; the bytes are summed in a word for up to 255 words, then added.
std::size_t count_newlines(const char* p, const char* end) {
  constexpr std::uint64_t kOnes = 0x0101010101010101u, kLow7 = 0x7F7F7F7F7F7F7F7Fu;
  constexpr std::uint64_t kNewlines = kOnes * static_cast<unsigned char>('\n');
  constexpr std::uint64_t kEvenBytes = 0x00FF00FF00FF00FFu;
  std::size_t n = 0;
  while (end - p >= 8) {
    std::uint64_t lanes = 0;
    for (int k = 0; k < 255 && end - p >= 8; ++k, p += 8) {
      std::uint64_t word;
      std::memcpy(&word, p, 8);
      const std::uint64_t x = word ^ kNewlines;  // zero bytes where '\n' was
      const std::uint64_t nonzero = ((x & kLow7) + kLow7) | x;
      lanes += (~nonzero & ~kLow7) >> 7;
    }
    const std::uint64_t pairs = (lanes & kEvenBytes) + ((lanes >> 8) & kEvenBytes);
    n += static_cast<std::size_t>((pairs * 0x0001000100010001u) >> 48);
  }
  for (; p != end; ++p) n += *p == '\n';
  return n;
}

void Parser::add_time(double value, std::string_view text, std::size_t line_number,
                      const char* line_begin) {
  const double t = value * time_factor_;
  if (!check_time_) {
    if (time_.count() == 0) time_.add(t, text);
    return;
  }
  const double previous = time_.last();
  const double mean = time_.mean_step();
  const TimeCheck::Verdict verdict = time_.add(t, text);
  if (verdict == TimeCheck::Verdict::ok) return;
  const auto column = static_cast<std::size_t>(text.data() - line_begin) + 1;
  if (verdict == TimeCheck::Verdict::not_increasing)
    fail(line_number, column,
         "time does not increase: " + quoted(text) + " follows " +
             format_significant(previous / time_factor_, 9) + " in column " +
             column_label(*time_column_) + " (give --rate HZ to ignore the time column" + guess_hint() + ")");
  fail(line_number, column,
       "time is not uniform: " + quoted(text) + " comes " + format_significant(t - previous) +
           " s after the previous row, expected " + format_significant(mean) +
           " s (within 1e-4 relative); give --rate HZ to ignore the time column" + guess_hint());
}

// The fast path parses numbers straight from the text and checks the separators; anything
// unusual (quotes, comments, blank lines, a bad cell) goes to slow_row, which splits the
// line properly and either parses it or throws the exact message.
void Parser::parse_rows(std::size_t offset, std::size_t first_line) {
  const Dialect d = layout_.dialect;
  const bool runs = d.delimiter == ' ';
  const std::size_t n = columns_.size();
  const std::size_t time_j = time_column_ ? *time_column_ : n;
  sinks_.assign(n, nullptr);
  for (std::size_t j = 0; j < n; ++j)
    if (columns_[j].channel >= 0)
      sinks_[j] = &capture_.channels[static_cast<std::size_t>(columns_[j].channel)].samples;
  std::vector<double> values(n);
  std::vector<const char*> starts(n), stops(n);
  const char* const base = text_.data();
  const char* const end = base + text_.size();
  const auto blank = [&](char c) { return runs ? is_blank(c) : skippable(c, d); };
  const auto at_eol = [&](const char* p) { return p == end || *p == '\n' || *p == '\r'; };
  std::size_t next_release = (offset / kReleaseBytes + 1) * kReleaseBytes;
  std::size_t line_number = first_line;
  const char* p = base + offset;
  while (p < end) {
    const char* const line_begin = p;
    ++line_number;
    if (release_ && static_cast<std::size_t>(line_begin - base) >= next_release) {
      release_(static_cast<std::size_t>(line_begin - base));
      next_release += kReleaseBytes;
    }
    bool fast = true;
    for (std::size_t j = 0; j < n; ++j) {
      while (p != end && blank(*p)) ++p;
      NumberStatus status;
      const char* q = p == end ? nullptr : scan_number(p, end, d.decimal, values[j], status);
      if (!q || status != NumberStatus::ok) {
        fast = false;
        break;
      }
      starts[j] = p;
      stops[j] = q;
      p = q;
      while (p != end && blank(*p)) ++p;
      if (j + 1 < n) {
        if (runs ? (p == q || at_eol(p)) : (at_eol(p) || *p != d.delimiter)) {
          fast = false;
          break;
        }
        if (!runs) ++p;
      }
    }
    if (fast) {
      while (p != end && (*p == d.delimiter || is_blank(*p))) ++p;  // trailing empty columns
      if (p != end && *p == '\r') ++p;
      if (p != end && *p != '\n') fast = false;
    }
    if (fast) {
      if (p != end) ++p;  // the '\n'
      for (std::size_t j = 0; j < n; ++j) {
        if (j == time_j)
          add_time(values[j], std::string_view(starts[j], static_cast<std::size_t>(stops[j] - starts[j])),
                   line_number, line_begin);
        else
          sinks_[j]->push_back(values[j]);
      }
      continue;
    }
    // The careful path for this line.
    const void* nl = std::memchr(line_begin, '\n', static_cast<std::size_t>(end - line_begin));
    const char* line_end = nl ? static_cast<const char*>(nl) : end;
    p = nl ? line_end + 1 : end;
    Line line;
    line.number = line_number;
    line.offset = static_cast<std::size_t>(line_begin - base);
    line.text = std::string_view(line_begin, static_cast<std::size_t>(line_end - line_begin));
    if (!line.text.empty() && line.text.back() == '\r') line.text.remove_suffix(1);
    if (classify(line.text) != LineKind::content) continue;  // blank and comment lines
    slow_row(line);
  }
  if (capture_.channels.front().samples.empty()) fail(first_data_line_, 0, "no data rows");
}

// The careful path: quoted fields, and the exact message for whatever is wrong in the row.
void Parser::slow_row(const Line& line) {
  const Dialect& d = layout_.dialect;
  std::vector<Field> fields;
  if (!split_fields(line.text, d, fields))
    fail(line.number, 0, "a quoted field is not closed, or text follows its closing quote");
  const std::size_t n = columns_.size();
  const std::size_t count = stripped_count(fields);
  std::vector<double> values(n);
  for (std::size_t j = 0; j < std::min(n, fields.size()); ++j) {
    const Field& f = fields[j];
    if (f.text.empty())
      fail(line.number, f.column, "empty cell in column " + column_label(j) + " (expected a number)");
    switch (parse_field(f.text, d.decimal, values[j])) {
      case NumberStatus::ok:
        break;
      case NumberStatus::not_number:
        fail(line.number, f.column,
             "expected a number in column " + column_label(j) + ", found " + quoted(f.text));
      case NumberStatus::out_of_range:
        fail(line.number, f.column,
             "number out of the range of a double in column " + column_label(j) + ": " + quoted(f.text));
      case NumberStatus::not_finite:
        fail(line.number, f.column,
             "expected a finite number in column " + column_label(j) + ", found " + quoted(f.text));
    }
  }
  const std::string expected_from =
      layout_.header ? "the header on line " + std::to_string(header_line_)
                     : "the first data row on line " + std::to_string(first_data_line_);
  if (fields.size() < n)
    fail(line.number, 0,
         "row has " + std::to_string(fields.size()) + " field" + (fields.size() == 1 ? "" : "s") +
             ", expected " + std::to_string(n) + " as in " + expected_from);
  if (count > n)
    fail(line.number, fields[n].column,
         "row has " + std::to_string(count) + " fields, expected " + std::to_string(n) + " as in " +
             expected_from);
  for (std::size_t j = 0; j < n; ++j) {
    if (sinks_[j]) sinks_[j]->push_back(values[j]);
    else add_time(values[j], field_view(line.text, fields[j]), line.number, line.text.data());
  }
}

}  // namespace periodfit::io::csv
