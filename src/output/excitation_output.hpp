#pragma once
/// The outputs of an excitation (predict/excitation.hpp): the signal file (WAV through
/// io/audio_writer, or CSV samples), the text summary and the JSON of docs/excite.md.
#include <string>

#include <nlohmann/json.hpp>

#include "predict/excitation.hpp"

namespace periodfit::output {

/// The bytes write_excitation writes (`path` names the destination in messages), for a caller
/// that publishes several outputs together (io/output_set.hpp).
std::string excitation_bytes(const predict::ExciteResult& result, const std::string& path);

/// Writes the WAV (libsndfile) or CSV `time_s,value` (`time_s,value_1,…` for several channels)
/// file; path "-" = stdout. Atomic.
void write_excitation(const std::string& path, const predict::ExciteResult& result);

/// The text summary for people, every line ending in '\n'.
std::string excitation_text(const predict::ExciteResult& result);

/// The JSON summary of docs/excite.md.
nlohmann::ordered_json excitation_json(const predict::ExciteResult& result);

}  // namespace periodfit::output
