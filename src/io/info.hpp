#pragma once
/// What `periodfit info` says about a capture, for a bench user deciding whether it can be
/// analysed: its layout (channels, units, rate, samples, duration, t0, metadata), where the rate
/// came from and how regular the time column's steps were, and per channel the dc and rms, the
/// smallest code step seen (the effective vertical resolution), the samples held flat at the
/// record's extremes (clipping candidates) and, filled in by dsp::survey_capture, the length of
/// the record in periods of its fundamental. The JSON form is a contract documented in
/// docs/info-json.md; the text form is for people.
///
/// Statistics (common practice): min, max, mean = Σx/N, RMS = sqrt(Σx²/N) (the total RMS, dc
/// included), each in the channel's unit. Sums are compensated (Neumaier), so a 10⁷-sample
/// record keeps full double precision.
#include <cstddef>
#include <optional>
#include <string>
#include <utility>
#include <vector>

#include "core/capture.hpp"

namespace periodfit::io {

struct ChannelStats {
  std::string name;
  std::string unit;
  double min = 0;
  double max = 0;
  double mean = 0;
  double rms = 0;  ///< total RMS, dc included
  double ac_rms = 0;  ///< RMS about the mean, sqrt(rms² − mean²) computed as a centred sum
  /// The code step: the lattice spacing every sample value sits on (an ADC's step, or the
  /// printed digits'), the greatest common divisor of the differences between values; 0 for a
  /// constant channel or continuous values (no lattice coarser than 2^-32 of the span).
  double code_step = 0;
  std::size_t levels = 0;  ///< distinct sample values
  /// Samples equal to the record's min or max in runs of at least kFlatRun equal samples: a
  /// smooth waveform touches its extreme for one or two samples, a clipped one stays there. A
  /// square wave also stays there by design, so this is a count of candidates, not a verdict.
  std::size_t flat_at_extremes = 0;
  std::optional<double> f0_hz;  ///< fundamental found by dsp::survey_capture, if any
  std::string f0_note;          ///< why there is no fundamental (empty when there is one)
};

/// Equal samples in a row from which a stay at the min or max counts as flat.
inline constexpr std::size_t kFlatRun = 3;

struct CaptureInfo {
  std::string source;
  std::string format;
  double sample_rate_hz = 0;
  double t0_s = 0;
  std::size_t samples = 0;
  double duration_s = 0;  ///< samples / rate
  std::vector<ChannelStats> channels;
  std::vector<std::pair<std::string, std::string>> metadata;
  TimeBase time_base;
};

/// The JSON code of a rate source ("time-column", "preamble", "rate-option", "audio-header").
const char* rate_source_code(TimeBase::Source source);

/// Statistics of one sample vector (which must not be empty).
ChannelStats channel_stats(const Channel& channel);

/// The layout and statistics of a capture.
CaptureInfo describe(const Capture& capture);

}  // namespace periodfit::io
