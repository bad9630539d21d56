#include "batch/limits.hpp"

#include <charconv>
#include <cmath>
#include <cstdio>
#include <numbers>
#include <variant>

#include "core/error.hpp"
#include "core/number_format.hpp"

namespace periodfit::batch {

namespace {

constexpr const char* kChannelUnit = "channel unit";

// The catalogue. Units "channel unit" mean the unit of the analysed channel.
const std::vector<ResultInfo> kCatalogue = {
    {"f0_hz", "Hz", Selector::none, true, true, false, false,
     "fundamental frequency (frf: locked on the input channel)"},
    {"dc", kChannelUnit, Selector::none, true, false, false, false, "dc value of the channel"},
    {"rms", kChannelUnit, Selector::none, true, false, false, false,
     "RMS over whole periods, dc included"},
    {"thd", "", Selector::none, true, false, false, false,
     "total harmonic distortion relative to the fundamental, as a ratio", true, 1},
    {"thd_n", "", Selector::none, true, false, false, false,
     "THD+N relative to the fundamental's RMS, as a ratio", true, 1},
    {"sinad_db", "dB", Selector::none, true, false, false, false, "SINAD, IEEE Std 1241"},
    {"snr_db", "dB", Selector::none, true, false, false, false,
     "signal-to-noise ratio excluding dc and harmonics"},
    {"enob_bits", "bit", Selector::none, true, false, false, false,
     "effective number of bits, (SINAD − 1.76)/6.02"},
    {"crest_factor", "", Selector::none, true, false, false, false, "max |x| over RMS", true},
    {"amplitude", kChannelUnit, Selector::harmonic, true, false, false, false,
     "peak amplitude of harmonic n"},
    {"mag", "", Selector::harmonic_or_frequency, false, true, false, false,
     "|H| at harmonic n (measured) or at freq_hz (fitted model), output unit per input unit", true},
    {"mag_db", "dB", Selector::harmonic_or_frequency, false, true, false, false,
     "20·log10 |H| at harmonic n (measured) or at freq_hz (fitted model)"},
    {"phase_deg", "\xC2\xB0", Selector::harmonic_or_frequency, true, true, false, true,
     "analyze: phase of harmonic n; frf: ∠H at harmonic n or at freq_hz (model)"},
    {"dc_gain", "", Selector::none, false, true, false, false, "model gain at s = 0, b0/a0", true},
    {"delay_s", "s", Selector::none, false, true, false, false,
     "model dead time T (0 unless the delay is estimated)"},
    {"time_constant_s", "s", Selector::pole, false, true, false, false,
     "τ = −1/p of pole entry k when it is a real pole"},
    {"natural_frequency_hz", "Hz", Selector::pole, false, true, false, false,
     "|p|/2π of pole entry k (for a real pole its corner frequency)"},
    {"damping", "", Selector::pole, false, true, false, false,
     "damping ratio ζ = −Re p/|p| of pole entry k when it is a complex pair", false, 1},
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

// ---- units in limits --------------------------------------------------------------------

// How a unit written in a limit maps onto the result's SI unit.
struct Scale {
  double factor = 1;  // SI = number · factor
  bool db = false;    // SI = 10^(number/20): dB of an amplitude ratio
  std::string base{};  // channel-unit results: the unit without its prefix ("V" of "mV")
};

// SI prefixes (BIPM, The International System of Units, 9th ed., Table 7) in the range limits
// use; "u", "µ" (micro sign) and "μ" (Greek mu) all mean micro.
std::optional<double> prefix_factor(std::string_view p) {
  if (p == "p") return 1e-12;
  if (p == "n") return 1e-9;
  if (p == "u" || p == "\xC2\xB5" || p == "\xCE\xBC") return 1e-6;
  if (p == "m") return 1e-3;
  if (p == "k") return 1e3;
  if (p == "M") return 1e6;
  if (p == "G") return 1e9;
  return std::nullopt;
}

std::optional<double> prefixed(std::string_view token, std::string_view base) {
  if (token == base) return 1.0;
  if (token.size() > base.size() && token.substr(token.size() - base.size()) == base)
    return prefix_factor(token.substr(0, token.size() - base.size()));
  return std::nullopt;
}

std::string accepted_units(const ResultInfo& info) {
  const std::string_view u = info.unit;
  if (u.empty())
    return info.amplitude_ratio ? "a bare ratio, or a string in %, ppm or dB (20·log10 of the ratio)"
                                : "a bare ratio, or a string in % or ppm";
  if (u == "Hz") return "a bare number in Hz, or a string in Hz with an SI prefix (\"1.2 kHz\")";
  if (u == "s") return "a bare number in s, or a string in s with an SI prefix (\"250 us\", \"3 ms\")";
  if (u == "dB") return "a bare number in dB, or a string in dB";
  if (u == "bit") return "a bare number of bits, or a string in bit";
  if (u == "\xC2\xB0") return "a bare number in degrees, or a string in deg, \xC2\xB0 or rad";
  return "a bare number in the channel's unit, or a string in that unit with an SI prefix (\"2 mV\")";
}

std::optional<Scale> unit_scale(const ResultInfo& info, std::string_view token) {
  const std::string_view u = info.unit;
  if (token.empty()) return Scale{};
  if (u.empty()) {
    if (token == "%") return Scale{1e-2};
    if (token == "ppm") return Scale{1e-6};
    if (token == "dB" && info.amplitude_ratio) return Scale{1, true};
    return std::nullopt;
  }
  if (u == "Hz" || u == "s") {
    if (const auto f = prefixed(token, u)) return Scale{*f};
    if (const auto f = prefix_factor(token)) return Scale{*f};  // "1.2k": the prefix alone
    return std::nullopt;
  }
  if (u == "dB") return token == "dB" ? std::optional<Scale>(Scale{}) : std::nullopt;
  if (u == "bit") return token == "bit" || token == "bits" ? std::optional<Scale>(Scale{}) : std::nullopt;
  if (u == "\xC2\xB0") {
    if (token == "deg" || token == "\xC2\xB0") return Scale{};
    if (token == "rad") return Scale{180 / std::numbers::pi};
    if (token == "mrad") return Scale{0.18 / std::numbers::pi};
    return std::nullopt;
  }
  // The channel's unit, checked against each file's channel when the limit is evaluated.
  if (token == "%" || token == "ppm" || token == "dB") return std::nullopt;
  if (token.size() > 1) {
    std::size_t first = (static_cast<unsigned char>(token[0]) >= 0x80) ? 2 : 1;
    if (token.size() > first)
      if (const auto f = prefix_factor(token.substr(0, first)))
        return Scale{*f, false, std::string(token.substr(first))};
  }
  return Scale{1, false, std::string(token)};
}

struct Written {
  double number = 0;
  Scale scale;
  std::string token;
  double si() const { return scale.db ? std::pow(10.0, number / 20) : number * scale.factor; }
};

std::string trim(std::string_view s) {
  while (!s.empty() && (s.front() == ' ' || s.front() == '\t')) s.remove_prefix(1);
  while (!s.empty() && (s.back() == ' ' || s.back() == '\t')) s.remove_suffix(1);
  return std::string(s);
}

// "8 %", "-40 dB", "−40 dB", "1.2 kHz", "5deg": a number, then the unit.
std::variant<Written, std::string> parse_written(const ResultInfo& info, const std::string& field,
                                                 const std::string& text) {
  std::string t = trim(text);
  if (t.rfind("\xE2\x88\x92", 0) == 0) t.replace(0, 3, "-");  // typographic minus
  const char* begin = t.c_str();
  const char* end = begin + t.size();
  if (begin != end && *begin == '+') ++begin;
  Written w;
  const auto [ptr, ec] = std::from_chars(begin, end, w.number);
  const std::string quoted = field + " = \"" + text + "\"";
  if (ec != std::errc() || !std::isfinite(w.number))
    return quoted + ": expected a number with its unit, e.g. \"8 %\", \"-40 dB\", \"1.2 kHz\"";
  w.token = trim(std::string_view(ptr, static_cast<std::size_t>(end - ptr)));
  const auto scale = unit_scale(info, w.token);
  if (!scale) {
    std::string message = quoted + ": unit \"" + w.token + "\" does not fit " + std::string(info.name) +
                          "; write " + accepted_units(info);
    if (field == "tolerance" && w.token == "%")
      message += " (a tolerance relative to the nominal is tolerance_pct = " +
                 format_shortest(w.number) + ")";
    return message;
  }
  w.scale = *scale;
  // "1.2k" on a result in Hz or s: shown as "kHz" beside the measured value.
  if ((info.unit == "Hz" || info.unit == "s") && !w.token.empty() && prefix_factor(w.token))
    w.token += std::string(info.unit);
  return w;
}

}  // namespace

const char* mode_name(AnalysisMode mode) {
  return mode == AnalysisMode::analyze ? "analyze" : "frf";
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
  return with_minus(format_significant(value, 6));
}

std::string measurement_key(std::string_view name, std::string_view channel,
                            std::optional<int> harmonic, std::optional<double> freq_hz,
                            std::optional<int> pole) {
  std::string parts;
  const auto add = [&](const std::string& part) { parts += (parts.empty() ? "" : ",") + part; };
  if (!channel.empty()) add("channel=" + std::string(channel));
  if (harmonic) add("n=" + std::to_string(*harmonic));
  if (freq_hz) add("f=" + format_shortest(*freq_hz));
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
  // A bound written with its unit is shown as written (typographic minus); a bare one with the
  // result's SI unit.
  const auto shown = [&](const char* field, double value, bool with_unit) {
    const auto it = written.find(field);
    if (it != written.end()) return with_minus(trim(it->second));
    return format_limit_number(value) + (with_unit ? unit : "");
  };
  const bool any_written = !written.empty();
  std::string t;
  if (expect)
    t = *expect ? "yes" : "no";
  else if (nominal && tolerance)
    t = any_written ? shown("nominal", *nominal, true) + " \xC2\xB1 " + shown("tolerance", *tolerance, true)
                    : format_limit_number(*nominal) + " \xC2\xB1 " + format_limit_number(*tolerance) + unit;
  else if (nominal && tolerance_pct)
    t = shown("nominal", *nominal, true) + " \xC2\xB1 " + format_limit_number(*tolerance_pct) + " %";
  else if (min && max)
    t = any_written ? shown("min", *min, true) + " \xE2\x80\xA6 " + shown("max", *max, true)
                    : format_limit_number(*min) + " \xE2\x80\xA6 " + format_limit_number(*max) + unit;
  else if (min)
    t = "\xE2\x89\xA5 " + shown("min", *min, true);
  else if (max)
    t = "\xE2\x89\xA4 " + shown("max", *max, true);
  if (guard_band) t += " (guard band: 95 % interval inside)";
  return t;
}

double Limit::to_display(double si) const {
  if (display_db) return si > 0 ? 20 * std::log10(si) : -std::numeric_limits<double>::infinity();
  return si / display_factor;
}

namespace {

// The selectors a result takes (channel, harmonic, freq_hz, pole): present where needed,
// absent where not, in range.
std::optional<LimitProblem> check_selectors(const Limit& limit, const ResultInfo& info, AnalysisMode mode) {
  if (!limit.channel.empty() && mode == AnalysisMode::identify)
    return LimitProblem{"channel", "channel applies in analyze mode only (frf uses the "
                                   "input and output channels of [analysis])"};
  const std::string& r = limit.result;
  const bool wants_harmonic =
      info.selector == Selector::harmonic || info.selector == Selector::harmonic_or_frequency;
  const bool wants_frequency =
      info.selector == Selector::harmonic_or_frequency && mode == AnalysisMode::identify;
  if (limit.harmonic && !wants_harmonic) return LimitProblem{"harmonic", r + " takes no harmonic"};
  if (limit.freq_hz && !wants_frequency)
    return LimitProblem{"freq_hz", mode == AnalysisMode::analyze && wants_harmonic
                                       ? r + " takes a harmonic in analyze mode; freq_hz needs "
                                             "the fitted model of frf mode"
                                       : r + " takes no freq_hz"};
  if (limit.pole && info.selector != Selector::pole) return LimitProblem{"pole", r + " takes no pole"};
  if (wants_frequency && limit.harmonic && limit.freq_hz)
    return LimitProblem{"freq_hz", r + " takes harmonic or freq_hz, not both"};
  if (wants_harmonic && !limit.harmonic && !limit.freq_hz)
    return LimitProblem{"", r + (wants_frequency ? " needs harmonic = N or freq_hz = F"
                                                 : " needs harmonic = N")};
  if (info.selector == Selector::pole && !limit.pole)
    return LimitProblem{"", r + " needs pole = K (1 = the pole entry with the smallest |p|)"};
  if (limit.harmonic && *limit.harmonic < 1)
    return LimitProblem{"harmonic", "harmonic = " + std::to_string(*limit.harmonic) + " (must be >= 1)"};
  if (limit.pole && *limit.pole < 1)
    return LimitProblem{"pole", "pole = " + std::to_string(*limit.pole) + " (must be >= 1)"};
  if (limit.freq_hz && !(std::isfinite(*limit.freq_hz) && *limit.freq_hz > 0))
    return LimitProblem{"freq_hz", "freq_hz = " + format_limit_number(*limit.freq_hz) +
                                       " (must be a finite frequency > 0)"};
  return std::nullopt;
}

// Bounds written with a unit: converted to SI here (again on revalidation, from the text).
// `tolerance_db` is set for a tolerance in dB, which is applied to the nominal as a factor.
std::optional<LimitProblem> convert_written_bounds(Limit& limit, const ResultInfo& info, bool& tolerance_db) {
  const std::string& r = limit.result;
  limit.display_unit.clear();
  limit.display_factor = 1;
  limit.display_db = false;
  limit.unit_base.clear();
  for (const std::string field : {"min", "max", "nominal", "tolerance"}) {
    const auto it = limit.written.find(field);
    if (it == limit.written.end()) continue;
    if (info.yes_no) return LimitProblem{field, r + " is a yes/no result: use expect, not " + field};
    const auto parsed = parse_written(info, field, it->second);
    if (const auto* message = std::get_if<std::string>(&parsed)) return LimitProblem{field, *message};
    const Written& w = std::get<Written>(parsed);
    if (!w.scale.base.empty()) {
      if (!limit.unit_base.empty() && limit.unit_base != w.scale.base)
        return LimitProblem{field, field + " is in " + w.scale.base + ", another bound in " + limit.unit_base};
      limit.unit_base = w.scale.base;
    }
    std::optional<double>& slot = field == "min"       ? limit.min
                                  : field == "max"     ? limit.max
                                  : field == "nominal" ? limit.nominal
                                                       : limit.tolerance;
    // A tolerance in dB on an amplitude ratio is a factor 10^(±t/20) about the nominal, not a
    // ratio to add: it is kept in dB and applied below.
    tolerance_db = tolerance_db || (field == "tolerance" && w.scale.db);
    slot = field == "tolerance" && w.scale.db ? w.number : w.si();
    if (limit.display_unit.empty() && field != "tolerance" && !w.token.empty()) {
      limit.display_unit = w.token;
      limit.display_factor = w.scale.factor;
      limit.display_db = w.scale.db;
    }
  }
  // A bare number far outside what the result can take is most likely written in another unit
  // (a THD of 8 meant as 8 %): refused, with the two ways to say what was meant.
  for (const auto& [name, value] : {std::pair{"nominal", &limit.nominal},
                                    std::pair{"tolerance", &limit.tolerance},
                                    std::pair{"min", &limit.min}, std::pair{"max", &limit.max}}) {
    if (!*value || limit.written.count(name) || !(**value > info.bare_max)) continue;
    const double v = **value;
    return LimitProblem{name, r + " " + name + " = " + format_shortest(v) + " is a ratio of " +
                                  format_shortest(v) + " (" + format_shortest(v * 100) +
                                  " %); write \"" + format_shortest(v) + " %\" or " +
                                  format_shortest(v / 100)};
  }
  return std::nullopt;
}

// The range [lo, hi] from expect, nominal ± tolerance or min/max, with the forms checked.
std::optional<LimitProblem> settle_range(Limit& limit, const ResultInfo& info, bool tolerance_db) {
  const std::string& r = limit.result;
  for (const auto& [name, value] : {std::pair{"nominal", &limit.nominal},
                                    std::pair{"tolerance", &limit.tolerance},
                                    std::pair{"tolerance_pct", &limit.tolerance_pct},
                                    std::pair{"min", &limit.min}, std::pair{"max", &limit.max}})
    if (!finite(*value)) return LimitProblem{name, std::string(name) + " must be a finite number"};
  if (info.yes_no) {
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
    if (tolerance_db) {
      const double a = *limit.nominal * std::pow(10.0, -tol / 20);
      const double b = *limit.nominal * std::pow(10.0, tol / 20);
      limit.lo = std::min(a, b);
      limit.hi = std::max(a, b);
      return std::nullopt;
    }
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

// An angle on the turn nearest the centre of the limit's range (or its one finite edge).
Quantity nearest_turn(Quantity v, const Limit& limit) {
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
  return v;
}

// Shown in the unit the limit was written in; the interval with its coverage factor when the
// analysis gives one (JCGM 100 §6.2: an expanded interval states its level and k).
std::string measured_text(const Limit& limit, const ResultInfo* info, const Quantity& v) {
  const std::string unit = limit.display_unit.empty() ? unit_suffix(info) : " " + limit.display_unit;
  std::string text = format_limit_number(limit.to_display(v.value)) + unit;
  if (!v.has_interval())
    text += " (no uncertainty known)";
  else if (!(v.lo95 == v.value && v.hi95 == v.value))
    text += " (95 %: " + format_limit_number(limit.to_display(v.lo95)) + " \xE2\x80\xA6 " +
            format_limit_number(limit.to_display(v.hi95)) +
            (std::isfinite(v.k) ? ", k = " + format_significant(v.k, 3) : std::string()) + ")";
  return text;
}

// Margin: distance to the nearest finite bound; its fraction of the tolerance width.
void set_margin(LimitOutcome& out, const Limit& limit, double value) {
  const double to_lo = std::isfinite(limit.lo) ? value - limit.lo : std::numeric_limits<double>::infinity();
  const double to_hi = std::isfinite(limit.hi) ? limit.hi - value : std::numeric_limits<double>::infinity();
  out.margin = std::min(to_lo, to_hi);
  const double width = std::isfinite(limit.lo) && std::isfinite(limit.hi) ? limit.hi - limit.lo
                       : std::isfinite(limit.lo)                          ? std::abs(limit.lo)
                                                                          : std::abs(limit.hi);
  if (std::isfinite(out.margin) && width > 0) out.margin_fraction = out.margin / width;
  if (!std::isfinite(out.margin)) out.margin = std::nan("");
}

}  // namespace

std::optional<LimitProblem> finish_limit(Limit& limit, AnalysisMode mode) {
  const ResultInfo* info = find_result(limit.result);
  if (!info)
    return LimitProblem{"result", UnknownNameError("result", limit.result, catalogue_names()).what()};
  const bool available = mode == AnalysisMode::analyze ? info->in_analyze : info->in_identify;
  if (!available)
    return LimitProblem{"result", "result \"" + limit.result + "\" is not available in " +
                                      mode_name(mode) + " mode (it is " +
                                      (info->in_analyze ? "an analyze" : "an frf") + " result)"};
  if (auto problem = check_selectors(limit, *info, mode)) return problem;
  bool tolerance_db = false;
  if (auto problem = convert_written_bounds(limit, *info, tolerance_db)) return problem;
  return settle_range(limit, *info, tolerance_db);
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
  const Quantity v = info && info->angle ? nearest_turn(*q, limit) : *q;
  out.measured = v;
  out.measured_text = measured_text(limit, info, v);
  if (!limit.unit_base.empty()) {
    const std::string channel_unit = measured.channel_unit(limit.channel);
    if (channel_unit != limit.unit_base) {
      out.verdict = "fail: the limit is in " + limit.unit_base + ", " +
                    (channel_unit.empty() || channel_unit == "-"
                         ? std::string("but the channel's unit is not known (set it in [read] unit)")
                         : "but the channel's unit is " + channel_unit);
      return out;
    }
  }
  set_margin(out, limit, v.value);
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
