#pragma once
/// Internal to the CSV reader (io/csv_reader.hpp): the dialect — delimiter, decimal mark,
/// quoting — and the layout — preamble, header, units row, first data line — recognised from
/// the first lines of the text (docs/capture-formats.md states the rules), the field splitter
/// the row parser shares, and the preamble's metadata entries.
/// Not installed (cmake/InstallHeaders.cmake copies src/io/*.hpp, not this folder).
#include <cstddef>
#include <cstring>
#include <optional>
#include <string>
#include <string_view>
#include <utility>
#include <vector>

namespace periodfit::io::csv {

// Most columns a capture may have: ten times the 10^5 columns the catalogue imports
// (docs/robustness.md, entry 14), while every column costs ~230 B of bookkeeping (name, unit, a
// field per dialect tried, a channel) before its first sample: a one-row file of 5·10^6 columns
// took 1.15 GB before this bound (issue 11, class 5); 2^20 columns cost ~250 MB. Checked while
// a line is split, so a wider line is refused before its fields are held.
constexpr std::size_t kMaxColumns = std::size_t{1} << 20;
// Thrown by split_fields past kMaxColumns; turned into an InputError naming the line.
struct TooManyFields {};

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

LineKind classify(std::string_view text);

struct Dialect {
  char delimiter;  ///< ' ' = runs of spaces and tabs
  char decimal;
};
inline constexpr Dialect kDialects[] = {{',', '.'},  {';', ','},  {';', '.'},
                                 {'\t', '.'}, {'\t', ','}, {' ', '.'}};

struct Field {
  std::string text;
  std::size_t column = 0;  ///< 1-based byte column of the field's first character
  bool quoted = false;
};

inline bool skippable(char c, const Dialect& d) { return c == ' ' || (c == '\t' && d.delimiter != '\t'); }

/// Splits one line into fields. False for a quote that is not closed or is followed by text;
/// throws TooManyFields past kMaxColumns.
bool split_fields(std::string_view s, const Dialect& d, std::vector<Field>& out);
/// The number of fields without the trailing empty (unquoted) ones.
std::size_t stripped_count(const std::vector<Field>& fields);
/// The text of an unquoted or quoted field as a view into its line (fields own copies).
std::string_view field_view(std::string_view line, const Field& f);

struct SampleLine {
  Line line;
  bool comment = false;
};

/// The first lines, where detection looks: every comment and content line (blank lines left
/// out) up to a line and a byte limit.
struct Sample {
  std::vector<SampleLine> lines;
  /// Set when the limit stopped the sample with text left ("the first 2000 lines"): "no data
  /// rows" then means "none within the limit", and the message must say so.
  std::string limit;
};
Sample sample_lines(std::string_view text, std::size_t start);

struct Layout {
  Dialect dialect{',', '.'};
  std::size_t data = 0;            ///< index into content lines of the first data line
  std::optional<std::size_t> header;
  std::optional<std::size_t> units;
  std::size_t columns = 0;
};

/// The dialect of kDialects under which most `content` lines read as rows of numbers (then a
/// header that fits, then more columns; ties to the earlier dialect), or none when no line does.
std::optional<Layout> detect_layout(const std::vector<const Line*>& content);

/// One preamble line → a metadata entry (key, value); free text gets the key "text".
std::pair<std::string, std::string> metadata_entry(std::string_view text, const Dialect& d, bool comment);

}  // namespace periodfit::io::csv
