#include "batch/limits.hpp"

#include <cmath>
#include <cstdio>

#include "core/error.hpp"
#include "io/number_format.hpp"

namespace periodfit::batch {

namespace {

constexpr const char* kChannelUnit = "channel unit";

// The catalogue. Units "channel unit" mean the unit of the analysed channel.
const std::vector<ResultInfo> kCatalogue = {
    {"f0_hz", "Hz", Selector::none, true, true, false, false,
     "fundamental frequency (identify: locked on the input channel)"},
    {"dc", kChannelUnit, Selector::none, true, false, false, false, "dc value of the channel"},
    {"rms", kChannelUnit, Selector::none, true, false, false, false,
     "RMS over whole periods, dc included"},
    {"thd", "", Selector::none, true, false, false, false,
     "total harmonic distortion relative to the fundamental, as a ratio"},
    {"thd_n", "", Selector::none, true, false, false, false,
     "THD+N relative to the fundamental's RMS, as a ratio"},
    {"sinad_db", "dB", Selector::none, true, false, false, false, "SINAD, IEEE Std 1241"},
    {"snr_db", "dB", Selector::none, true, false, false, false,
     "signal-to-noise ratio excluding dc and harmonics"},
    {"enob_bits", "bit", Selector::none, true, false, false, false,
     "effective number of bits, (SINAD − 1.76)/6.02"},
    {"crest_factor", "", Selector::none, true, false, false, false, "max |x| over RMS"},
    {"amplitude", kChannelUnit, Selector::harmonic, true, false, false, false,
     "peak amplitude of harmonic n"},
    {"mag", "", Selector::harmonic_or_frequency, false, true, false, false,
     "|H| at harmonic n (measured) or at freq_hz (fitted model), output unit per input unit"},
    {"mag_db", "dB", Selector::harmonic_or_frequency, false, true, false, false,
     "20·log10 |H| at harmonic n (measured) or at freq_hz (fitted model)"},
    {"phase_deg", "\xC2\xB0", Selector::harmonic_or_frequency, true, true, false, true,
     "analyze: phase of harmonic n; identify: ∠H at harmonic n or at freq_hz (model)"},
    {"dc_gain", "", Selector::none, false, true, false, false, "model gain at s = 0, b0/a0"},
    {"delay_s", "s", Selector::none, false, true, false, false,
     "model dead time T (0 unless the delay is estimated)"},
    {"time_constant_s", "s", Selector::pole, false, true, false, false,
     "τ = −1/p of pole entry k when it is a real pole"},
    {"natural_frequency_hz", "Hz", Selector::pole, false, true, false, false,
     "|p|/2π of pole entry k (for a real pole its corner frequency)"},
    {"damping", "", Selector::pole, false, true, false, false,
     "damping ratio ζ = −Re p/|p| of pole entry k when it is a complex pair"},
    {"q_factor", "", Selector::pole, false, true, false, false,
     "Q = 1/(2ζ) of pole entry k when it is a complex pair"},
    {"model_cost_ratio", "", Selector::none, false, true, false, false,
     "weighted least-squares cost over the cost expected of a correct model (≈ 1 for an adequate model)"},
    {"model_adequate", "", Selector::none, false, true, true, false,
     "cost inside the central 95 % band of its χ² distribution"},
    {"linear", "", Selector::none, false, true, true, false,
     "no output power above the noise at harmonics the input does not excite"},
};

std::string with_minus(std::string s) {
  if (!s.empty() && s[0] == '-') s.replace(0, 1, "\xE2\x88\x92");
  return s;
}

std::string unit_suffix(const ResultInfo* info) {
  if (!info || info->unit.empty() || info->unit == kChannelUnit) return "";
  return (info->unit == "\xC2\xB0" ? "" : " ") + std::string(info->unit);
}

std::vector<std::string> catalogue_names() {
  std::vector<std::string> names;
  for (const auto& r : kCatalogue) names.emplace_back(r.name);
  return names;
}

bool finite(const std::optional<double>& v) { return !v || std::isfinite(*v); }

}  // namespace

const char* mode_name(AnalysisMode mode) {
  return mode == AnalysisMode::analyze ? "analyze" : "identify";
}

const std::vector<ResultInfo>& result_catalogue() { return kCatalogue; }

const ResultInfo* find_result(std::string_view name) {
  for (const auto& r : kCatalogue)
    if (r.name == name) return &r;
  return nullptr;
}

std::string format_limit_number(double value) {
  if (std::isnan(value)) return "nan";
  if (std::isinf(value)) return value > 0 ? "inf" : "\xE2\x88\x92inf";
  if (value == 0) value = 0;  // no "−0"
  return with_minus(io::format_significant(value, 6));
}

std::string measurement_key(std::string_view name, std::string_view channel,
                            std::optional<int> harmonic, std::optional<double> freq_hz,
                            std::optional<int> pole) {
  std::string parts;
  const auto add = [&](const std::string& part) { parts += (parts.empty() ? "" : ",") + part; };
  if (!channel.empty()) add("channel=" + std::string(channel));
  if (harmonic) add("n=" + std::to_string(*harmonic));
  if (freq_hz) add("f=" + io::format_shortest(*freq_hz));
  if (pole) add("pole=" + std::to_string(*pole));
  std::string key(name);
  if (!parts.empty()) key += "[" + parts + "]";
  return key;
}

std::string Limit::key() const { return measurement_key(result, channel, harmonic, freq_hz, pole); }

std::string Limit::describe() const {
  std::string d = result;
  if (harmonic) d += " at harmonic " + std::to_string(*harmonic);
  if (freq_hz) d += " at " + format_limit_number(*freq_hz) + " Hz";
  if (pole) d += " of pole " + std::to_string(*pole);
  if (!channel.empty()) d += " of " + channel;
  return label.empty() ? d : label + " (" + d + ")";
}

std::string Limit::allowed_text() const {
  const ResultInfo* info = find_result(result);
  const std::string unit = unit_suffix(info);
  std::string t;
  if (expect)
    t = *expect ? "yes" : "no";
  else if (nominal && tolerance)
    t = format_limit_number(*nominal) + " \xC2\xB1 " + format_limit_number(*tolerance) + unit;
  else if (nominal && tolerance_pct)
    t = format_limit_number(*nominal) + unit + " \xC2\xB1 " + format_limit_number(*tolerance_pct) + " %";
  else if (min && max)
    t = format_limit_number(*min) + " \xE2\x80\xA6 " + format_limit_number(*max) + unit;
  else if (min)
    t = "\xE2\x89\xA5 " + format_limit_number(*min) + unit;
  else if (max)
    t = "\xE2\x89\xA4 " + format_limit_number(*max) + unit;
  if (guard_band) t += " (guard band: 95 % interval inside)";
  return t;
}

std::optional<LimitProblem> finish_limit(Limit& limit, AnalysisMode mode) {
  const ResultInfo* info = find_result(limit.result);
  if (!info)
    return LimitProblem{"result", UnknownNameError("result", limit.result, catalogue_names()).what()};
  const bool available = mode == AnalysisMode::analyze ? info->in_analyze : info->in_identify;
  if (!available)
    return LimitProblem{"result", "result \"" + limit.result + "\" is not available in " +
                                      mode_name(mode) + " mode (it is " +
                                      (info->in_analyze ? "an analyze" : "an identify") + " result)"};
  if (!limit.channel.empty() && mode == AnalysisMode::identify)
    return LimitProblem{"channel", "channel applies in analyze mode only (identify uses the "
                                   "input and output channels of [analysis])"};
  // Selectors.
  const std::string& r = limit.result;
  const bool wants_harmonic =
      info->selector == Selector::harmonic || info->selector == Selector::harmonic_or_frequency;
  const bool wants_frequency =
      info->selector == Selector::harmonic_or_frequency && mode == AnalysisMode::identify;
  if (limit.harmonic && !wants_harmonic) return LimitProblem{"harmonic", r + " takes no harmonic"};
  if (limit.freq_hz && !wants_frequency)
    return LimitProblem{"freq_hz", mode == AnalysisMode::analyze && wants_harmonic
                                       ? r + " takes a harmonic in analyze mode; freq_hz needs "
                                             "the fitted model of identify mode"
                                       : r + " takes no freq_hz"};
  if (limit.pole && info->selector != Selector::pole) return LimitProblem{"pole", r + " takes no pole"};
  if (wants_frequency && limit.harmonic && limit.freq_hz)
    return LimitProblem{"freq_hz", r + " takes harmonic or freq_hz, not both"};
  if (wants_harmonic && !limit.harmonic && !limit.freq_hz)
    return LimitProblem{"", r + (wants_frequency ? " needs harmonic = N or freq_hz = F"
                                                 : " needs harmonic = N")};
  if (info->selector == Selector::pole && !limit.pole)
    return LimitProblem{"", r + " needs pole = K (1 = the pole entry with the smallest |p|)"};
  if (limit.harmonic && *limit.harmonic < 1)
    return LimitProblem{"harmonic", "harmonic = " + std::to_string(*limit.harmonic) + " (must be >= 1)"};
  if (limit.pole && *limit.pole < 1)
    return LimitProblem{"pole", "pole = " + std::to_string(*limit.pole) + " (must be >= 1)"};
  if (limit.freq_hz && !(std::isfinite(*limit.freq_hz) && *limit.freq_hz > 0))
    return LimitProblem{"freq_hz", "freq_hz = " + format_limit_number(*limit.freq_hz) +
                                       " (must be a finite frequency > 0)"};
  // The range.
  for (const auto& [name, value] : {std::pair{"nominal", &limit.nominal},
                                    std::pair{"tolerance", &limit.tolerance},
                                    std::pair{"tolerance_pct", &limit.tolerance_pct},
                                    std::pair{"min", &limit.min}, std::pair{"max", &limit.max}})
    if (!finite(*value)) return LimitProblem{name, std::string(name) + " must be a finite number"};
  if (info->yes_no) {
    for (const auto& [name, value] : {std::pair{"nominal", &limit.nominal},
                                      std::pair{"tolerance", &limit.tolerance},
                                      std::pair{"tolerance_pct", &limit.tolerance_pct},
                                      std::pair{"min", &limit.min}, std::pair{"max", &limit.max}})
      if (*value) return LimitProblem{name, r + " is a yes/no result: use expect, not " + name};
    if (!limit.expect)
      return LimitProblem{"", r + " is a yes/no result: give expect = true or expect = false"};
    if (limit.guard_band) return LimitProblem{"guard_band", "guard_band applies to numeric results"};
    limit.lo = limit.hi = *limit.expect ? 1 : 0;
    return std::nullopt;
  }
  if (limit.expect)
    return LimitProblem{"expect", "expect applies to yes/no results (model_adequate, linear); " +
                                      r + " takes nominal ± tolerance or min/max"};
  const bool has_nominal_form = limit.nominal || limit.tolerance || limit.tolerance_pct;
  const bool has_range_form = limit.min || limit.max;
  if (has_nominal_form && has_range_form)
    return LimitProblem{limit.min ? "min" : "max",
                        "give either nominal with tolerance (or tolerance_pct) or min/max, not both"};
  if (!has_nominal_form && !has_range_form)
    return LimitProblem{"", "no range: give nominal with tolerance (or tolerance_pct), or min and/or max"};
  if (has_nominal_form) {
    if (!limit.nominal)
      return LimitProblem{limit.tolerance ? "tolerance" : "tolerance_pct",
                          "a tolerance needs a nominal value"};
    if (limit.tolerance && limit.tolerance_pct)
      return LimitProblem{"tolerance_pct", "give tolerance or tolerance_pct, not both"};
    if (!limit.tolerance && !limit.tolerance_pct)
      return LimitProblem{"nominal", "nominal needs tolerance or tolerance_pct"};
    const double tol = limit.tolerance ? *limit.tolerance : *limit.tolerance_pct;
    if (tol < 0)
      return LimitProblem{limit.tolerance ? "tolerance" : "tolerance_pct",
                          std::string(limit.tolerance ? "tolerance" : "tolerance_pct") + " = " +
                              format_limit_number(tol) + " (must be >= 0)"};
    const double half = limit.tolerance ? tol : std::abs(*limit.nominal) * tol / 100.0;
    limit.lo = *limit.nominal - half;
    limit.hi = *limit.nominal + half;
    return std::nullopt;
  }
  if (limit.min && limit.max && *limit.min > *limit.max)
    return LimitProblem{"max", "min = " + format_limit_number(*limit.min) + " is above max = " +
                                   format_limit_number(*limit.max)};
  limit.lo = limit.min ? *limit.min : -std::numeric_limits<double>::infinity();
  limit.hi = limit.max ? *limit.max : std::numeric_limits<double>::infinity();
  return std::nullopt;
}

LimitOutcome evaluate_limit(const Limit& limit, const MeasurementSet& measured) {
  LimitOutcome out;
  const ResultInfo* info = find_result(limit.result);
  const Quantity* q = measured.find(limit.key());
  if (!q || std::isnan(q->value)) {
    out.measured_text = "not available";
    out.verdict = "fail: not measured in this file";
    return out;
  }
  out.evaluated = true;
  out.measured = *q;
  if (info && info->yes_no) {
    const bool yes = q->value != 0;
    out.measured_text = yes ? "yes" : "no";
    out.passed = yes == limit.expect.value_or(true);
    out.verdict = out.passed ? "pass" : "fail";
    return out;
  }
  Quantity v = *q;
  if (info && info->angle) {
    // The turn nearest the centre of the range (or its one finite edge).
    double centre = NAN;
    if (std::isfinite(limit.lo) && std::isfinite(limit.hi)) centre = (limit.lo + limit.hi) / 2;
    else if (std::isfinite(limit.lo)) centre = limit.lo + 180;
    else if (std::isfinite(limit.hi)) centre = limit.hi - 180;
    if (std::isfinite(centre)) {
      const double shift = 360.0 * std::round((centre - v.value) / 360.0);
      v.value += shift;
      v.lo95 += shift;
      v.hi95 += shift;
    }
  }
  out.measured = v;
  const std::string unit = unit_suffix(info);
  out.measured_text = format_limit_number(v.value) + unit;
  if (v.has_interval() && !(v.lo95 == v.value && v.hi95 == v.value))
    out.measured_text += " (95 %: " + format_limit_number(v.lo95) + " \xE2\x80\xA6 " +
                         format_limit_number(v.hi95) + ")";
  const bool value_inside = v.value >= limit.lo && v.value <= limit.hi;
  if (!value_inside) {
    out.verdict = "fail: outside the range";
    return out;
  }
  if (limit.guard_band) {
    if (!v.has_interval()) {
      out.verdict = "fail: no uncertainty known, so the guard band cannot be checked";
      return out;
    }
    if (v.lo95 < limit.lo || v.hi95 > limit.hi) {
      out.verdict = "fail: inside the range, but its 95 % interval reaches outside (guard band)";
      return out;
    }
  }
  out.passed = true;
  out.verdict = "pass";
  return out;
}

}  // namespace periodfit::batch
