#pragma once
/// Reading CSV-like text exported by oscilloscopes, loggers and scripts, with no flags: the
/// delimiter, decimal mark, preamble, header, units and time column are recognised from the
/// text. docs/capture-formats.md states every rule; in short:
///
/// - delimiter: comma, semicolon, tab or runs of spaces; decimal comma with `;` or tab;
/// - a UTF-8 byte-order mark, CRLF or LF line ends, `#` comment lines and blank lines;
/// - fields may be quoted ("…", with "" for a quote); trailing empty columns are ignored;
/// - lines before the header are metadata (`key,value…`, `key: value`, or free text kept
///   under the key "text"); a key containing interval / increment / rate / fs gives the rate;
/// - the header names the columns, with optional units `v_out (V)`, `v_out [V]`, `v_out/V`,
///   optionally followed by a row of units (`second,Volt`); without a header the data columns
///   are ch0, ch1, …;
/// - a time column (named t, time, …, or with a time unit, or, without a header, a first
///   column that increases uniformly over the first rows) gives t0 and the rate; its spacing
///   must be uniform within 1e-4 relative (beyond the rounding of the printed values);
/// - every cell must be a finite number: NaN, Inf, empty cells and ragged rows are errors that
///   name file:line:column and quote the text found.
///
/// Usage:
///   Capture c = parse_csv("t,v (V)\n0,1\n0.001,2\n", "test.csv");  // tests feed strings
///   Capture d = read_csv("scope_07.csv");                          // files stream from disk
#include <string>
#include <string_view>

#include "core/capture.hpp"

namespace periodfit::io {

struct CsvOptions {
  /// 0 = take the rate from the time column or the preamble (error if neither); > 0 = use this
  /// rate; the time column then only gives t0 and its spacing is not checked.
  double rate_hz = 0;
  /// "" = detect the time column; "none" = the file has none (every column is data); else the
  /// header name or the 0-based position (among all columns) of the time column.
  std::string time_column;
};

/// Parses CSV `text`; `name` is used in messages and as Capture::source. Throws InputError
/// (name:line:column) for bad content and OptionError for invalid `options`.
Capture parse_csv(std::string_view text, std::string_view name, const CsvOptions& options = {});

/// Reads and parses the file at `path` without holding a copy of its text: the file is mapped
/// (io/mapped_file.hpp, once install_mapped_file_guard has run) and the pages already parsed are released as the
/// parse advances. Throws IoError for a
/// missing, unreadable or directory path.
Capture read_csv(const std::string& path, const CsvOptions& options = {});

}  // namespace periodfit::io
