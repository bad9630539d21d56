#pragma once
/// The renderings of a steady-state prediction (predict/superposition.hpp): the text report,
/// the samples CSV and the JSON document of docs/steady-state-json.md.
#include <string>

#include <nlohmann/json.hpp>

#include "predict/superposition.hpp"

namespace periodfit::output {

/// `time_s,value[,value_u]` lines (docs/steady-state-json.md), doubles shortest round-trip.
std::string format_predict_csv(const predict::PredictResult& result);

/// The text report for people: a key/value summary and the harmonic table (first
/// `list_harmonics` harmonics, 0 = all), every line ending in '\n'.
std::string predict_text(const predict::PredictResult& result, std::size_t list_harmonics = 0);

/// The JSON document of docs/steady-state-json.md (keys in that order).
nlohmann::ordered_json predict_json(const predict::PredictResult& result);

}  // namespace periodfit::output
