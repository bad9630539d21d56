// Dialect and layout detection for the CSV reader (io/internal/csv_dialect.hpp).
#include "io/internal/csv_dialect.hpp"

#include <algorithm>
#include <tuple>

#include "io/internal/csv_text.hpp"
#include "io/internal/csv_units.hpp"

namespace periodfit::io::csv {

namespace {

// Detection looks at the first lines only; a preamble longer than this is not recognised.
constexpr std::size_t kSampleLines = 2000;
constexpr std::size_t kSampleBytes = 1 << 20;
// A "key: value" or "key = value" preamble line has a key of at most this many characters and
// words; longer text before the separator is free text.
constexpr std::size_t kMaxKeyLength = 40;
constexpr long kMaxKeyWords = 3;
// A data line is where the data start when most of the next few lines agree with it.
constexpr std::size_t kConfirmLines = 8;

struct LineShape {
  bool ok = false;          ///< the fields split cleanly
  bool numeric = false;     ///< every field (up to the trailing empties) is a number or empty
  std::size_t raw = 0;      ///< fields including trailing empties
  std::size_t count = 0;    ///< fields without trailing empties
};

LineShape shape_of(std::string_view text, const Dialect& d, std::vector<Field>& fields) {
  LineShape s;
  s.ok = split_fields(text, d, fields);
  if (!s.ok) return s;
  s.raw = fields.size();
  s.count = stripped_count(fields);
  if (s.count == 0) return s;
  bool any = false;
  for (std::size_t i = 0; i < s.count; ++i) {
    if (fields[i].text.empty()) continue;
    double v;
    if (parse_field(fields[i].text, d.decimal, v) == NumberStatus::not_number) return s;
    any = true;
  }
  s.numeric = any;
  return s;
}

bool is_units_row(const std::vector<Field>& fields, std::size_t count) {
  bool any = false;
  for (std::size_t i = 0; i < count; ++i) {
    std::string_view t = trim(fields[i].text);
    if (t.empty()) continue;
    t = strip_unit_brackets(t);
    if (!find_unit(t)) return false;
    any = true;
  }
  return any;
}

struct Candidate {
  Layout layout;
  bool header_match = false;
  std::size_t numeric_lines = 0;
};

std::optional<Candidate> try_dialect(const std::vector<const Line*>& content, const Dialect& d) {
  std::vector<Field> fields;
  std::vector<LineShape> shapes;
  shapes.reserve(content.size());
  for (const Line* line : content) shapes.push_back(shape_of(line->text, d, fields));
  std::optional<std::size_t> start;
  for (std::size_t i = 0; i < shapes.size() && !start; ++i) {
    if (!shapes[i].numeric) continue;
    std::size_t following = 0, agree = 0;
    for (std::size_t j = i + 1; j < shapes.size() && following < kConfirmLines; ++j, ++following)
      if (shapes[j].numeric && (shapes[j].count == shapes[i].count || shapes[j].raw == shapes[i].raw)) ++agree;
    if (following == 0 || 2 * agree >= following) start = i;
  }
  // Too few rows to confirm (a short file with a bad row): the first numeric line.
  for (std::size_t i = 0; i < shapes.size() && !start; ++i)
    if (shapes[i].numeric) start = i;
  if (!start) return std::nullopt;
  Candidate c;
  c.layout.dialect = d;
  c.layout.data = *start;
  c.layout.columns = shapes[*start].count;
  for (const auto& s : shapes)
    if (s.numeric && s.count == c.layout.columns) ++c.numeric_lines;
  const auto header_fits = [&](std::size_t h) {
    const auto& s = shapes[h];
    return s.ok && !s.numeric && s.count >= c.layout.columns && s.count <= shapes[*start].raw;
  };
  if (*start >= 1 && header_fits(*start - 1)) {
    std::size_t h = *start - 1;
    // A units row ("second,Volt,Volt") right after the header.
    if (h >= 1 && header_fits(h - 1) && shapes[h - 1].count == shapes[h].count) {
      split_fields(content[h]->text, d, fields);
      if (is_units_row(fields, shapes[h].count)) {
        c.layout.units = h;
        h = h - 1;
      }
    }
    // A "Sample Interval,1e-06" line is preamble even when its field count fits.
    split_fields(content[h]->text, d, fields);
    const bool preamble_rate = fields.size() >= 2 && rate_key(fields[0].text) != RateKey::none &&
                               shapes[h].count == 2 && [&] {
                                 double v;
                                 const auto t = trim(fields[1].text);
                                 NumberStatus st;
                                 return !t.empty() &&
                                        scan_number(t.data(), t.data() + t.size(), d.decimal, v, st) != nullptr;
                               }();
    if (!preamble_rate) {
      c.layout.header = h;
      c.layout.columns = std::max(c.layout.columns, shapes[h].count);
      c.header_match = true;
    } else {
      c.layout.units.reset();
    }
  }
  return c;
}

}  // namespace

LineKind classify(std::string_view text) {
  for (char c : text) {
    if (is_blank(c) || c == '\r') continue;
    return c == '#' ? LineKind::comment : LineKind::content;
  }
  return LineKind::blank;
}

bool split_fields(std::string_view s, const Dialect& d, std::vector<Field>& out) {
  out.clear();
  std::size_t i = 0;
  const std::size_t n = s.size();
  const bool runs = d.delimiter == ' ';
  for (;;) {
    while (i < n && (runs ? is_blank(s[i]) : skippable(s[i], d))) ++i;
    if (runs && i == n) break;
    Field f;
    f.column = i + 1;
    if (i < n && s[i] == '"') {
      f.quoted = true;
      ++i;
      bool closed = false;
      while (i < n) {
        if (s[i] == '"') {
          if (i + 1 < n && s[i + 1] == '"') {
            f.text += '"';
            i += 2;
            continue;
          }
          ++i;
          closed = true;
          break;
        }
        f.text += s[i++];
      }
      if (!closed) return false;
      while (i < n && (runs ? is_blank(s[i]) : skippable(s[i], d))) ++i;
      if (i < n && !runs && s[i] != d.delimiter) return false;
    } else {
      std::size_t j = i;
      if (runs) {
        while (j < n && !is_blank(s[j])) ++j;
      } else {
        while (j < n && s[j] != d.delimiter) ++j;
      }
      f.text = std::string(trim(s.substr(i, j - i)));
      i = j;
    }
    out.push_back(std::move(f));
    if (out.size() > kMaxColumns) throw TooManyFields{};
    if (runs) continue;
    if (i >= n) break;
    ++i;  // the delimiter
  }
  return true;
}

std::size_t stripped_count(const std::vector<Field>& fields) {
  std::size_t n = fields.size();
  while (n > 0 && fields[n - 1].text.empty() && !fields[n - 1].quoted) --n;
  return n;
}

// The text of an unquoted or quoted field as a view into its line (fields own copies).
std::string_view field_view(std::string_view line, const Field& f) {
  const std::size_t at = f.column - 1 + (f.quoted ? 1 : 0);
  return trim(line.substr(at, f.text.size()));
}

Sample sample_lines(std::string_view text, std::size_t start) {
  Sample sample;
  LineCursor cursor(text, start, 0);
  Line line;
  std::size_t content_lines = 0;
  while (content_lines < kSampleLines && cursor.position() - start < kSampleBytes && cursor.next(line)) {
    const LineKind kind = classify(line.text);
    if (kind == LineKind::blank) continue;
    sample.lines.push_back({line, kind == LineKind::comment});
    if (kind == LineKind::content) ++content_lines;
  }
  if (cursor.position() < text.size())
    sample.limit = content_lines >= kSampleLines ? "the first " + std::to_string(kSampleLines) + " lines"
                                                 : "the first " + std::to_string(kSampleBytes >> 20) + " MiB";
  return sample;
}

std::optional<Layout> detect_layout(const std::vector<const Line*>& content) {
  std::optional<Candidate> best;
  for (const auto& d : kDialects) {
    auto c = try_dialect(content, d);
    if (!c) continue;
    const auto key = [](const Candidate& x) {
      // Most rows read as data first, then a header that fits, then more columns; ties go
      // to the earlier dialect in kDialects.
      return std::tuple(x.numeric_lines, x.header_match, x.layout.columns);
    };
    if (!best || key(*c) > key(*best)) best = std::move(c);
  }
  if (!best) return std::nullopt;
  return best->layout;
}

// One preamble line → a metadata entry (key, value); free text gets the key "text".
std::pair<std::string, std::string> metadata_entry(std::string_view text, const Dialect& d,
                                                   bool comment) {
  text = trim(text);
  if (comment) {
    text.remove_prefix(1);  // '#'
    text = trim(text);
  }
  std::string single;  // owns the text of a one-field line once its quotes are removed
  if (!comment && d.delimiter != ' ') {
    std::vector<Field> fields;
    if (split_fields(text, d, fields)) {
      const std::size_t n = stripped_count(fields);
      if (n >= 2 && !fields[0].text.empty()) {
        std::string value;
        for (std::size_t i = 1; i < n; ++i) {
          if (fields[i].text.empty()) continue;
          if (!value.empty()) value += ' ';
          value += fields[i].text;
        }
        return {fields[0].text, value};
      }
      if (n == 1) {
        single = fields[0].text;
        text = trim(single);
      }
    }
  }
  const std::size_t sep = text.find_first_of(":=");
  if (sep != std::string_view::npos && sep > 0) {
    const auto key = trim(text.substr(0, sep));
    // A key is a short name ("Sample rate", "fs", "Note"), not the start of a sentence.
    const auto words = 1 + std::count(key.begin(), key.end(), ' ');
    if (!key.empty() && key.size() <= kMaxKeyLength && words <= kMaxKeyWords &&
        key.find(',') == std::string_view::npos)
      return {std::string(key), std::string(trim(text.substr(sep + 1)))};
  }
  return {"text", std::string(text)};
}

}  // namespace periodfit::io::csv
