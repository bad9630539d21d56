#include "io/csv_reader.hpp"

#include <charconv>
#include <cmath>
#include <unordered_set>

#include "core/error.hpp"
#include "core/memory_budget.hpp"
#include "core/number_format.hpp"
#include "io/file_handle.hpp"
#include "io/internal/csv_parser.hpp"
#include "io/mapped_file.hpp"
#include "io/output_file.hpp"

// The reader in four parts along the seams of its job: dialect and layout detection
// (csv_dialect.cpp), column units and scales (csv_units.cpp), the rows (csv_rows.cpp), and here
// the parse's set-up — columns, the time column, metadata, the rate — and the file's mapping.
namespace periodfit::io {

namespace csv {

namespace {

// A rate stated in the preamble and the time column's must agree to this (relative), plus the
// rounding of the time column's first and last values. Instruments print the interval to 4 or
// more significant digits (rounding <= 5e-4) or exactly ("1e-05"), whose digits cannot be
// judged, so a fixed bound is used.
constexpr double kStatedRateAgreement = 1e-3;
// Without a header, a first column is time only if it increases uniformly over these rows.
constexpr std::size_t kTimeHeuristicRows = 64;

}  // namespace

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

// The parse: detection on a sample of the first lines, then the columns and the preamble's
// metadata, then the rows, then the rate.
Capture Parser::run() {
  if (!std::isfinite(options_.rate_hz) || options_.rate_hz < 0)
    throw OptionError("rate_hz", format_shortest(options_.rate_hz),
                      "must be > 0, or 0 to take the rate from the file");
  capture_.source = name_;
  capture_.format = "csv";
  std::size_t start = 0;
  if (text_.substr(0, 3) == "\xEF\xBB\xBF") start = 3;
  if (text_.find_first_not_of(" \t\r\n", start) == std::string_view::npos) fail(0, 0, "the file is empty");

  const Sample sample = sample_lines(text_, start);
  std::vector<const Line*> content;
  for (const auto& s : sample.lines)
    if (!s.comment) content.push_back(&s.line);
  choose_layout(content, sample.limit);
  name_columns(content);
  const std::size_t data_line = content[layout_.data]->number;
  const std::optional<StatedRate> stated = read_metadata(sample.lines, content);
  const std::size_t data_offset = content[layout_.data]->offset;
  reserve_channels(data_offset);
  check_time_ = time_column_.has_value() && options_.rate_hz == 0;
  time_ = TimeCheck(layout_.dialect.decimal, time_factor_);
  first_data_line_ = data_line;
  parse_rows(data_offset, data_line - 1);
  settle_rate(stated);
  return std::move(capture_);
}

void Parser::no_rows_in_sample(const std::string& limit) const {
  fail(0, 0,
       "no data rows within " + limit +
           ", where the data are looked for: the preamble (header text above the data) exceeds "
           "that limit; shorten it");
}

void Parser::choose_layout(const std::vector<const Line*>& content, const std::string& sample_limit) {
  if (content.empty() && !sample_limit.empty()) no_rows_in_sample(sample_limit);
  if (content.empty()) fail(0, 0, "no data rows (the file holds only comments)");
  if (text_.find('\n') == std::string_view::npos && text_.find('\r') != std::string_view::npos)
    fail(0, 0, "lines end in a lone carriage return (CR); convert the line ends to LF or CRLF");
  const std::optional<Layout> layout = detect_layout(content);
  if (!layout) {
    if (!sample_limit.empty()) no_rows_in_sample(sample_limit);
    const Line& last = *content.back();
    if (content.size() == 1) fail(0, 0, "no data rows below the header on line " + std::to_string(last.number));
    fail(0, 0,
         "no data rows: no line holds only numbers separated by commas, semicolons, tabs or "
         "spaces (the last line, " + std::to_string(last.number) + ", reads " + quoted(trim(last.text)) + ")");
  }
  layout_ = *layout;
}

// Columns: names and units from the header (and units row), else ch0, ch1, …; then the time
// column and the channel of every other column.
void Parser::name_columns(const std::vector<const Line*>& content) {
  const Dialect& d = layout_.dialect;
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

// Metadata: every preamble line and comment above the data, in file order; the first stated
// sample rate or interval among them is returned.
std::optional<StatedRate> Parser::read_metadata(const std::vector<SampleLine>& sample,
                                                const std::vector<const Line*>& content) {
  const Dialect& d = layout_.dialect;
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
  return stated;
}

// Channels, reserved to the number of lines left (an upper bound on the rows), so the
// sample vectors never reallocate.
void Parser::reserve_channels(std::size_t data_offset) {
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
}

// Rate and t0: the --rate option, else the time column (checked against a stated rate), else
// the preamble's.
void Parser::settle_rate(const std::optional<StatedRate>& stated) {
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
}

}  // namespace csv

namespace {

// Runs the parser; a line split into more than csv::kMaxColumns fields becomes an InputError at the
// first line that holds that many separators of one kind.
Capture run_bounded(std::string_view text, std::string_view name, const CsvOptions& options, const csv::Release& release) {
  try {
    return csv::Parser(text, name, options, release).run();
  } catch (const csv::TooManyFields&) {
    std::size_t line = 1;
    for (std::size_t at = 0; at < text.size();) {
      const std::size_t end = std::min(text.find('\n', at), text.size());
      const std::string_view row = text.substr(at, end - at);
      for (const char separator : {',', ';', '\t', ' '})
        if (static_cast<std::size_t>(std::count(row.begin(), row.end(), separator)) >= csv::kMaxColumns)
          throw InputError(std::string(name), line, 0,
                           "more than " + std::to_string(csv::kMaxColumns) +
                               " columns (the most periodfit reads; io/csv_reader.cpp)");
      at = end + 1;
      ++line;
    }
    throw InputError(std::string(name), 0, 0,
                     "a line has more than " + std::to_string(csv::kMaxColumns) + " columns (the most periodfit reads)");
  }
}

}  // namespace

Capture parse_csv(std::string_view text, std::string_view name, const CsvOptions& options) {
  const csv::Release none;
  return run_bounded(text, name, options, none);
}

Capture read_csv(const std::string& path, const CsvOptions& options) {
  FileHandle handle = FileHandle::open_readable(path);
  if (!handle.regular() || handle.size() == 0 || !mapped_file_guard_installed()) {
    // Pipes and devices have no size to map; an empty file has nothing to map; and without the
    // guard (installed by main, not by the library) a file cut short under the mapping would
    // kill the process, so it is read instead.
    handle.close();
    const std::string bytes = read_file(path, max_piped_capture_bytes());
    return parse_csv(bytes, path, options);
  }
  const auto size = static_cast<std::size_t>(handle.size());
  MappedFile file(handle);
  handle.close();
  // Detection reads the start again after the row count, so only the pages after the sample
  // are given back during the count; the parse then releases everything behind it.
  const csv::Release release = [&file](std::size_t offset) {
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
