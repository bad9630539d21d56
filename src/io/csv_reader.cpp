#include "io/csv_reader.hpp"

#include <fcntl.h>
#include <sys/mman.h>
#include <sys/stat.h>
#include <unistd.h>

#include <algorithm>
#include <array>
#include <atomic>
#include <csignal>
#include <mutex>
#include <cstdint>
#include <cctype>
#include <cerrno>
#include <charconv>
#include <cmath>
#include <limits>
#include <cstring>
#include <functional>
#include <optional>
#include <tuple>
#include <unordered_set>

#include "core/error.hpp"
#include "core/memory_budget.hpp"
#include "core/number_format.hpp"
#include "io/output_file.hpp"
#include "io/quantity.hpp"

namespace periodfit::io {

namespace {

// The rule for a time column: spacing uniform within 1e-4 relative. The rounding of
// the printed values is allowed on top (see TimeCheck).
constexpr double kTimeUniformRel = 1e-4;
// Printed times coarser than this fraction of the step get no rounding allowance: with it a
// one-sample gap would pass (the allowance reaches a whole step at a resolution of 1/2 step).
constexpr double kCoarsestResolution = 0.5;
// A rate stated in the preamble and the time column's must agree to this (relative), plus the
// rounding of the time column's first and last values. Instruments print the interval to 4 or
// more significant digits (rounding <= 5e-4) or exactly ("1e-05"), whose digits cannot be
// judged, so a fixed bound is used.
constexpr double kStatedRateAgreement = 1e-3;
// Detection looks at the first lines only; a preamble longer than this is not recognised.
constexpr std::size_t kSampleLines = 2000;
// A "key: value" or "key = value" preamble line has a key of at most this many characters and
// words; longer text before the separator is free text.
constexpr std::size_t kMaxKeyLength = 40;
constexpr long kMaxKeyWords = 3;
constexpr std::size_t kSampleBytes = 1 << 20;
// A data line is where the data start when most of the next few lines agree with it.
constexpr std::size_t kConfirmLines = 8;
// Without a header, a first column is time only if it increases uniformly over these rows.
constexpr std::size_t kTimeHeuristicRows = 64;
// Most columns a capture may have: ten times the 10^5 columns the catalogue imports
// (docs/robustness.md, entry 14), while every column costs ~230 B of bookkeeping (name, unit, a
// field per dialect tried, a channel) before its first sample: a one-row file of 5·10^6 columns
// took 1.15 GB before this bound (issue 11, class 5); 2^20 columns cost ~250 MB. Checked while
// a line is split, so a wider line is refused before its fields are held.
constexpr std::size_t kMaxColumns = std::size_t{1} << 20;
// Thrown by split_fields past kMaxColumns; turned into an InputError naming the line.
struct TooManyFields {};
// Mapped pages behind the parse are released in steps of this size (bounded RSS).
constexpr std::size_t kReleaseBytes = std::size_t{8} << 20;

using Release = std::function<void(std::size_t)>;

bool is_blank(char c) { return c == ' ' || c == '\t'; }
bool is_digit(char c) { return c >= '0' && c <= '9'; }

std::string_view trim(std::string_view s) {
  while (!s.empty() && (is_blank(s.front()) || s.front() == '\r')) s.remove_prefix(1);
  while (!s.empty() && (is_blank(s.back()) || s.back() == '\r')) s.remove_suffix(1);
  return s;
}

std::string lower(std::string_view s) {
  std::string out(s);
  for (auto& c : out) c = static_cast<char>(std::tolower(static_cast<unsigned char>(c)));
  return out;
}

std::string quoted(std::string_view s) { return "\"" + std::string(s) + "\""; }

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
NumberStatus parse_field(std::string_view text, char decimal, double& value) {
  text = trim(text);
  if (text.empty()) return NumberStatus::not_number;
  NumberStatus status;
  const char* end = text.data() + text.size();
  const char* stop = scan_number(text.data(), end, decimal, value, status);
  if (stop != end) return NumberStatus::not_number;
  return status;
}

// The step between neighbouring values the printed text can express: "1.2340e-05" → 1e-9.
// A literal integer ("0", "12") is taken as exact.
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

// ---- units ------------------------------------------------------------------------------

struct UnitWord {
  const char* text;
  const char* normal;  ///< how the unit is stored
  double time_factor;  ///< seconds per unit for time units, else 0
};
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

const UnitWord* find_unit(std::string_view s) {
  for (const auto& u : kUnitWords)
    if (s == u.text) return &u;
  return nullptr;
}

struct NameUnit {
  std::string name;
  std::string unit;
};

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

// ---- lines and fields --------------------------------------------------------------------

struct Line {
  std::size_t number = 0;  ///< 1-based
  std::size_t offset = 0;  ///< of its first byte in the text
  std::string_view text;   ///< without the line end
};

class LineCursor {
 public:
  LineCursor(std::string_view text, std::size_t pos, std::size_t number)
      : text_(text), pos_(pos), number_(number) {}
  bool next(Line& line) {
    if (pos_ >= text_.size()) return false;
    const char* begin = text_.data() + pos_;
    const void* nl = std::memchr(begin, '\n', text_.size() - pos_);
    const std::size_t end =
        nl ? static_cast<std::size_t>(static_cast<const char*>(nl) - text_.data()) : text_.size();
    std::size_t stop = end;
    if (stop > pos_ && text_[stop - 1] == '\r') --stop;
    line.number = ++number_;
    line.offset = pos_;
    line.text = text_.substr(pos_, stop - pos_);
    pos_ = end + 1;
    return true;
  }
  std::size_t position() const { return pos_; }

