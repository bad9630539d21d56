#pragma once
/// Text from inputs (channel names, metadata, cells, paths, error messages quoting them) made
/// safe for where it is shown: a terminal, or a spreadsheet opening a CSV file
/// (docs/robustness.md, issue 11 class 9).
///
/// Terminal: control characters would move the cursor, retitle the window or ring the bell
/// (ESC sequences, BEL, CR overwriting the line). terminal_text shows every C0 control byte
/// (0x00–0x1F), DEL (0x7F) and every C1 control (U+0080–U+009F, which some terminals obey as
/// 8-bit CSI) as `\xHH` with the byte's hex value (C1: the code point, `\x9b`); `\n` is kept
/// in multi-line documents and shown as `\n` in one-line messages, tab likewise. Everything
/// else, UTF-8 included, is left as it is; invalid UTF-8 bytes above 0x7F pass unchanged (the
/// terminal shows a replacement glyph, it does not act on them).
///
/// CSV: a spreadsheet evaluates a cell starting with `=`, `+`, `-` or `@` as a formula, and
/// TAB or CR at the start can hide one (OWASP "CSV injection"). csv_cell prefixes such a text
/// cell with a single quote `'`, the common practice for CSV written for spreadsheets, and then
/// applies RFC 4180 quoting. A cell that is a number (`-1.5`, `+3e-2`, `-inf`) is a value,
/// not a formula, and stays as it is.
///
/// Usage:
///   std::fprintf(stderr, "periodfit: error: %s\n", terminal_text(e.what(), false).c_str());
///   csv += csv_cell(channel.name) + ",";
#include <string>
#include <string_view>

namespace periodfit {

/// `text` with control characters shown as `\xHH` (see the header); `multi_line` keeps `\n`
/// and `\t` as they are (documents, tables), otherwise they are shown as `\n` and `\t`.
std::string terminal_text(std::string_view text, bool multi_line = true);

/// One CSV field: a formula-leading text cell prefixed with `'`, then quoted (RFC 4180) when
/// it holds a comma, quote, CR or LF. Numbers are left as they are.
std::string csv_cell(std::string_view text);

}  // namespace periodfit
