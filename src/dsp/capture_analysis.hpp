#pragma once
/// Analysis of a whole capture: the selected channels through dsp::analyze_channel, with the
/// capture's description. The renderings (analyze JSON, harmonics CSV, text) are in
/// output/analysis_output.hpp.
#include <cstddef>
#include <string>
#include <vector>

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

}  // namespace periodfit::dsp