 private:
  std::string_view text_;
  std::size_t pos_;
  std::size_t number_;
};

enum class LineKind { blank, comment, content };

LineKind classify(std::string_view text) {
  for (char c : text) {
    if (is_blank(c) || c == '\r') continue;
    return c == '#' ? LineKind::comment : LineKind::content;
  }
  return LineKind::blank;
}

struct Dialect {
  char delimiter;  ///< ' ' = runs of spaces and tabs
  char decimal;
};
constexpr Dialect kDialects[] = {{',', '.'},  {';', ','},  {';', '.'},
                                 {'\t', '.'}, {'\t', ','}, {' ', '.'}};

struct Field {
  std::string text;
  std::size_t column = 0;  ///< 1-based byte column of the field's first character
  bool quoted = false;
};

bool skippable(char c, const Dialect& d) { return c == ' ' || (c == '\t' && d.delimiter != '\t'); }

// Splits one line into fields. False for a quote that is not closed or is followed by text.
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

// ---- the time column's uniform spacing, checked while streaming -------------------------

// Model: t_k = t_0 + k·Δt. Row k is compared with the mean step of the rows before it,
// Δ̄ = (t_{k-1} − t_0)/(k−1): |t_k − t_{k−1} − Δ̄| must stay within kTimeUniformRel·Δ̄ plus the
// rounding of the printed values (half a printed unit for each of t_k, t_{k−1}, and the
// part of Δ̄'s uncertainty that comes from t_0 and t_{k−1}). A one-sample gap is therefore
// found wherever the printed times resolve a step. The printed rounding is only worked out
// when the plain 1e-4 test fails, so the common case costs one comparison per row; the value
// texts it needs are views into the parsed text, which outlives the check.
class TimeCheck {
 public:
  enum class Verdict { ok, not_increasing, not_uniform };

  TimeCheck(char decimal, double factor) : decimal_(decimal), factor_(factor) {}

