#pragma once
/// The outputs of `periodfit analyze`, reused by batch: the JSON document (schema in
/// docs/analyze-json.md), the harmonics CSV and the aligned text report for people.
/// Doubles are written shortest round-trip; figures that are undefined (a zero fundamental
/// makes THD infinite) are written as JSON null and "undefined" in text, never as a number.
#include <cstddef>
#include <string>
#include <vector>

#include <nlohmann/json.hpp>

#include "core/capture.hpp"
#include "dsp/harmonics.hpp"

namespace periodfit::dsp {

/// Everything analyze reports about one capture.
struct AnalyzeReport {
  std::string source;        ///< path the capture came from
  std::string format;        ///< importer's format name
  double sample_rate_hz = 0;
  double t0_s = 0;
  std::size_t samples = 0;   ///< per channel
  std::vector<ChannelAnalysis> channels;
};

/// Analyses the selected channels (names or 0-based indices; empty = every data channel) of
/// a capture. Throws UnknownNameError for an unknown channel and AnalysisError (naming the
/// channel) for one that cannot be analysed.
AnalyzeReport analyze_capture(const Capture& capture, const std::vector<std::string>& channels,
                              const AnalyzeOptions& options = {});

/// How the harmonic count was chosen (docs/analyze-json.md, "harmonic_selection"); frf's JSON
/// carries the same object.
nlohmann::ordered_json harmonic_selection_json(const HarmonicSelection& selection);
/// The same for people, one phrase: "automatic: Holm F test at α = 0.01 (per-period noise) over
/// harmonics 1…451: 13 significant, highest 25".
std::string harmonic_selection_text(const HarmonicSelection& selection);

/// One channel's JSON object (keys in the documented order).
nlohmann::ordered_json channel_json(const ChannelAnalysis& channel);
/// The whole document: capture description, then "channels".
nlohmann::ordered_json analyze_json(const AnalyzeReport& report);
/// Harmonics table, one row per channel and harmonic:
/// channel,unit,n,freq_hz,amplitude,amplitude_u,phase_deg,phase_u_deg,significant
std::string harmonics_csv(const AnalyzeReport& report);
/// Aligned text for a terminal: per channel a summary block and the harmonics table.
std::string analyze_text(const AnalyzeReport& report);

}  // namespace periodfit::dsp
