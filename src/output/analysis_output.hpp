#pragma once
/// The outputs of `periodfit analyze`, reused by batch: the JSON document (schema in
/// docs/analyze-json.md), the harmonics CSV and the aligned text report for people.
/// Doubles are written shortest round-trip; figures that are undefined (a zero fundamental
/// makes THD infinite) are written as JSON null and "undefined" in text, never as a number.
#include <cstddef>
#include <string>
#include <vector>

#include <nlohmann/json.hpp>

#include "dsp/capture_analysis.hpp"

namespace periodfit::output {

/// One channel's JSON object (keys in the documented order).
nlohmann::ordered_json channel_json(const dsp::ChannelAnalysis& channel);
/// The whole document: capture description, then "channels".
nlohmann::ordered_json analyze_json(const dsp::AnalyzeReport& report);
/// Harmonics table, one row per channel and harmonic:
/// channel,unit,n,freq_hz,amplitude,amplitude_u,phase_deg,phase_u_deg,significant
std::string harmonics_csv(const dsp::AnalyzeReport& report);
/// Aligned text for a terminal: per channel a summary block and the harmonics table.
std::string analyze_text(const dsp::AnalyzeReport& report);

}  // namespace periodfit::output