  Verdict add(double t, std::string_view text) {
    if (count_ == 0) {
      first_ = t;
      first_text_ = text;
    } else {
      const double step = t - last_;
      if (!(step > 0)) return Verdict::not_increasing;
      // Welford's running mean and variance of the steps (stable where E[s²] − E[s]² would
      // cancel: deviations are ~1e-7 of a step), and the extreme steps, for info's report.
      ++steps_;
      const double delta = step - step_mean_;
      step_mean_ += delta / static_cast<double>(steps_);
      step_m2_ += delta * (step - step_mean_);
      step_min_ = steps_ == 1 ? step : std::min(step_min_, step);
      step_max_ = steps_ == 1 ? step : std::max(step_max_, step);
      finest_ = std::min(finest_, resolution(text));
      if (count_ >= 2) {
        const double mean = (last_ - first_) / static_cast<double>(count_ - 1);
        last_mean_ = mean;
        if (std::fabs(step - mean) > kTimeUniformRel * mean) {
          const double res = resolution(text), last_res = resolution(last_text_),
                       first_res = resolution(first_text_);
          // Rounding is allowed for only where the printed unit is finer than half a step:
          // coarser times cannot tell a rounded grid from a missing sample.
          if (std::max({res, last_res, first_res}) >= kCoarsestResolution * mean) return Verdict::not_uniform;
          const double allowed = kTimeUniformRel * mean + 0.5 * (res + last_res) +
                                 0.5 * (first_res + last_res) / static_cast<double>(count_ - 1);
          if (std::fabs(step - mean) > allowed) return Verdict::not_uniform;
        }
      } else {
        last_mean_ = step;
      }
    }
    last_ = t;
    last_text_ = text;
    ++count_;
    return Verdict::ok;
  }
  std::size_t count() const { return count_; }
  double first() const { return first_; }
  double last() const { return last_; }
  double mean_step() const { return last_mean_; }
  double rate_hz() const { return static_cast<double>(count_ - 1) / (last_ - first_); }
  /// The regularity of the steps seen (Capture::time_base), source left to the caller.
  TimeBase regularity() const {
    TimeBase b;
    b.steps = steps_;
    if (steps_ > 0) {
      b.step_deviation_rms_s = std::sqrt(step_m2_ / static_cast<double>(steps_));
      b.step_deviation_max_s = std::max(step_max_ - step_mean_, step_mean_ - step_min_);
      b.printed_resolution_s = std::isfinite(finest_) ? finest_ : 0;
    }
    return b;
  }
  /// Relative uncertainty of rate_hz() from the rounding of the first and last value.
  double rate_rounding() const {
    return 0.5 * (resolution(first_text_) + resolution(last_text_)) / (last_ - first_);
  }

 private:
  double resolution(std::string_view text) const { return printed_resolution(text, decimal_) * factor_; }

  char decimal_;
  double factor_;
  std::size_t count_ = 0;
  double first_ = 0, last_ = 0, last_mean_ = 0;
  std::size_t steps_ = 0;
  double step_mean_ = 0, step_m2_ = 0, step_min_ = 0, step_max_ = 0;
  double finest_ = std::numeric_limits<double>::infinity();
  std::string_view first_text_, last_text_;
};

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

// ---- preamble -----------------------------------------------------------------------------

struct StatedRate {
  double rate_hz = 0;
  std::size_t line = 0;
  std::string text;         ///< as written, for messages
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

enum class RateKey { none, interval, rate };

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
    if (word.size() >= 2 && ((word.front() == '(' && word.back() == ')') || (word.front() == '[' && word.back() == ']')))
      word = word.substr(1, word.size() - 2);
    if (!find_unit(word)) return {};
    units.push_back(normal_unit(word));
  }
  return units;
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

// ---- detection ----------------------------------------------------------------------------

struct SampleLine {
  Line line;
  bool comment = false;
};

struct LineShape {
  bool ok = false;          ///< the fields split cleanly
  bool numeric = false;     ///< every field (up to the trailing empties) is a number or empty
  std::size_t raw = 0;      ///< fields including trailing empties
  std::size_t count = 0;    ///< fields without trailing empties
};

struct Layout {
  Dialect dialect{',', '.'};
  std::size_t data = 0;            ///< index into content lines of the first data line
  std::optional<std::size_t> header;
  std::optional<std::size_t> units;
  std::size_t columns = 0;
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
    if (t.size() >= 2 && ((t.front() == '(' && t.back() == ')') || (t.front() == '[' && t.back() == ']')))
      t = t.substr(1, t.size() - 2);
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

// ---- the parse ----------------------------------------------------------------------------

struct Column {
  std::string name;
  std::string unit;
  int channel = -1;  ///< index into Capture::channels, -1 for the time column
};

class Parser {
 public:
  Parser(std::string_view text, std::string_view name, const CsvOptions& options, const Release& release)
      : text_(text), name_(name), options_(options), release_(release) {}

