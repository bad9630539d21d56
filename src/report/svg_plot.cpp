#include "report/svg_plot.hpp"

#include <algorithm>
#include <array>
#include <charconv>
#include <cstdint>
#include <cmath>
#include <cstdio>
#include <numbers>

namespace periodfit::report {

namespace {

constexpr double kInf = std::numeric_limits<double>::infinity();
constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();
// Pixel coordinates are clamped to this so points far outside the range still give sane SVG
// (the panel's clip path hides them).
constexpr double kPixelClamp = 1e5;
// Average advance of a sans-serif glyph relative to the font size; used to size the legend and
// the margin for y tick labels (common practice for text-free layout).
constexpr double kGlyphWidth = 0.58;
constexpr double kFontSize = 12;
constexpr double kTitleFontSize = 15;
// Linear axes aim at about this many tick intervals (20 dB steps over 120 dB, 90° over 360°).
constexpr double kTickDivisions = 6;

std::string fixed(double v, int decimals) {
  if (!std::isfinite(v)) v = 0;
  char buffer[48];
  const auto [end, ec] =
      std::to_chars(buffer, buffer + sizeof buffer, v, std::chars_format::fixed, decimals);
  std::string s(buffer, ec == std::errc{} ? end : buffer);
  if (s == "-0" || s == "-0.0" || s == "-0.00") s.erase(0, 1);
  return s;
}

std::string px(double v) { return fixed(std::clamp(v, -kPixelClamp, kPixelClamp), 1); }

std::size_t display_width(std::string_view s) {
  return static_cast<std::size_t>(std::count_if(
      s.begin(), s.end(), [](char c) { return (static_cast<unsigned char>(c) & 0xC0) != 0x80; }));
}

double text_width(std::string_view s, double font_size = kFontSize) {
  return static_cast<double>(display_width(s)) * kGlyphWidth * font_size;
}

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

struct Mapping {
  double lo = 0, hi = 1;  // axis range in data units
  double p0 = 0, p1 = 1;  // pixels for lo and hi
  bool log = false;
  double operator()(double v) const {
    double a = lo, b = hi, x = v;
    if (log) {
      if (!(v > 0)) return v == 0 || v < 0 ? (p0 < p1 ? -kPixelClamp : kPixelClamp) : kNaN;
      a = std::log10(lo);
      b = std::log10(hi);
      x = std::log10(v);
    }
    if (b == a) return (p0 + p1) / 2;
    return p0 + (x - a) / (b - a) * (p1 - p0);
  }
};

std::string sanitize_id(std::string_view id) {
  std::string out;
  for (char c : id)
    if (std::isalnum(static_cast<unsigned char>(c)) || c == '-' || c == '_') out += c;
  if (out.empty() || !std::isalpha(static_cast<unsigned char>(out[0]))) out.insert(0, "p");
  return out;
}

std::string axis_title(const Axis& axis, const std::string& prefix) {
  std::string t = axis.quantity;
  if (!axis.unit.empty() || !prefix.empty()) t += " (" + prefix + axis.unit + ")";
  return t;
}

struct LegendEntry {
  enum class Kind { line, points, bars } kind;
  std::string name;
  std::string color;
  bool dashed = false;
  bool error_bars = false;
  Marker marker = Marker::circle;
};

std::string marker_svg(Marker marker, double x, double y, double size) {
  if (marker == Marker::square)
    return "<rect x=\"" + px(x - size) + "\" y=\"" + px(y - size) + "\" width=\"" +
           px(2 * size) + "\" height=\"" + px(2 * size) + "\"/>";
  return "<circle cx=\"" + px(x) + "\" cy=\"" + px(y) + "\" r=\"" + fixed(size, 1) + "\"/>";
}

struct PanelLayout {
  double top = 0;        // y of the panel's title or plot area
  double plot_top = 0;   // y of the plot area
  double plot_bottom = 0;
  double bottom = 0;     // y below the x axis labels
};

constexpr double kMarginRight = 24;
constexpr double kPanelTitleHeight = 20;
constexpr double kXTickSpace = 18;
constexpr double kXLabelSpace = 22;
constexpr double kPanelGap = 12;
constexpr double kFigureTitleHeight = 32;
constexpr double kTopPadding = 10;

struct PreparedAxis {
  Mapping map;
  std::vector<Tick> ticks;
  std::string prefix;
};

int target_ticks(double length_px, bool horizontal) {
  return std::max(3, static_cast<int>(length_px / (horizontal ? 80.0 : 48.0)));
}

PreparedAxis prepare_axis(const Axis& axis, double data_lo, double data_hi, double p0, double p1,
                          bool horizontal) {
  const int target = target_ticks(std::abs(p1 - p0), horizontal);
  PreparedAxis out;
  Axis a = axis;
  // axis_range and axis_ticks take the tick density through the axis' own default; the target
  // for this pixel length is passed by scaling the span, see below.
  const auto [lo, hi] = axis_range(a, data_lo, data_hi);
  out.map = Mapping{lo, hi, p0, p1, axis.scale == AxisScale::log};
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

}  // namespace

void extend(double& lo, double& hi, double v, bool log) {
  if (!std::isfinite(v) || (log && !(v > 0))) return;
  lo = std::min(lo, v);
  hi = std::max(hi, v);
}

std::string xml_escape(std::string_view text) {
  std::string out;
  out.reserve(text.size());
  const auto* s = reinterpret_cast<const unsigned char*>(text.data());
  const std::size_t n = text.size();
  std::size_t i = 0;
  while (i < n) {
    const unsigned char c = s[i];
    if (c < 0x80) {
      switch (c) {
        case '&': out += "&amp;"; break;
        case '<': out += "&lt;"; break;
        case '>': out += "&gt;"; break;
        case '"': out += "&quot;"; break;
        case '\'': out += "&#39;"; break;
        case '\t':
        case '\n':
        case '\r': out += static_cast<char>(c); break;
        default:
          if (c < 0x20 || c == 0x7F)
            out += "\xEF\xBF\xBD";
          else
            out += static_cast<char>(c);
      }
      ++i;
      continue;
    }
    // A well-formed UTF-8 sequence (no overlongs, no surrogates, ≤ U+10FFFF) is copied whole.
    std::size_t len = 0;
    std::uint32_t cp = 0;
    if ((c & 0xE0) == 0xC0) { len = 2; cp = c & 0x1Fu; }
    else if ((c & 0xF0) == 0xE0) { len = 3; cp = c & 0x0Fu; }
    else if ((c & 0xF8) == 0xF0) { len = 4; cp = c & 0x07u; }
    bool ok = len > 0 && i + len <= n;
    for (std::size_t k = 1; ok && k < len; ++k) {
      if ((s[i + k] & 0xC0) != 0x80) ok = false;
      else cp = (cp << 6) | (s[i + k] & 0x3Fu);
    }
    if (ok) {
      const std::uint32_t min_cp = len == 2 ? 0x80 : len == 3 ? 0x800 : 0x10000;
      ok = cp >= min_cp && cp <= 0x10FFFF && !(cp >= 0xD800 && cp <= 0xDFFF) && cp != 0xFFFE &&
           cp != 0xFFFF && !(cp >= 0x80 && cp <= 0x9F);
    }
    if (ok) {
      out.append(text.substr(i, len));
      i += len;
    } else {
      out += "\xEF\xBF\xBD";
      ++i;
    }
  }
  return out;
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

std::string render_svg(const Figure& figure) {
  const std::string id = sanitize_id(figure.id);
  const double width = std::max(figure.width_px, 200.0);

  // Data ranges and ticks per panel; the left margin fits the widest y tick label of all.
  struct Prepared {
    double x_lo = kNaN, x_hi = kNaN, y_lo = kNaN, y_hi = kNaN;
  };
  std::vector<Prepared> ranges(figure.panels.size());
  for (std::size_t p = 0; p < figure.panels.size(); ++p) {
    const Panel& panel = figure.panels[p];
    const bool xlog = panel.x.scale == AxisScale::log;
    const bool ylog = panel.y.scale == AxisScale::log;
    double xl = kInf, xh = -kInf, yl = kInf, yh = -kInf;
    for (const auto& s : panel.lines)
      for (std::size_t i = 0; i < std::min(s.x.size(), s.y.size()); ++i)
        if (std::isfinite(s.x[i]) && std::isfinite(s.y[i])) {
          extend(xl, xh, s.x[i], xlog);
          extend(yl, yh, s.y[i], ylog);
        }
    for (const auto& s : panel.points)
      for (std::size_t i = 0; i < std::min(s.x.size(), s.y.size()); ++i)
        if (std::isfinite(s.x[i]) && std::isfinite(s.y[i])) {
          extend(xl, xh, s.x[i], xlog);
          extend(yl, yh, s.y[i], ylog);
          if (i < s.y_low.size()) extend(yl, yh, s.y_low[i], ylog);
          if (i < s.y_high.size()) extend(yl, yh, s.y_high[i], ylog);
        }
    for (const auto& s : panel.bars)
      for (std::size_t i = 0; i < std::min(s.x.size(), s.y.size()); ++i)
        if (std::isfinite(s.x[i]) && std::isfinite(s.y[i])) {
          extend(xl, xh, s.x[i] - s.bar_width / 2, xlog);
          extend(xl, xh, s.x[i] + s.bar_width / 2, xlog);
          extend(yl, yh, s.y[i], ylog);
          if (std::isfinite(s.base)) extend(yl, yh, s.base, ylog);
        }
    ranges[p] = {xl, xh, yl, yh};
  }
  double margin_left = 56;
  for (std::size_t p = 0; p < figure.panels.size(); ++p) {
    const Panel& panel = figure.panels[p];
    const auto [lo, hi] = axis_range(panel.y, ranges[p].y_lo, ranges[p].y_hi);
    for (const auto& t : axis_ticks(panel.y, lo, hi))
      margin_left = std::max(margin_left, 34 + text_width(t.label) + 8);
  }
  const double plot_left = margin_left;
  const double plot_right = width - kMarginRight;

  std::vector<PanelLayout> layout(figure.panels.size());
  double y = kTopPadding + (figure.title.empty() ? 0 : kFigureTitleHeight);
  for (std::size_t p = 0; p < figure.panels.size(); ++p) {
    const Panel& panel = figure.panels[p];
    layout[p].top = y;
    if (!panel.title.empty()) y += kPanelTitleHeight;
    layout[p].plot_top = y;
    y += std::max(panel.height_px, 60.0);
    layout[p].plot_bottom = y;
    y += kXTickSpace + (panel.x.show_label ? kXLabelSpace : 0);
    layout[p].bottom = y;
    y += kPanelGap;
  }
  const double height = y + 4;

  std::string svg;
  svg.reserve(32768);
  svg += "<svg xmlns=\"http://www.w3.org/2000/svg\" version=\"1.1\" width=\"" + px(width) +
         "\" height=\"" + px(height) + "\" viewBox=\"0 0 " + px(width) + ' ' + px(height) +
         "\" role=\"img\" aria-labelledby=\"" + id + "-title\" font-family=\"sans-serif\" font-size=\"" +
         fixed(kFontSize, 0) + "\">\n";
  svg += "<title id=\"" + id + "-title\">" +
         xml_escape(figure.title.empty() ? std::string("plot") : figure.title) + "</title>\n";
  svg += "<rect x=\"0\" y=\"0\" width=\"" + px(width) + "\" height=\"" + px(height) +
         "\" fill=\"#ffffff\"/>\n";
  if (!figure.title.empty())
    svg += "<text x=\"" + px(plot_left) + "\" y=\"" + px(kTopPadding + 18) + "\" font-size=\"" +
           fixed(kTitleFontSize, 0) + "\" font-weight=\"bold\" fill=\"#222\">" +
           xml_escape(figure.title) + "</text>\n";

  svg += "<defs>\n";
  for (std::size_t p = 0; p < figure.panels.size(); ++p)
    svg += "<clipPath id=\"" + id + "-clip" + std::to_string(p) + "\"><rect x=\"" +
           px(plot_left) + "\" y=\"" + px(layout[p].plot_top) + "\" width=\"" +
           px(plot_right - plot_left) + "\" height=\"" +
           px(layout[p].plot_bottom - layout[p].plot_top) + "\"/></clipPath>\n";
  svg += "</defs>\n";

  for (std::size_t p = 0; p < figure.panels.size(); ++p) {
    const Panel& panel = figure.panels[p];
    const PanelLayout& L = layout[p];
    const PreparedAxis xa =
        prepare_axis(panel.x, ranges[p].x_lo, ranges[p].x_hi, plot_left, plot_right, true);
    const PreparedAxis ya =
        prepare_axis(panel.y, ranges[p].y_lo, ranges[p].y_hi, L.plot_bottom, L.plot_top, false);
    svg += "<g class=\"panel\">\n";
    if (!panel.title.empty())
      svg += "<text x=\"" + px(plot_left) + "\" y=\"" + px(L.top + 14) +
             "\" font-size=\"13\" fill=\"#222\">" + xml_escape(panel.title) + "</text>\n";
    // Grid.
    std::string grid_major, grid_minor, tick_marks;
    for (const auto& t : xa.ticks) {
      const double x = xa.map(t.value);
      (t.major ? grid_major : grid_minor) +=
          "M" + px(x) + ' ' + px(L.plot_top) + "V" + px(L.plot_bottom);
      tick_marks += "M" + px(x) + ' ' + px(L.plot_bottom) + "v" + (t.major ? "5" : "3");
    }
    for (const auto& t : ya.ticks) {
      const double yy = ya.map(t.value);
      (t.major ? grid_major : grid_minor) +=
          "M" + px(plot_left) + ' ' + px(yy) + "H" + px(plot_right);
      tick_marks += "M" + px(plot_left) + ' ' + px(yy) + "h" + (t.major ? "-5" : "-3");
    }
    svg += "<rect x=\"" + px(plot_left) + "\" y=\"" + px(L.plot_top) + "\" width=\"" +
           px(plot_right - plot_left) + "\" height=\"" + px(L.plot_bottom - L.plot_top) +
           "\" fill=\"#fcfcfc\"/>\n";
    if (!grid_minor.empty())
      svg += "<path d=\"" + grid_minor + "\" stroke=\"#ececec\" stroke-width=\"1\" fill=\"none\"/>\n";
    if (!grid_major.empty())
      svg += "<path d=\"" + grid_major + "\" stroke=\"#d4d4d4\" stroke-width=\"1\" fill=\"none\"/>\n";
    // Tick labels and axis titles.
    svg += "<g fill=\"#333\">\n";
    for (const auto& t : xa.ticks)
      if (!t.label.empty())
        svg += "<text x=\"" + px(xa.map(t.value)) + "\" y=\"" + px(L.plot_bottom + 16) +
               "\" text-anchor=\"middle\">" + xml_escape(t.label) + "</text>\n";
    for (const auto& t : ya.ticks)
      if (!t.label.empty())
        svg += "<text x=\"" + px(plot_left - 8) + "\" y=\"" + px(ya.map(t.value) + 4) +
               "\" text-anchor=\"end\">" + xml_escape(t.label) + "</text>\n";
    if (panel.x.show_label)
      svg += "<text x=\"" + px((plot_left + plot_right) / 2) + "\" y=\"" +
             px(L.plot_bottom + kXTickSpace + 17) + "\" text-anchor=\"middle\">" +
             xml_escape(axis_title(panel.x, xa.prefix)) + "</text>\n";
    if (panel.y.show_label) {
      const double cy = (L.plot_top + L.plot_bottom) / 2;
      svg += "<text x=\"16\" y=\"" + px(cy) + "\" text-anchor=\"middle\" transform=\"rotate(-90 16 " +
             px(cy) + ")\">" + xml_escape(axis_title(panel.y, ya.prefix)) + "</text>\n";
    }
    svg += "</g>\n";

    // Series, clipped to the plot area.
    svg += "<g clip-path=\"url(#" + id + "-clip" + std::to_string(p) + ")\">\n";
    for (const auto& s : panel.bars) {
      double base = std::isfinite(s.base) ? std::clamp(s.base, ya.map.lo, ya.map.hi) : ya.map.lo;
      if (panel.y.scale == AxisScale::log && !(base > 0)) base = ya.map.lo;
      const double yb = ya.map(base);
      svg += "<g fill=\"" + xml_escape(s.color) + "\">";
      for (std::size_t i = 0; i < std::min(s.x.size(), s.y.size()); ++i) {
        if (!std::isfinite(s.x[i]) || !std::isfinite(s.y[i])) continue;
        const double x0 = xa.map(s.x[i] - s.bar_width / 2);
        const double x1 = xa.map(s.x[i] + s.bar_width / 2);
        const double yv = ya.map(s.y[i]);
        const double top = std::min(yv, yb), h = std::abs(yb - yv);
        if (h <= 0) continue;
        svg += "<rect x=\"" + px(std::min(x0, x1)) + "\" y=\"" + px(top) + "\" width=\"" +
               px(std::max(std::abs(x1 - x0), 1.0)) + "\" height=\"" + px(h) + "\"/>";
      }
      svg += "</g>\n";
    }
    for (const auto& s : panel.lines) {
      std::string d;
      bool pen_down = false;
      for (std::size_t i = 0; i < std::min(s.x.size(), s.y.size()); ++i) {
        const double x = xa.map(s.x[i]), yy = ya.map(s.y[i]);
        if (!std::isfinite(s.x[i]) || !std::isfinite(s.y[i]) || !std::isfinite(x) ||
            !std::isfinite(yy)) {
          pen_down = false;
          continue;
        }
        d += (pen_down ? "L" : "M") + px(x) + ' ' + px(yy);
        pen_down = true;
      }
      if (d.empty()) continue;
      svg += "<path d=\"" + d + "\" fill=\"none\" stroke=\"" + xml_escape(s.color) +
             "\" stroke-width=\"" + fixed(s.width, 1) + "\" stroke-linejoin=\"round\"" +
             (s.dashed ? " stroke-dasharray=\"6 4\"" : "") + "/>\n";
    }
    for (const auto& s : panel.points) {
      std::string bars, marks;
      for (std::size_t i = 0; i < std::min(s.x.size(), s.y.size()); ++i) {
        if (!std::isfinite(s.x[i]) || !std::isfinite(s.y[i])) continue;
        const double x = xa.map(s.x[i]), yy = ya.map(s.y[i]);
        if (!std::isfinite(x) || !std::isfinite(yy)) continue;
        if (i < s.y_low.size() && i < s.y_high.size() && !std::isnan(s.y_low[i]) &&
            !std::isnan(s.y_high[i])) {
          double y0 = ya.map(s.y_low[i]), y1 = ya.map(s.y_high[i]);
          if (std::isnan(y0)) y0 = L.plot_bottom + 10;  // below a log axis: to the bottom
          if (std::isnan(y1)) y1 = y0;
          const double cap = std::max(2.0, s.size);
          bars += "M" + px(x) + ' ' + px(y0) + "V" + px(y1) + "M" + px(x - cap) + ' ' + px(y0) +
                  "h" + px(2 * cap) + "M" + px(x - cap) + ' ' + px(y1) + "h" + px(2 * cap);
        }
        marks += marker_svg(s.marker, x, yy, s.size);
      }
      if (!bars.empty())
        svg += "<path d=\"" + bars + "\" stroke=\"" + xml_escape(s.color) +
               "\" stroke-width=\"1.1\" fill=\"none\"/>\n";
      if (!marks.empty()) svg += "<g fill=\"" + xml_escape(s.color) + "\">" + marks + "</g>\n";
    }
    svg += "</g>\n";
    svg += "<path d=\"" + tick_marks + "\" stroke=\"#444\" stroke-width=\"1\" fill=\"none\"/>\n";
    svg += "<rect x=\"" + px(plot_left) + "\" y=\"" + px(L.plot_top) + "\" width=\"" +
           px(plot_right - plot_left) + "\" height=\"" + px(L.plot_bottom - L.plot_top) +
           "\" fill=\"none\" stroke=\"#444\" stroke-width=\"1\"/>\n";

    // Legend in the corner with the fewest data points under it.
    std::vector<LegendEntry> entries;
    for (const auto& s : panel.bars)
      if (!s.name.empty()) entries.push_back({LegendEntry::Kind::bars, s.name, s.color});
    for (const auto& s : panel.lines)
      if (!s.name.empty())
        entries.push_back({LegendEntry::Kind::line, s.name, s.color, s.dashed});
    for (const auto& s : panel.points)
      if (!s.name.empty())
        entries.push_back({LegendEntry::Kind::points, s.name, s.color, false,
                           !s.y_low.empty() && !s.y_high.empty(), s.marker});
    if (panel.legend && !entries.empty()) {
      double text_w = 0;
      for (const auto& e : entries) text_w = std::max(text_w, text_width(e.name));
      const double box_w = text_w + 44, row_h = 18, box_h = row_h * double(entries.size()) + 8;
      const double pad = 8;
      const std::array<std::pair<double, double>, 4> corners = {{
          {plot_right - pad - box_w, L.plot_top + pad},
          {plot_left + pad, L.plot_top + pad},
          {plot_right - pad - box_w, L.plot_bottom - pad - box_h},
          {plot_left + pad, L.plot_bottom - pad - box_h},
      }};
      std::size_t best = 0, best_count = SIZE_MAX;
      for (std::size_t c = 0; c < corners.size(); ++c) {
        // Plain variables, not a structured binding: clang 14 (the fuzz build) cannot capture
        // structured bindings in a lambda (P1091 arrived in clang 16).
        const double bx = corners[c].first, by = corners[c].second;
        std::size_t count = 0;
        const auto hit = [&](double xv, double yv) {
          const double x = xa.map(xv), yy = ya.map(yv);
          if (x >= bx - 4 && x <= bx + box_w + 4 && yy >= by - 4 && yy <= by + box_h + 4) ++count;
        };
        for (const auto& s : panel.lines)
          for (std::size_t i = 0; i < std::min(s.x.size(), s.y.size()); ++i) hit(s.x[i], s.y[i]);
        for (const auto& s : panel.points)
          for (std::size_t i = 0; i < std::min(s.x.size(), s.y.size()); ++i) {
            hit(s.x[i], s.y[i]);
            // An error bar counts when its vertical extent crosses the box.
            if (i >= s.y_low.size() || i >= s.y_high.size()) continue;
            const double x = xa.map(s.x[i]);
            double y0 = ya.map(s.y_low[i]), y1 = ya.map(s.y_high[i]);
            if (std::isnan(y0)) y0 = L.plot_bottom;
            if (std::isnan(y1)) y1 = y0;
            if (x >= bx - 4 && x <= bx + box_w + 4 && std::max(y0, y1) >= by - 4 &&
                std::min(y0, y1) <= by + box_h + 4)
              ++count;
          }
        for (const auto& s : panel.bars)
          for (std::size_t i = 0; i < std::min(s.x.size(), s.y.size()); ++i) {
            const double x = xa.map(s.x[i]);
            if (x >= bx - 4 && x <= bx + box_w + 4 && ya.map(s.y[i]) <= by + box_h) ++count;
          }
        if (count < best_count) {
          best_count = count;
          best = c;
        }
      }
      const auto [bx, by] = corners[best];
      svg += "<g class=\"legend\">\n<rect x=\"" + px(bx) + "\" y=\"" + px(by) + "\" width=\"" +
             px(box_w) + "\" height=\"" + px(box_h) +
             "\" fill=\"#ffffff\" fill-opacity=\"0.92\" stroke=\"#999\" stroke-width=\"0.8\"/>\n";
      for (std::size_t k = 0; k < entries.size(); ++k) {
        const auto& e = entries[k];
        const double cy = by + 4 + row_h * (double(k) + 0.5);
        const double sx = bx + 8;
        const std::string color = xml_escape(e.color);
        switch (e.kind) {
          case LegendEntry::Kind::line:
            svg += "<path d=\"M" + px(sx) + ' ' + px(cy) + "h24\" stroke=\"" + color +
                   "\" stroke-width=\"2\"" + (e.dashed ? " stroke-dasharray=\"6 4\"" : "") + "/>\n";
            break;
          case LegendEntry::Kind::points:
            if (e.error_bars)
              svg += "<path d=\"M" + px(sx + 12) + ' ' + px(cy - 6) + "v12M" + px(sx + 9) + ' ' +
                     px(cy - 6) + "h6M" + px(sx + 9) + ' ' + px(cy + 6) + "h6\" stroke=\"" + color +
                     "\" stroke-width=\"1.1\"/>\n";
            svg += "<g fill=\"" + color + "\">" + marker_svg(e.marker, sx + 12, cy, 3) + "</g>\n";
            break;
          case LegendEntry::Kind::bars:
            svg += "<rect x=\"" + px(sx + 6) + "\" y=\"" + px(cy - 6) +
                   "\" width=\"12\" height=\"12\" fill=\"" + color + "\"/>\n";
            break;
        }
        svg += "<text x=\"" + px(sx + 32) + "\" y=\"" + px(cy + 4) + "\" fill=\"#222\">" +
               xml_escape(e.name) + "</text>\n";
      }
      svg += "</g>\n";
    }
    svg += "</g>\n";
  }
  svg += "</svg>\n";
  return svg;
}

std::string svg_document(const Figure& figure) {
  return "<?xml version=\"1.0\" encoding=\"UTF-8\"?>\n" + render_svg(figure);
}

}  // namespace periodfit::report
