// Analysis of a whole capture, channel by channel (capture_analysis.hpp).
#include "dsp/capture_analysis.hpp"

#include "core/error.hpp"
#include "core/memory_budget.hpp"

namespace periodfit::dsp {

AnalyzeReport analyze_capture(const Capture& capture, const std::vector<std::string>& channels,
                              const AnalyzeOptions& options) {
  validate(options);
  AnalyzeReport r;
  r.source = capture.source;
  r.format = capture.format;
  r.sample_rate_hz = capture.sample_rate_hz;
  r.t0_s = capture.t0_s;
  r.samples = capture.sample_count();
  std::vector<std::size_t> indices;
  if (channels.empty()) {
    for (std::size_t i = 0; i < capture.channels.size(); ++i) indices.push_back(i);
  } else {
    for (const auto& sel : channels) indices.push_back(capture.channel_index(sel));
  }
  // analyze_channel names the channel; the file is named here, so every analysis error says
  // where the data came from (issue 11, class 10).
  for (std::size_t i : indices)
    with_memory_step("analysing channel \"" + capture.channels[i].name + "\" of " + capture.source, [&] {
      try {
        r.channels.push_back(analyze_channel(capture.channels[i], capture.sample_rate_hz, capture.t0_s, options));
      } catch (const AnalysisError& e) {
        throw AnalysisError(capture.source + ": " + e.what());
      }
    });
  return r;
}

}  // namespace periodfit::dsp
