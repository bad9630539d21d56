#pragma once
/// Internal to the CSV reader (io/csv_reader.hpp): the parser's state, shared by its two
/// halves — csv_reader.cpp sets it up (detection, columns, metadata, the rate) and csv_rows.cpp
/// parses the rows into it. Not installed (cmake/InstallHeaders.cmake copies src/io/*.hpp, not
/// this folder).
#include <cstddef>
#include <optional>
#include <string>
#include <string_view>
#include <vector>

#include "core/capture.hpp"
#include "core/error.hpp"
#include "io/csv_reader.hpp"
#include "io/internal/csv_dialect.hpp"
#include "io/internal/csv_rows.hpp"
#include "io/internal/csv_text.hpp"
#include "io/internal/csv_units.hpp"

namespace periodfit::io::csv {

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
  // The set-up, in csv_reader.cpp, in the order run() calls it.
  [[noreturn]] void no_rows_in_sample(const std::string& limit) const;
  void choose_layout(const std::vector<const Line*>& content, const std::string& sample_limit);
  void name_columns(const std::vector<const Line*>& content);
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
  std::optional<StatedRate> read_metadata(const std::vector<SampleLine>& sample,
                                          const std::vector<const Line*>& content);
  void reserve_channels(std::size_t data_offset);
  void settle_rate(const std::optional<StatedRate>& stated);
  // The rows, in csv_rows.cpp.
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

}  // namespace periodfit::io::csv
