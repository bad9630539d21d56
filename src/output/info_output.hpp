#pragma once
/// The renderings of a capture description (io/info.hpp): the info JSON document
/// (docs/info-json.md) and the text for people.
#include <string>
#include <vector>

#include <nlohmann/json.hpp>

#include "io/info.hpp"

namespace periodfit::output {

/// One file's entry of the info JSON (docs/info-json.md).
nlohmann::ordered_json info_json(const io::CaptureInfo& info);

/// The whole info document: {"periodfit_info": 1, "files": [...]}.
nlohmann::ordered_json info_json(const std::vector<io::CaptureInfo>& files);

/// The aligned text block for one file, every line ending in '\n'.
std::string info_text(const io::CaptureInfo& info);

}  // namespace periodfit::output
