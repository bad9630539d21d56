#include "io/input_limits.hpp"

#include <string>

#include "core/error.hpp"
#include "core/memory_budget.hpp"

namespace periodfit::io {

namespace {

/// Line and column (1-based) of byte `at`, counted only when a limit is hit.
struct Position {
  std::size_t line = 1, column = 1;
};
Position position_of(std::string_view text, std::size_t at) {
  Position p;
  for (std::size_t i = 0; i < at && i < text.size(); ++i) {
    if (text[i] == '\n') {
      ++p.line;
      p.column = 1;
    } else {
      ++p.column;
    }
  }
  return p;
}

[[noreturn]] void too_deep(std::string_view text, std::string_view name, std::size_t at, const std::string& what) {
  const Position p = position_of(text, at);
  throw InputError(std::string(name), p.line, p.column, what);
}

std::string depth_message(int limit) {
  return "nested more than " + std::to_string(limit) + " levels deep (the limit for periodfit's input files)";
}

}  // namespace

std::size_t max_piped_capture_bytes() { return static_cast<std::size_t>(memory_budget_bytes() / 5); }

void check_json_nesting(std::string_view text, std::string_view name, int max_depth) {
  int depth = 0;
  for (std::size_t i = 0; i < text.size(); ++i) {
    const char c = text[i];
    if (c == '"') {
      // Skip the string; a backslash escapes the next byte (RFC 8259 §7).
      for (++i; i < text.size() && text[i] != '"'; ++i)
        if (text[i] == '\\') ++i;
    } else if (c == '[' || c == '{') {
      if (++depth > max_depth) too_deep(text, name, i, depth_message(max_depth));
    } else if ((c == ']' || c == '}') && depth > 0) {
      --depth;
    }
  }
}

void check_toml_nesting(std::string_view text, std::string_view name) {
  int depth = 0;
  int dots = 0;  // dots since the last separator: parts of a dotted key − 1
  for (std::size_t i = 0; i < text.size(); ++i) {
    const char c = text[i];
    const bool triple = i + 2 < text.size() && text[i + 1] == c && text[i + 2] == c;
    if (c == '#') {
      while (i < text.size() && text[i] != '\n') ++i;
      dots = 0;
    } else if (c == '"' || c == '\'') {
      // Basic strings take backslash escapes, literal strings do not (TOML 1.0, "String").
      const bool basic = c == '"';
      if (triple) {
        for (i += 3; i < text.size(); ++i) {
          if (basic && text[i] == '\\') {
            ++i;
          } else if (text[i] == c && i + 2 < text.size() && text[i + 1] == c && text[i + 2] == c) {
            i += 2;
            // Up to two more quotes may close the content ("""a"""" is legal).
            while (i + 1 < text.size() && text[i + 1] == c) ++i;
            break;
          }
        }
      } else {
        for (++i; i < text.size() && text[i] != c && text[i] != '\n'; ++i)
          if (basic && text[i] == '\\') ++i;
      }
    } else if (c == '.') {
      if (++dots >= kMaxDottedKeyParts)
        too_deep(text, name, i,
                 "a dotted key with more than " + std::to_string(kMaxDottedKeyParts) +
                     " parts (the limit for periodfit's config files)");
    } else if (c == '[' || c == '{') {
      if (++depth > kMaxNestingDepth) too_deep(text, name, i, depth_message(kMaxNestingDepth));
      dots = 0;
    } else if (c == ']' || c == '}') {
      if (depth > 0) --depth;
      dots = 0;
    } else if (c == '=' || c == ',' || c == '\n') {
      dots = 0;
    }
  }
}

}  // namespace periodfit::io