  Capture run();

 private:
  [[noreturn]] void fail(std::size_t line, std::size_t column, const std::string& message) const {
    throw InputError(name_, line, column, message);
  }
  void choose_time_column(const std::vector<const Line*>& content, bool has_header);
  /// One unit per data channel, or one per column (the time column's skipped); a unit from
  /// the header or a units row stays.
  void apply_preamble_units(const std::vector<std::string>& units) {
    std::size_t channels = 0;
    for (const auto& c : columns_)
      if (c.channel >= 0) ++channels;
    for (std::size_t j = 0; j < columns_.size(); ++j) {
      if (columns_[j].channel < 0 || !columns_[j].unit.empty()) continue;
      const std::size_t at = units.size() == columns_.size() ? j
                             : units.size() == channels     ? static_cast<std::size_t>(columns_[j].channel)
                                                            : units.size();
      if (at < units.size()) columns_[j].unit = units[at];
    }
  }
  void parse_rows(std::size_t offset, std::size_t first_line);
  void slow_row(const Line& line);
  void add_time(double value, std::string_view text, std::size_t line_number, const char* line_begin);
  std::string column_label(std::size_t j) const { return quoted(columns_[j].name); }
  std::string guess_hint() const {
    return time_guessed_ ? ", or --time-column none if the first column, taken as time because it "
                           "increases, is data"
                         : "";
  }

