#pragma once
/// A capture: what an importer read from one file. Samples are doubles in the channel's unit
/// (after calibration); time is uniform, t_k = t0_s + k / sample_rate_hz, where t = 0 is the
/// file's time origin (the time column's zero, else the first sample, so t0_s = 0).
#include <cstddef>
#include <optional>
#include <string>
#include <string_view>
#include <utility>
#include <vector>

namespace periodfit {

struct Channel {
  std::string name;             ///< header name, or ch0, ch1, … when the file has none
  std::string unit;             ///< "V", "A", "FS" (audio full scale), or "" when unknown
  std::vector<double> samples;  ///< one value per sample instant
};

/// Where a capture's sample rate came from and, for a CSV time column, how regular its steps
/// were (what `info` reports as the clock's regularity). Deviations are of each step
/// t_k − t_{k−1} from the mean step; they include the rounding of the printed times, whose
/// finest printed unit is given so a reader can tell rounding from jitter.
struct TimeBase {
  enum class Source { time_column, preamble, rate_option, audio_header };
  Source source = Source::audio_header;
  std::size_t steps = 0;              ///< time-column steps seen (0 without a time column)
  double step_deviation_rms_s = 0;    ///< RMS of (step − mean step), Welford's running variance
  double step_deviation_max_s = 0;    ///< largest |step − mean step|
  double printed_resolution_s = 0;    ///< finest unit of the printed times (0 when not known)
};

struct Capture {
  std::string source;           ///< path or test name the data came from
  std::string format;           ///< "csv", "wav", "flac", … (what the importer recognised)
  double sample_rate_hz = 0;    ///< samples per second, > 0 once imported
  double t0_s = 0;              ///< time of the first sample relative to the file's origin
  std::vector<Channel> channels;  ///< data channels; a CSV time column is not a channel
  std::vector<std::pair<std::string, std::string>> metadata;  ///< preamble key/values, in order
  TimeBase time_base;           ///< where the rate came from; the time column's regularity

  std::size_t sample_count() const { return channels.empty() ? 0 : channels.front().samples.size(); }
  double duration_s() const { return sample_rate_hz > 0 ? double(sample_count()) / sample_rate_hz : 0; }
  std::vector<std::string> channel_names() const;

  /// Index of the data channel `selector` picks, by one rule (docs/capture-formats.md,
  /// "Choosing a channel") that cannot take a name for an index or the reverse unnoticed:
  ///   "#N"   the data channel at 0-based position N, always (a name never matches "#N");
  ///   text   the channel so named, exactly, else case-insensitively;
  ///   digits naming no channel: the 0-based position, as "#N" (kept for scripts).
  /// Scope files that name their columns "1", "2" are why "#N" exists: there "1" is the
  /// channel named 1 (position #0), and channel_selector_warning says so. Throws
  /// UnknownNameError naming the file (`source`) and listing the channels that exist.
  std::size_t channel_index(std::string_view selector) const;
  /// When plain digits name one channel and are the position of another, the warning that says
  /// which was taken and how to write the other; "" otherwise.
  std::string channel_selector_warning(std::string_view selector) const;
  /// The channel named `name` (exactly, else case-insensitively), or nullopt.
  std::optional<std::size_t> named_channel(std::string_view name) const;
  const Channel& channel(std::string_view selector) const { return channels[channel_index(selector)]; }
  Channel& channel(std::string_view selector) { return channels[channel_index(selector)]; }
};

}  // namespace periodfit
