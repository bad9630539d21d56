#pragma once
/// Pass/fail limits on measured results, as a batch config declares them (docs/batch-config.md).
///
/// A limit names one result of the catalogue below (with a selector where the result needs one:
/// a harmonic number or a frequency, a pole, a channel) and an allowed range: nominal ±
/// tolerance (absolute, or tolerance_pct of the nominal), or min and/or max, or for a yes/no
/// result the expected answer. With `guard_band = true` a limit passes only when the whole 95 %
/// interval of the measured value lies inside the range (guarded acceptance, ISO 14253-1 /
/// JCGM 106 "conformity assessment"), so a unit is never passed on a reading whose uncertainty
/// reaches outside the tolerance; without it the measured value alone decides. Bounds are
/// inclusive. Phases are compared modulo 360°: the measured angle is taken in the turn nearest
/// the centre of the allowed range.
///
/// Measured values reach the limits as a flat MeasurementSet, {key → value with its 95 %
/// interval, standard uncertainty u and coverage factor k}, keys as `Limit::key()` writes them ("thd", "mag_db[n=3]", "mag_db[f=1000]",
/// "damping[pole=1]", "thd[channel=v_out]"); the batch runner fills it from the analyze or
/// identify result of each file.
///
/// Units in limits. A bound may be a bare number, in the result's SI unit (ResultInfo::unit: a
/// ratio, Hz, s, dB, bit, degrees, or the channel's unit), or a string carrying its unit:
/// `"8 %"`, `"120 ppm"`, `"-40 dB"` (on an amplitude ratio: 20·log10), `"1.2 kHz"`, `"5 deg"`,
/// `"0.1 rad"`, `"2 mV"`. finish_limit converts it to the SI value (lo/hi) and keeps the text, so
/// reports show the limit as it was written and the measured value in that unit. A bare number
/// that is implausible for its result (THD max > 1) is refused with a message saying how to
/// write it (docs/batch-config.md, "Units in limits").
#include <cstddef>
#include <limits>
#include <map>
#include <optional>
#include <string>
#include <string_view>
#include <vector>

namespace periodfit::batch {

/// Which per-file analysis a batch runs.
enum class AnalysisMode { analyze, identify };

const char* mode_name(AnalysisMode mode);

/// What selector a result takes.
enum class Selector {
  none,                  ///< a single value per file (or per channel in analyze mode)
  harmonic,              ///< `harmonic = n` required
  harmonic_or_frequency, ///< exactly one of `harmonic = n` and `freq_hz = f`
  pole,                  ///< `pole = k` (1-based, see ResultInfo::description)
};

/// One entry of the catalogue of results that limits may name.
struct ResultInfo {
  std::string_view name;
  std::string_view unit;          ///< "" for ratios
  Selector selector = Selector::none;
  bool in_analyze = false;        ///< available in analyze mode
  bool in_identify = false;       ///< available in identify mode
  bool yes_no = false;            ///< value 1 (yes) or 0 (no); limited with `expect`
  bool angle = false;             ///< degrees, compared modulo 360°
  std::string_view description;
  /// A ratio of amplitudes (peak or RMS), so a limit in dB converts with 20·log10 (IEC 60027-3:
  /// a field quantity): thd, thd_n, crest_factor, mag, dc_gain. Other ratios refuse dB.
  bool amplitude_ratio = false;
  /// A bare-number bound above this is refused as a likely percentage (thd, thd_n, damping: 1).
  double bare_max = std::numeric_limits<double>::infinity();
};

/// Every result a limit can name, in documentation order.
const std::vector<ResultInfo>& result_catalogue();

/// The entry for `name`, or nullptr.
const ResultInfo* find_result(std::string_view name);

/// A measured value, its 95 % interval (NaN bounds = uncertainty unknown), and where the
/// analysis has them its standard uncertainty u and the coverage factor k that made the interval
/// (NaN = not known; an interval that is not value ± k·u, like a dB interval from a linear one,
/// keeps the u of the value in its own unit).
struct Quantity {
  double value = std::numeric_limits<double>::quiet_NaN();
  double lo95 = std::numeric_limits<double>::quiet_NaN();
  double hi95 = std::numeric_limits<double>::quiet_NaN();
  double u = std::numeric_limits<double>::quiet_NaN();
  double k = std::numeric_limits<double>::quiet_NaN();

