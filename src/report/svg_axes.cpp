#include "report/svg_axes.hpp"

#include <algorithm>
#include <array>
#include <cmath>
#include <cstdio>
#include <cstdlib>
#include <string_view>

#include "report/svg_canvas.hpp"

namespace periodfit::report {

using svg::fixed;
using svg::px;

namespace {

constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();
// Linear axes aim at about this many tick intervals (20 dB steps over 120 dB, 90° over 360°).
constexpr double kTickDivisions = 6;

// A typographic minus (U+2212) reads better than a hyphen in tick labels.
std::string with_minus(std::string s) {
  if (!s.empty() && s[0] == '-') s.replace(0, 1, "\xE2\x88\x92");
  return s;
}

std::string strip_zeros(std::string s) {
  if (s.find('.') == std::string::npos || s.find('e') != std::string::npos) return s;
  while (!s.empty() && s.back() == '0') s.pop_back();
  if (!s.empty() && s.back() == '.') s.pop_back();
  return s;
}

const char* si_symbol(int exponent) {
  switch (exponent) {
    case -12: return "p";
    case -9: return "n";
    case -6: return "\xC2\xB5";  // µ
    case -3: return "m";
    case 3: return "k";
    case 6: return "M";
    case 9: return "G";
    case 12: return "T";
    default: return "";
  }
}

int engineering_exponent(double magnitude) {
  if (!(magnitude > 0) || !std::isfinite(magnitude)) return 0;
  const int e = static_cast<int>(std::floor(std::log10(magnitude) / 3.0)) * 3;
  return std::clamp(e, -12, 12);
}

bool is_si_unit(std::string_view unit) {
  static constexpr std::array<std::string_view, 10> kUnits = {"s", "V", "A", "Hz", "W",
                                                              "\xCE\xA9", "F", "H", "Pa", "m"};
  return std::find(kUnits.begin(), kUnits.end(), unit) != kUnits.end();
}

// Smallest "nice" step ≥ raw: 1, 2, 5 × 10^k, or angle steps for degrees.
double nice_step(double raw, const Axis& axis) {
  if (axis.step > 0 && std::isfinite(axis.step)) return axis.step;
  if (!(raw > 0) || !std::isfinite(raw)) return 1;
  if (axis.angle_steps && raw > 7.5 && raw <= 360) {
    for (double s : {10.0, 15.0, 30.0, 45.0, 90.0, 180.0, 360.0})
      if (s >= raw * 0.999) return s;
  }
  const double mag = std::pow(10.0, std::floor(std::log10(raw)));
  double step = 10 * mag;
  for (double m : {1.0, 2.0, 5.0})
    if (m * mag >= raw * 0.999) {
      step = m * mag;
      break;
    }
  if (axis.integer_steps) step = std::max(1.0, std::round(step));
  return step;
}

int decimals_for_step(double step) {
  if (!(step > 0)) return 0;
  return std::max(0, static_cast<int>(std::ceil(-std::log10(step) - 1e-9)));
}

// Largest 1-2-5 value ≤ v (down) or smallest ≥ v (up), for log axis ends.
double log_nice(double v, bool up) {
  const double d = std::floor(std::log10(v));
  const double base = std::pow(10.0, d);
  const std::array<double, 4> mantissa = {1, 2, 5, 10};
  if (up) {
    for (double m : mantissa)
      if (m * base >= v * (1 - 1e-12)) return m * base;
    return 10 * base;
  }
  for (auto it = mantissa.rbegin(); it != mantissa.rend(); ++it)
    if (*it * base <= v * (1 + 1e-12)) return *it * base;
  return base;
}

std::string axis_title(const Axis& axis, const std::string& prefix) {
  std::string t = axis.quantity;
  if (!axis.unit.empty() || !prefix.empty()) t += " (" + prefix + axis.unit + ")";
  return t;
}

int target_ticks(double length_px, bool horizontal) {
  return std::max(3, static_cast<int>(length_px / (horizontal ? 80.0 : 48.0)));
}

}  // namespace

double AxisMapping::operator()(double v) const {
  double a = lo, b = hi, x = v;
  if (log) {
    if (!(v > 0)) return v == 0 || v < 0 ? (p0 < p1 ? -svg::kPixelClamp : svg::kPixelClamp) : kNaN;
    a = std::log10(lo);
    b = std::log10(hi);
    x = std::log10(v);
  }
  if (b == a) return (p0 + p1) / 2;
  return p0 + (x - a) / (b - a) * (p1 - p0);
}

PreparedAxis prepare_axis(const Axis& axis, double data_lo, double data_hi, double p0, double p1,
                          bool horizontal) {
  const int target = target_ticks(std::abs(p1 - p0), horizontal);
  PreparedAxis out;
  Axis a = axis;
  // axis_range and axis_ticks take the tick density through the axis' own default; the target
  // for this pixel length is passed by scaling the span, see below.
  const auto [lo, hi] = axis_range(a, data_lo, data_hi);
  out.map = AxisMapping{lo, hi, p0, p1, axis.scale == AxisScale::log};
  out.ticks = axis_ticks(a, lo, hi, &out.prefix);
  if (axis.scale == AxisScale::linear) {
    // Thin ticks when the default density is too tight for this length.
    std::vector<Tick> labelled;
    for (const auto& t : out.ticks)
      if (t.major) labelled.push_back(t);
    if (static_cast<int>(labelled.size()) > target + 3) {
      std::vector<Tick> thinned;
      for (std::size_t i = 0; i < out.ticks.size(); i += 2) thinned.push_back(out.ticks[i]);
      out.ticks = std::move(thinned);
    }
  }
  return out;
}

void extend(double& lo, double& hi, double v, bool log) {
  if (!std::isfinite(v) || (log && !(v > 0))) return;
  lo = std::min(lo, v);
  hi = std::max(hi, v);
}

std::string format_si(double value, int significant) {
  if (!std::isfinite(value)) return value != value ? "nan" : value > 0 ? "inf" : "-inf";
  if (value == 0) return "0";
  int e = engineering_exponent(std::abs(value));
  double mantissa = value / std::pow(10.0, e);
  char buffer[48];
  std::snprintf(buffer, sizeof buffer, "%.*g", significant, mantissa);
  if (std::abs(std::strtod(buffer, nullptr)) >= 1000 && e < 12) {
    e += 3;
    mantissa = value / std::pow(10.0, e);
    std::snprintf(buffer, sizeof buffer, "%.*g", significant, mantissa);
  }
  return strip_zeros(buffer) + si_symbol(e);
}

std::pair<double, double> axis_range(const Axis& axis, double data_lo, double data_hi) {
  const bool log = axis.scale == AxisScale::log;
  double lo = data_lo, hi = data_hi;
  if (log) {
    if (!(lo > 0) || !std::isfinite(lo)) lo = kNaN;
    if (!(hi > 0) || !std::isfinite(hi)) hi = kNaN;
  }
  if (!std::isfinite(lo) || !std::isfinite(hi) || lo > hi) {
    lo = log ? 1 : 0;
    hi = log ? 10 : 1;
  }
  const bool fixed_lo = std::isfinite(axis.min) && (!log || axis.min > 0);
  const bool fixed_hi = std::isfinite(axis.max) && (!log || axis.max > 0);
  if (fixed_lo) lo = axis.min;
  if (fixed_hi) hi = axis.max;
  if (fixed_lo && fixed_hi && lo < hi) return {lo, hi};
  if (log) {
    if (hi <= lo) {
      lo = lo / 2;
      hi = hi * 2;
    }
    const double nlo = fixed_lo ? lo : log_nice(lo, false);
    double nhi = fixed_hi ? hi : log_nice(hi, true);
    if (nhi <= nlo) nhi = log_nice(nlo * 1.01, true);
    return {nlo, nhi};
  }
  if (hi <= lo) {
    const double pad = lo == 0 ? 1 : std::abs(lo) * 0.1;
    lo -= fixed_lo ? 0 : pad;
    hi += fixed_hi ? 0 : pad;
  }
  const double step = nice_step((hi - lo) / kTickDivisions, axis);
  const double nlo = fixed_lo ? lo : std::floor(lo / step + 1e-9) * step;
  const double nhi = fixed_hi ? hi : std::ceil(hi / step - 1e-9) * step;
  return {nlo, nhi > nlo ? nhi : nlo + step};
}

std::vector<Tick> axis_ticks(const Axis& axis, double lo, double hi, std::string* unit_prefix) {
  std::vector<Tick> ticks;
  if (unit_prefix) unit_prefix->clear();
  if (!(hi > lo)) return ticks;
  if (axis.scale == AxisScale::log) {
    if (!(lo > 0)) return ticks;
    const double decades = std::log10(hi / lo);
    const int d0 = static_cast<int>(std::floor(std::log10(lo)));
    const int d1 = static_cast<int>(std::ceil(std::log10(hi)));
    for (int d = d0; d <= d1; ++d) {
      const double base = std::pow(10.0, d);
      for (int m = 1; m <= 9; ++m) {
        const double v = m * base;
        if (v < lo * (1 - 1e-9) || v > hi * (1 + 1e-9)) continue;
        const bool labelled = m == 1 || (decades <= 3.01 && (m == 2 || m == 5));
        if (!labelled && decades > 6) continue;
        Tick t{v, "", labelled};
        if (labelled)
          t.label = axis.labels == TickLabels::plain ? with_minus(strip_zeros(fixed(v, 6)))
                                                     : with_minus(format_si(v));
        ticks.push_back(std::move(t));
      }
    }
    return ticks;
  }
  const double step = nice_step((hi - lo) / kTickDivisions, axis);
  const auto first = static_cast<long long>(std::ceil(lo / step - 1e-9));
  const auto last = static_cast<long long>(std::floor(hi / step + 1e-9));
  int exponent = 0;
  if (axis.labels == TickLabels::scaled_unit && is_si_unit(axis.unit)) {
    const double biggest = std::max(std::abs(static_cast<double>(first) * step),
                                    std::abs(static_cast<double>(last) * step));
    exponent = engineering_exponent(biggest);
    if (unit_prefix) *unit_prefix = si_symbol(exponent);
  }
  const double scale = std::pow(10.0, exponent);
  for (long long i = first; i <= last; ++i) {
    double v = static_cast<double>(i) * step;
    if (std::abs(v) < step * 1e-9) v = 0;
    std::string label;
    if (axis.labels == TickLabels::si_prefix)
      label = format_si(v);
    else
      label = fixed(v / scale, decimals_for_step(step / scale));
    ticks.push_back({v, with_minus(label), true});
  }
  return ticks;
}

AxesDrawing draw_axes(const Axis& x_axis, const PreparedAxis& xa, const Axis& y_axis, const PreparedAxis& ya,
                      const PlotArea& area) {
  AxesDrawing out;
  std::string grid_major, grid_minor;
  for (const auto& t : xa.ticks) {
    const double x = xa.map(t.value);
    (t.major ? grid_major : grid_minor) += "M" + px(x) + ' ' + px(area.top) + "V" + px(area.bottom);
    out.tick_marks += "M" + px(x) + ' ' + px(area.bottom) + "v" + (t.major ? "5" : "3");
  }
  for (const auto& t : ya.ticks) {
    const double yy = ya.map(t.value);
    (t.major ? grid_major : grid_minor) += "M" + px(area.left) + ' ' + px(yy) + "H" + px(area.right);
    out.tick_marks += "M" + px(area.left) + ' ' + px(yy) + "h" + (t.major ? "-5" : "-3");
  }
  std::string& svg = out.under;
  svg += svg::rect_open(area.left, area.top, area.right - area.left, area.bottom - area.top) +
         " fill=\"#fcfcfc\"/>\n";
  if (!grid_minor.empty())
    svg += "<path d=\"" + grid_minor + "\" stroke=\"#ececec\" stroke-width=\"1\" fill=\"none\"/>\n";
  if (!grid_major.empty())
    svg += "<path d=\"" + grid_major + "\" stroke=\"#d4d4d4\" stroke-width=\"1\" fill=\"none\"/>\n";
  // Tick labels and axis titles.
  svg += "<g fill=\"#333\">\n";
  for (const auto& t : xa.ticks)
    if (!t.label.empty())
      svg += "<text x=\"" + px(xa.map(t.value)) + "\" y=\"" + px(area.bottom + 16) +
             "\" text-anchor=\"middle\">" + xml_escape(t.label) + "</text>\n";
  for (const auto& t : ya.ticks)
    if (!t.label.empty())
      svg += "<text x=\"" + px(area.left - 8) + "\" y=\"" + px(ya.map(t.value) + 4) +
             "\" text-anchor=\"end\">" + xml_escape(t.label) + "</text>\n";
  if (x_axis.show_label)
    svg += "<text x=\"" + px((area.left + area.right) / 2) + "\" y=\"" + px(area.bottom + kXTickSpace + 17) +
           "\" text-anchor=\"middle\">" + xml_escape(axis_title(x_axis, xa.prefix)) + "</text>\n";
  if (y_axis.show_label) {
    const double cy = (area.top + area.bottom) / 2;
    svg += "<text x=\"16\" y=\"" + px(cy) + "\" text-anchor=\"middle\" transform=\"rotate(-90 16 " + px(cy) +
           ")\">" + xml_escape(axis_title(y_axis, ya.prefix)) + "</text>\n";
  }
  svg += "</g>\n";
  return out;
}

}  // namespace periodfit::report
