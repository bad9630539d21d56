#pragma once
/// Size and nesting limits of the structured text inputs (model file JSON, batch config TOML,
/// amplitude-spectrum file), checked by a linear scan BEFORE a recursive parser sees the text.
///
/// Why: the JSON and TOML libraries parse, copy and destroy nested values recursively, one stack
/// frame per level; 50 000 nested arrays or a 50 000-part dotted key overflow the stack (exit
/// 139, issue 11, class 1). No file periodfit reads or writes nests deeper than 4 levels or uses
/// dotted keys longer than 3 parts, so the limits below leave a wide margin for hand-written
/// files while keeping any recursion a few hundred frames deep at most.
///
/// Usage:
///   check_json_nesting(text, "dut.model.json");   // InputError "dut.model.json:1:130: …"
///   check_toml_nesting(text, "limits.toml");
#include <cstddef>
#include <string_view>

namespace periodfit::io {

/// Largest model file, batch config or spectrum file read whole into memory: 64 MiB. A model
/// file with 100 000 stored FRF points is about 15 MB; a config is a few kB.
inline constexpr std::size_t kMaxTextFileBytes = std::size_t{64} << 20;

/// Deepest nesting of JSON arrays/objects and of TOML arrays/inline tables.
inline constexpr int kMaxNestingDepth = 64;

/// Most parts in one dotted TOML key (`a.b.c` has 3); each part is one more table level.
inline constexpr int kMaxDottedKeyParts = 64;

/// Most bytes of a capture read from a pipe or device (`info /dev/zero`, `… | periodfit analyze -`):
/// such input has no size to check first and is held whole before parsing, and a 2-byte number
/// ("1,") becomes an 8-byte double, so text plus samples take up to 5× the text. A fifth of the
/// memory budget (core/memory_budget.hpp) keeps the whole read inside it.
std::size_t max_piped_capture_bytes();

/// Throws InputError(name, line, column) at the first bracket that opens a level beyond
/// `max_depth` (outside strings). Does not validate anything else: the parser does that.
void check_json_nesting(std::string_view text, std::string_view name, int max_depth = kMaxNestingDepth);

/// Throws InputError(name, line, column) at the first array/inline table beyond
/// kMaxNestingDepth, or the first dotted key (in a key/value line or a table header) with more
/// than kMaxDottedKeyParts parts. Strings and comments are skipped as TOML 1.0 defines them.
void check_toml_nesting(std::string_view text, std::string_view name);

}  // namespace periodfit::io