  static Quantity exact(double value) { return {value, value, value, 0.0, std::numeric_limits<double>::quiet_NaN()}; }
  static Quantity symmetric(double value, double u95) { return {value, value - u95, value + u95}; }
  /// value ± k·u (NaN u: no interval).
  static Quantity from_u(double value, double u, double k) {
    return {value, value - k * u, value + k * u, u, k};
  }
  bool has_interval() const { return lo95 == lo95 && hi95 == hi95; }
};

/// The measured quantities of one file, by key.
class MeasurementSet {
 public:
  void set(std::string key, Quantity quantity) { values_[std::move(key)] = quantity; }
  const Quantity* find(const std::string& key) const {
    const auto it = values_.find(key);
    return it == values_.end() ? nullptr : &it->second;
  }
  const std::map<std::string, Quantity>& values() const { return values_; }
  /// The unit of a channel's values ("" = the first analysed channel, as in keys); "" = unknown.
  void set_channel_unit(const std::string& channel, std::string unit) { units_[channel] = std::move(unit); }
  std::string channel_unit(const std::string& channel) const {
    const auto it = units_.find(channel);
    return it == units_.end() ? std::string() : it->second;
  }

 private:
  std::map<std::string, Quantity> values_;
  std::map<std::string, std::string> units_;
};

/// The key of result `name` with its selectors, in the canonical form used by MeasurementSet.
std::string measurement_key(std::string_view name, std::string_view channel = {},
                            std::optional<int> harmonic = {}, std::optional<double> freq_hz = {},
                            std::optional<int> pole = {});

struct Limit {
  std::string result;              ///< catalogue name
  std::string label;               ///< optional text shown in reports
  std::string channel;             ///< analyze: channel name; "" = the first analysed channel
  std::optional<int> harmonic;     ///< harmonic number
  std::optional<double> freq_hz;   ///< frequency (identify: from the fitted model)
  std::optional<int> pole;         ///< 1-based pole entry
  // The range as written; `lo`/`hi` are derived by finish().
  std::optional<double> nominal, tolerance, tolerance_pct, min, max;
  std::optional<bool> expect;      ///< yes/no results
  bool guard_band = false;         ///< pass only if the whole 95 % interval is inside
  /// Bounds written as strings with a unit, by field ("max" → "8 %"); finish_limit converts them
  /// into nominal/tolerance/min/max in SI units. Bare numbers have no entry.
  std::map<std::string, std::string> written;
  /// The unit the limit was written in ("%", "dB", "kHz", "mV"; "" = the SI unit), used to show
  /// the measured value beside it; set by finish_limit.
  std::string display_unit;
  double display_factor = 1;       ///< SI value = shown value · factor (unless display_db)
  bool display_db = false;         ///< shown value = 20·log10(SI value)
  std::string unit_base;           ///< channel-unit results written with a unit: "V" of "2 mV"
  double lo = -std::numeric_limits<double>::infinity();
  double hi = std::numeric_limits<double>::infinity();
  std::size_t line = 0, column = 0;  ///< where the config defines it (1-based; 0 = unknown)

  std::string key() const;         ///< measurement key
  std::string describe() const;    ///< "mag_db at harmonic 3", with the label if any
  std::string allowed_text() const;  ///< "1 ± 0.02", "≥ 0.5", "0.4 … 0.5", "≤ 8 %", "yes", + guard band
  double to_display(double si) const;  ///< an SI value in the unit the limit was written in
};

/// A problem with a limit as written: the field it concerns ("" = the limit as a whole) and
/// the message. The config loader turns it into an InputError at that field's position.
struct LimitProblem {
  std::string field;
  std::string message;
};

/// Checks a parsed limit against the catalogue and `mode` and derives lo/hi. Returns the first
/// problem found, or nullopt when the limit is valid.
std::optional<LimitProblem> finish_limit(Limit& limit, AnalysisMode mode);

/// The outcome of one limit on one file.
struct LimitOutcome {
  bool evaluated = false;  ///< false: the result was not available for this file
  bool passed = false;
  Quantity measured;
  /// "0.998 (95 %: 0.991 … 1.005, k = 1.96)" in the unit the limit was written in, or why it is
  /// missing
  std::string measured_text;
  std::string verdict;        ///< "pass", "fail", "fail: 95 % interval leaves the range", …
  /// Distance of the value to the nearest bound, in the result's SI unit: > 0 inside, < 0
  /// outside, 0 on a bound. NaN for yes/no results and unmeasured values.
  double margin = std::numeric_limits<double>::quiet_NaN();
  /// margin over the tolerance width: hi − lo for a two-sided range; |bound| for a one-sided
  /// one (the width from zero to the bound). NaN when that width is 0 or margin is NaN.
  double margin_fraction = std::numeric_limits<double>::quiet_NaN();
};

/// Evaluates `limit` on `measured`. A result missing from the set fails the limit (a unit is
/// never passed on a value that was not measured) with a verdict saying so.
LimitOutcome evaluate_limit(const Limit& limit, const MeasurementSet& measured);

/// Numbers for people in limit texts: 6 significant digits, typographic minus.
std::string format_limit_number(double value);

}  // namespace periodfit::batch
