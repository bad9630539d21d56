#pragma once
/// What `periodfit info` says about a capture: its layout (channels, units, rate, samples,
/// duration, t0, metadata) and per-channel statistics. The JSON form is a contract documented
/// in docs/info-json.md; the text form is for people.
///
/// Statistics (common practice): min, max, mean = Σx/N, RMS = sqrt(Σx²/N) (the total RMS, dc
/// included), each in the channel's unit. Sums are compensated (Neumaier), so a 10⁷-sample
/// record keeps full double precision.
#include <cstddef>
#include <string>
#include <utility>
#include <vector>

#include <nlohmann/json.hpp>

#include "core/capture.hpp"

namespace periodfit::io {

struct ChannelStats {
  std::string name;
  std::string unit;
  double min = 0;
  double max = 0;
  double mean = 0;
  double rms = 0;  ///< total RMS, dc included
};

struct CaptureInfo {
  std::string source;
  std::string format;
  double sample_rate_hz = 0;
  double t0_s = 0;
  std::size_t samples = 0;
  double duration_s = 0;  ///< samples / rate
  std::vector<ChannelStats> channels;
  std::vector<std::pair<std::string, std::string>> metadata;
};

/// Statistics of one sample vector (which must not be empty).
ChannelStats channel_stats(const Channel& channel);

/// The layout and statistics of a capture.
CaptureInfo describe(const Capture& capture);

/// One file's entry of the info JSON (docs/info-json.md).
nlohmann::ordered_json info_json(const CaptureInfo& info);

/// The whole info document: {"periodfit_info": 1, "files": [...]}.
nlohmann::ordered_json info_json(const std::vector<CaptureInfo>& files);

/// The aligned text block for one file, every line ending in '\n'.
std::string info_text(const CaptureInfo& info);

}  // namespace periodfit::io
