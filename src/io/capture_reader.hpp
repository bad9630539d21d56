#pragma once
/// Reading any capture the tool accepts: CSV text exported by oscilloscopes and loggers, and
/// audio files through libsndfile. The format is recognised from the content (audio magic
/// numbers), not only the extension, so misnamed files still load.
#include <string>
#include <utility>
#include <vector>

#include "core/capture.hpp"

namespace periodfit::io {

/// Calibration and overrides applied after import; channels are named or 0-based indices.
struct ReadOptions {
  double rate_hz = 0;  ///< 0 = from the file (time column, preamble, audio header); else overrides
  std::vector<std::pair<std::string, double>> scales;       ///< CH=FACTOR, samples × FACTOR
  std::vector<std::pair<std::string, std::string>> units;   ///< CH=UNIT, replaces the unit
  /// CSV only: "" = detect the time column; "none" = no time column; else its header name or
  /// 0-based position among all columns.
  std::string time_column;
};

/// Reads `path` (CSV or audio), applies `options`, and returns the capture. Throws IoError for
/// OS failures (missing, unreadable, a directory), InputError (with line and column where
/// they apply) for bad content and for a scale/unit naming a channel the file lacks (the
/// message names the file and lists the channels), OptionError for invalid options.
Capture read_capture(const std::string& path, const ReadOptions& options = {});

/// Applies rate override, scales and units to an imported capture; unknown channel names throw
/// UnknownNameError. Shared by every importer.
void apply_read_options(Capture& capture, const ReadOptions& options);

}  // namespace periodfit::io
