#pragma once
/// The one way periodfit turns a JSON document into file text: two-space indent, keys in the
/// order they were inserted (ordered_json), a final newline, and bytes that are not valid
/// UTF-8 (file names, channel names or metadata from odd files) written as U+FFFD instead of
/// failing, so a result is never lost to a name.
#include <cmath>
#include <nlohmann/json.hpp>
#include <string>

namespace periodfit::output {

/// A finite double as a JSON number, NaN or an infinity as null: JSON has no non-finite
/// numbers, and a reader must see "undefined", never a made-up value.
inline nlohmann::ordered_json json_number(double value) {
  return std::isfinite(value) ? nlohmann::ordered_json(value) : nlohmann::ordered_json(nullptr);
}

inline std::string json_text(const nlohmann::ordered_json& document) {
  return document.dump(2, ' ', false, nlohmann::ordered_json::error_handler_t::replace) + "\n";
}

}  // namespace periodfit::output
