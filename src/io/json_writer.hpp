#pragma once
/// The one way periodfit turns a JSON document into file text: two-space indent, keys in the
/// order they were inserted (ordered_json), a final newline, and bytes that are not valid
/// UTF-8 (file names, channel names or metadata from odd files) written as U+FFFD instead of
/// failing, so a result is never lost to a name.
#include <nlohmann/json.hpp>
#include <string>

namespace periodfit::io {

inline std::string json_text(const nlohmann::ordered_json& document) {
  return document.dump(2, ' ', false, nlohmann::ordered_json::error_handler_t::replace) + "\n";
}

}  // namespace periodfit::io