  std::string_view text_;
  std::string name_;
  const CsvOptions& options_;
  const Release& release_;
  Layout layout_;
  std::vector<Column> columns_;
  std::optional<std::size_t> time_column_;
  double time_factor_ = 1;
  bool check_time_ = false;
  bool time_guessed_ = false;  ///< time column found by the no-header rule, not by name
  TimeCheck time_{'.', 1};
  std::size_t header_line_ = 0;
  std::size_t first_data_line_ = 0;
  Capture capture_;
  std::vector<std::vector<double>*> sinks_;  ///< per column; nullptr for the time column
};

// The text of an unquoted or quoted field as a view into its line (fields own copies).
std::string_view field_view(std::string_view line, const Field& f) {
  const std::size_t at = f.column - 1 + (f.quoted ? 1 : 0);
  return trim(line.substr(at, f.text.size()));
}

void Parser::choose_time_column(const std::vector<const Line*>& content, bool has_header) {
  const std::string& requested = options_.time_column;
  if (requested == "none") return;
  if (!requested.empty()) {
    std::vector<std::string> names;
    for (const auto& col : columns_) names.push_back(col.name);
    for (std::size_t j = 0; j < columns_.size() && !time_column_; ++j)
      if (columns_[j].name == requested) time_column_ = j;
    for (std::size_t j = 0; j < columns_.size() && !time_column_; ++j)
      if (lower(columns_[j].name) == lower(requested)) time_column_ = j;
    std::size_t index = 0;
    const char* end = requested.data() + requested.size();
    if (!time_column_) {
      if (auto [p, ec] = std::from_chars(requested.data(), end, index);
          ec == std::errc{} && p == end && index < columns_.size())
        time_column_ = index;
    }
    if (!time_column_) {
      for (std::size_t j = 0; j < names.size(); ++j)
        if (names[j].empty()) names[j] = std::to_string(j);
      fail(0, 0, std::string("time column: ") + UnknownNameError("column", requested, names).what());
    }
    time_factor_ = time_factor(columns_[*time_column_].unit);
    if (time_factor_ == 0)
      throw InputError(name_, header_line_, 0,
                       "time column " + quoted(columns_[*time_column_].name) + " has unit " +
                           quoted(columns_[*time_column_].unit) + " (expected h, min, s, ms, us, ns or ps)");
    return;
  }
  if (columns_.size() < 2) return;  // a lone column is data
  if (has_header) {
    for (std::size_t j = 0; j < columns_.size(); ++j) {
      const double factor = time_factor(columns_[j].unit);
      const bool by_unit = !columns_[j].unit.empty() && factor > 0;
      const bool by_name = is_time_name(columns_[j].name) && factor > 0;
      if (by_unit || by_name) {
        time_column_ = j;
        time_factor_ = factor;
        return;
      }
    }
    return;
  }
  // No header: the first column is time if it increases uniformly over the first rows.
  TimeCheck check(layout_.dialect.decimal, 1);
  std::vector<Field> fields;
  for (std::size_t i = layout_.data; i < content.size() && check.count() < kTimeHeuristicRows; ++i) {
    if (!split_fields(content[i]->text, layout_.dialect, fields) || fields.empty()) return;
    double t;
    if (parse_field(fields[0].text, layout_.dialect.decimal, t) != NumberStatus::ok) return;
    if (check.add(t, field_view(content[i]->text, fields[0])) != TimeCheck::Verdict::ok) return;
  }
  if (check.count() >= 2) {
    time_column_ = 0;
    time_guessed_ = true;
  }
}

Capture Parser::run() {
  if (!std::isfinite(options_.rate_hz) || options_.rate_hz < 0)
    throw OptionError("rate_hz", format_shortest(options_.rate_hz),
                      "must be > 0, or 0 to take the rate from the file");
  capture_.source = name_;
  capture_.format = "csv";
  std::size_t start = 0;
  if (text_.substr(0, 3) == "\xEF\xBB\xBF") start = 3;
  if (text_.find_first_not_of(" \t\r\n", start) == std::string_view::npos) fail(0, 0, "the file is empty");

  // Sample the first lines for detection.
  std::vector<SampleLine> sample;
  // Set when detection stopped at its line or byte limit with text left: "no data rows"
  // then means "none within the limit", and the message must say so.
  std::string sample_limit;
  {
    LineCursor cursor(text_, start, 0);
    Line line;
    std::size_t content_lines = 0;
    while (content_lines < kSampleLines && cursor.position() - start < kSampleBytes && cursor.next(line)) {
      const LineKind kind = classify(line.text);
      if (kind == LineKind::blank) continue;
      sample.push_back({line, kind == LineKind::comment});
      if (kind == LineKind::content) ++content_lines;
    }
    if (cursor.position() < text_.size())
      sample_limit = content_lines >= kSampleLines
                         ? "the first " + std::to_string(kSampleLines) + " lines"
                         : "the first " + std::to_string(kSampleBytes >> 20) + " MiB";
  }
  const auto no_rows_in_sample = [&] {
    fail(0, 0,
         "no data rows within " + sample_limit +
             ", where the data are looked for: the preamble (header text above the data) exceeds "
             "that limit; shorten it");
  };
  std::vector<const Line*> content;
  for (const auto& s : sample)
    if (!s.comment) content.push_back(&s.line);
  if (content.empty() && !sample_limit.empty()) no_rows_in_sample();
  if (content.empty()) fail(0, 0, "no data rows (the file holds only comments)");
  if (text_.find('\n') == std::string_view::npos && text_.find('\r') != std::string_view::npos)
    fail(0, 0, "lines end in a lone carriage return (CR); convert the line ends to LF or CRLF");

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
  if (!best) {
    if (!sample_limit.empty()) no_rows_in_sample();
    const Line& last = *content.back();
    if (content.size() == 1) fail(0, 0, "no data rows below the header on line " + std::to_string(last.number));
    fail(0, 0,
         "no data rows: no line holds only numbers separated by commas, semicolons, tabs or "
         "spaces (the last line, " + std::to_string(last.number) + ", reads " + quoted(trim(last.text)) + ")");
  }
  layout_ = best->layout;
  const Dialect& d = layout_.dialect;

  // Columns: names and units from the header (and units row), else ch0, ch1, ….
  columns_.resize(layout_.columns);
  std::vector<Field> fields, header_fields;
  if (layout_.header) {
    const Line& h = *content[*layout_.header];
    header_line_ = h.number;
    split_fields(h.text, d, header_fields);
    for (std::size_t j = 0; j < columns_.size(); ++j) {
      auto nu = split_name_unit(header_fields[j].text);
      columns_[j].name = nu.name;
      columns_[j].unit = normal_unit(nu.unit);
    }
    if (layout_.units) {
      split_fields(content[*layout_.units]->text, d, fields);
      for (std::size_t j = 0; j < columns_.size() && j < fields.size(); ++j) {
        std::string_view u = trim(fields[j].text);
        if (u.size() >= 2 && (u.front() == '(' || u.front() == '[')) u = u.substr(1, u.size() - 2);
        if (columns_[j].unit.empty()) columns_[j].unit = normal_unit(u);
      }
    }
  }
  choose_time_column(content, layout_.header.has_value());
  {
    std::size_t channel = 0;
    for (std::size_t j = 0; j < columns_.size(); ++j) {
      if (time_column_ && j == *time_column_) continue;
      if (columns_[j].name.empty()) columns_[j].name = "ch" + std::to_string(channel);
      columns_[j].channel = static_cast<int>(channel++);
    }
    if (time_column_ && columns_[*time_column_].name.empty()) columns_[*time_column_].name = "time";
    std::unordered_set<std::string_view> seen;  // linear: wide files have 10^5 columns
    for (std::size_t b = 0; b < columns_.size(); ++b)
      if (!seen.insert(columns_[b].name).second)
        fail(header_line_, header_fields.size() > b ? header_fields[b].column : 0,
             "column name " + quoted(columns_[b].name) + " appears twice");
    if (channel == 0) fail(header_line_, 0, "no data columns besides the time column");
  }

  // Metadata: every preamble line and comment above the data, in file order.
  const std::size_t data_line = content[layout_.data]->number;
  const std::size_t header_number = layout_.header ? content[*layout_.header]->number : data_line;
  const std::size_t units_number = layout_.units ? content[*layout_.units]->number : 0;
  std::optional<StatedRate> stated;
  for (const auto& s : sample) {
    if (s.line.number >= data_line) break;
    if (s.line.number == header_number || s.line.number == units_number) continue;
    if (!s.comment && s.line.number > header_number) continue;
    auto entry = metadata_entry(s.line.text, d, s.comment);
    if (!stated && entry.first != "text") {
      if (const RateKey key = rate_key(entry.first); key != RateKey::none)
        stated = parse_stated_rate(key, entry.second, d.decimal, s.line.number, name_);
    }
    if (auto units = preamble_units(entry); !units.empty()) apply_preamble_units(units);
    capture_.metadata.push_back(std::move(entry));
  }

  // Channels, reserved to the number of lines left (an upper bound on the rows), so the
  // sample vectors never reallocate.
  const std::size_t data_offset = content[layout_.data]->offset;
  std::size_t rows_bound = 1;
  for (std::size_t at = data_offset; at < text_.size();) {
    const std::size_t stop = std::min(text_.size(), (at / kReleaseBytes + 1) * kReleaseBytes);
    rows_bound += count_newlines(text_.data() + at, text_.data() + stop);
    at = stop;
    if (release_ && stop < text_.size()) release_(stop);
  }
  if (release_) release_(0);  // nothing before the data is needed again
  std::size_t channels = 0;
  for (const auto& c : columns_)
    if (c.channel >= 0) ++channels;
  // Every line left may be a row: the samples reserved below are that bound times the channels.
  if (const auto over = over_memory_budget(static_cast<double>(rows_bound) * static_cast<double>(channels) * 8.0))
    fail(0, 0,
         std::to_string(rows_bound) + " lines × " + std::to_string(channels) + " channels of samples need " + *over);
  capture_.channels.resize(channels);
  for (const auto& c : columns_) {
    if (c.channel < 0) continue;
    auto& ch = capture_.channels[static_cast<std::size_t>(c.channel)];
    ch.name = c.name;
    ch.unit = c.unit;
    ch.samples.reserve(rows_bound);
  }
  check_time_ = time_column_.has_value() && options_.rate_hz == 0;
  time_ = TimeCheck(d.decimal, time_factor_);
  first_data_line_ = data_line;
  parse_rows(data_offset, data_line - 1);

  // Rate and t0.
  if (time_column_) capture_.t0_s = time_.first();
  if (options_.rate_hz > 0) {
    capture_.sample_rate_hz = options_.rate_hz;
    capture_.time_base.source = TimeBase::Source::rate_option;
  } else if (time_column_ && time_.count() >= 2) {
    capture_.sample_rate_hz = time_.rate_hz();
    capture_.time_base = time_.regularity();
    capture_.time_base.source = TimeBase::Source::time_column;
    if (stated) {
      const double tolerance = kStatedRateAgreement + time_.rate_rounding();
      if (std::fabs(stated->rate_hz - capture_.sample_rate_hz) > tolerance * capture_.sample_rate_hz)
        fail(stated->line, 0,
             "the stated sample rate " + quoted(stated->text) + " (" +
                 format_significant(stated->rate_hz) + " Hz) disagrees with the time column (" +
                 format_significant(capture_.sample_rate_hz) + " Hz); give --rate HZ to choose");
    }
  } else if (stated) {
    capture_.sample_rate_hz = stated->rate_hz;
    capture_.time_base.source = TimeBase::Source::preamble;
  } else {
    fail(0, 0,
         std::string("no sample rate: ") +
             (time_column_ ? "the time column has a single row"
                           : "no time column and no sample interval or rate in the preamble") +
             "; give it with --rate HZ");
  }
  return std::move(capture_);
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

// A file cut shorter while it is mapped (another process truncating it, a network share going
// away) makes every access past the new end raise SIGBUS. The guard below catches that for the
// mappings registered here: it maps zero pages over the rest of the mapping (mmap is a plain
// system call, safe in practice inside the handler), marks the mapping truncated and returns,
// so the parse runs on to its end and read_csv reports the truncation as an input error.
// Faults outside our mappings get the default action.
constexpr std::size_t kGuardSlots = 64;
struct GuardSlot {
  std::atomic<char*> base{nullptr};
  std::atomic<std::size_t> size{0};
  std::atomic<bool> truncated{false};
};
std::array<GuardSlot, kGuardSlots> g_guarded;
struct sigaction g_previous_sigbus {};

extern "C" void on_mapped_file_sigbus(int signal_number, siginfo_t* info, void* context) {
  char* const fault = static_cast<char*>(info->si_addr);
  for (auto& slot : g_guarded) {
    char* const base = slot.base.load();
    const std::size_t size = slot.size.load();
    if (base && fault >= base && fault < base + size) {
      const auto page = static_cast<std::uintptr_t>(::sysconf(_SC_PAGESIZE));
      char* const from = reinterpret_cast<char*>(reinterpret_cast<std::uintptr_t>(fault) / page * page);
      ::mmap(from, static_cast<std::size_t>(base + size - from), PROT_READ,
             MAP_PRIVATE | MAP_ANONYMOUS | MAP_FIXED, -1, 0);
      slot.truncated.store(true);
      return;
    }
  }
  if (g_previous_sigbus.sa_flags & SA_SIGINFO) {
    g_previous_sigbus.sa_sigaction(signal_number, info, context);
    return;
  }
  std::signal(signal_number, SIG_DFL);
  std::raise(signal_number);
}

void install_sigbus_guard() {
  static std::once_flag once;
  std::call_once(once, [] {
    struct sigaction action {};
    action.sa_sigaction = on_mapped_file_sigbus;
    sigemptyset(&action.sa_mask);
    action.sa_flags = SA_SIGINFO;
    ::sigaction(SIGBUS, &action, &g_previous_sigbus);
  });
}

// A read-only mapping of a regular file; pages behind the parse are given back.
class MappedFile {
 public:
  MappedFile(const MappedFile&) = delete;
  MappedFile& operator=(const MappedFile&) = delete;
  MappedFile(void* base, std::size_t size) : base_(base), size_(size) {
    install_sigbus_guard();
    for (std::size_t i = 0; i < kGuardSlots; ++i) {
      char* expected = nullptr;
      if (g_guarded[i].base.compare_exchange_strong(expected, static_cast<char*>(base))) {
        g_guarded[i].truncated.store(false);
        g_guarded[i].size.store(size);
        slot_ = i;
        break;
      }
    }
  }
  ~MappedFile() {
    if (slot_ < kGuardSlots) {
      g_guarded[slot_].size.store(0);
      g_guarded[slot_].base.store(nullptr);
    }
    if (base_) ::munmap(base_, size_);
  }
  /// True once an access found the file shorter than when it was mapped.
  bool truncated() const { return slot_ < kGuardSlots && g_guarded[slot_].truncated.load(); }
  std::string_view text() const { return {static_cast<const char*>(base_), size_}; }
  void release_before(std::size_t offset) {
    const auto page = static_cast<std::size_t>(::sysconf(_SC_PAGESIZE));
    const std::size_t end = offset / page * page;
    if (end > released_) {
      ::madvise(static_cast<char*>(base_) + released_, end - released_, MADV_DONTNEED);
      released_ = end;
    }
  }
  void release_all() {
    ::madvise(base_, size_, MADV_DONTNEED);
    released_ = 0;
  }

 private:
  void* base_;
  std::size_t size_;
  std::size_t released_ = 0;
  std::size_t slot_ = kGuardSlots;  ///< guard slot; kGuardSlots = unguarded (all slots busy)
};

}  // namespace

// Runs the parser; a line split into more than kMaxColumns fields becomes an InputError at the
// first line that holds that many separators of one kind.
Capture run_bounded(std::string_view text, std::string_view name, const CsvOptions& options, const Release& release) {
  try {
    return Parser(text, name, options, release).run();
  } catch (const TooManyFields&) {
    std::size_t line = 1;
    for (std::size_t at = 0; at < text.size();) {
      const std::size_t end = std::min(text.find('\n', at), text.size());
      const std::string_view row = text.substr(at, end - at);
      for (const char separator : {',', ';', '\t', ' '})
        if (static_cast<std::size_t>(std::count(row.begin(), row.end(), separator)) >= kMaxColumns)
          throw InputError(std::string(name), line, 0,
                           "more than " + std::to_string(kMaxColumns) +
                               " columns (the most periodfit reads; io/csv_reader.cpp)");
      at = end + 1;
      ++line;
    }
    throw InputError(std::string(name), 0, 0,
                     "a line has more than " + std::to_string(kMaxColumns) + " columns (the most periodfit reads)");
  }
}

Capture parse_csv(std::string_view text, std::string_view name, const CsvOptions& options) {
  const Release none;
  return run_bounded(text, name, options, none);
}

Capture read_csv(const std::string& path, const CsvOptions& options) {
  const int fd = ::open(path.c_str(), O_RDONLY | O_CLOEXEC);
  if (fd < 0) throw IoError(path, "cannot open", errno);
  struct stat info {};
  if (::fstat(fd, &info) != 0) {
    const int e = errno;
    ::close(fd);
    throw IoError(path, "cannot read", e);
  }
  if (S_ISDIR(info.st_mode)) {
    ::close(fd);
    throw IoError(path, "cannot read", EISDIR);
  }
  if (!S_ISREG(info.st_mode) || info.st_size == 0) {
    // Pipes and devices have no size to map; an empty file has nothing to map.
    ::close(fd);
    const std::string bytes = read_file(path, max_piped_capture_bytes());
    return parse_csv(bytes, path, options);
  }
  const auto size = static_cast<std::size_t>(info.st_size);
  void* base = ::mmap(nullptr, size, PROT_READ, MAP_PRIVATE, fd, 0);
  const int map_errno = errno;
  ::close(fd);
  if (base == MAP_FAILED) throw IoError(path, "cannot read", map_errno);
  MappedFile file(base, size);
  ::madvise(base, size, MADV_SEQUENTIAL);
  // Detection reads the start again after the row count, so only the pages after the sample
  // are given back during the count; the parse then releases everything behind it.
  const Release release = [&file](std::size_t offset) {
    if (offset == 0) file.release_all();
    else file.release_before(offset);
  };
  const auto truncated_error = [&] {
    return InputError(path, 0, 0, "the file became shorter while it was being read (" +
                                      std::to_string(size) + " bytes when opened); read it again once it is complete");
  };
  try {
    Capture capture = run_bounded(file.text(), path, options, release);
    if (file.truncated()) throw truncated_error();
    return capture;
  } catch (const Error&) {
    // Zero pages stand in for the lost tail, so the parse may have failed on them: the
    // truncation is the real cause.
    if (file.truncated()) throw truncated_error();
    throw;
  }
}

}  // namespace periodfit::io
