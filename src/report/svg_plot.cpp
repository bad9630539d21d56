#include "report/svg_plot.hpp"

#include <algorithm>
#include <array>
#include <cmath>
#include <cstdint>

namespace periodfit::report {

using svg::fixed;
using svg::px;
using svg::text_width;

namespace {

constexpr double kInf = std::numeric_limits<double>::infinity();
constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();

constexpr double kMarginRight = 24;
constexpr double kPanelTitleHeight = 20;
constexpr double kXLabelSpace = 22;
constexpr double kPanelGap = 12;
constexpr double kFigureTitleHeight = 32;
constexpr double kTopPadding = 10;

/// The data extent of a panel (NaN/±inf when it has no point that can be shown).
struct DataRange {
  double x_lo = kNaN, x_hi = kNaN, y_lo = kNaN, y_hi = kNaN;
};

DataRange data_range(const Panel& panel) {
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
  return {xl, xh, yl, yh};
}

/// Vertical positions of one panel.
struct PanelLayout {
  double top = 0;        // y of the panel's title or plot area
  double plot_top = 0;   // y of the plot area
  double plot_bottom = 0;
  double bottom = 0;     // y below the x axis labels
};

/// Panels stacked top to bottom; returns the figure's height.
double stack_panels(const Figure& figure, std::vector<PanelLayout>& layout) {
  layout.assign(figure.panels.size(), {});
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
  return y + 4;
}

std::string bars_svg(const BarSeries& s, const Panel& panel, const PreparedAxis& xa, const PreparedAxis& ya) {
  double base = std::isfinite(s.base) ? std::clamp(s.base, ya.map.lo, ya.map.hi) : ya.map.lo;
  if (panel.y.scale == AxisScale::log && !(base > 0)) base = ya.map.lo;
  const double yb = ya.map(base);
  std::string svg = "<g fill=\"" + xml_escape(s.color) + "\">";
  for (std::size_t i = 0; i < std::min(s.x.size(), s.y.size()); ++i) {
    if (!std::isfinite(s.x[i]) || !std::isfinite(s.y[i])) continue;
    const double x0 = xa.map(s.x[i] - s.bar_width / 2);
    const double x1 = xa.map(s.x[i] + s.bar_width / 2);
    const double yv = ya.map(s.y[i]);
    const double top = std::min(yv, yb), h = std::abs(yb - yv);
    if (h <= 0) continue;
    svg += svg::rect_open(std::min(x0, x1), top, std::max(std::abs(x1 - x0), 1.0), h) + "/>";
  }
  return svg + "</g>\n";
}

std::string line_svg(const LineSeries& s, const PreparedAxis& xa, const PreparedAxis& ya) {
  std::string d;
  bool pen_down = false;
  for (std::size_t i = 0; i < std::min(s.x.size(), s.y.size()); ++i) {
    const double x = xa.map(s.x[i]), yy = ya.map(s.y[i]);
    if (!std::isfinite(s.x[i]) || !std::isfinite(s.y[i]) || !std::isfinite(x) || !std::isfinite(yy)) {
      pen_down = false;
      continue;
    }
    d += (pen_down ? "L" : "M") + px(x) + ' ' + px(yy);
    pen_down = true;
  }
  if (d.empty()) return {};
  return "<path d=\"" + d + "\" fill=\"none\" stroke=\"" + xml_escape(s.color) + "\" stroke-width=\"" +
         fixed(s.width, 1) + "\" stroke-linejoin=\"round\"" + (s.dashed ? " stroke-dasharray=\"6 4\"" : "") + "/>\n";
}

std::string points_svg(const PointSeries& s, const PreparedAxis& xa, const PreparedAxis& ya, double plot_bottom) {
  std::string bars, marks;
  for (std::size_t i = 0; i < std::min(s.x.size(), s.y.size()); ++i) {
    if (!std::isfinite(s.x[i]) || !std::isfinite(s.y[i])) continue;
    const double x = xa.map(s.x[i]), yy = ya.map(s.y[i]);
    if (!std::isfinite(x) || !std::isfinite(yy)) continue;
    if (i < s.y_low.size() && i < s.y_high.size() && !std::isnan(s.y_low[i]) && !std::isnan(s.y_high[i])) {
      double y0 = ya.map(s.y_low[i]), y1 = ya.map(s.y_high[i]);
      if (std::isnan(y0)) y0 = plot_bottom + 10;  // below a log axis: to the bottom
      if (std::isnan(y1)) y1 = y0;
      const double cap = std::max(2.0, s.size);
      bars += "M" + px(x) + ' ' + px(y0) + "V" + px(y1) + "M" + px(x - cap) + ' ' + px(y0) + "h" + px(2 * cap) +
              "M" + px(x - cap) + ' ' + px(y1) + "h" + px(2 * cap);
    }
    marks += svg::marker(s.marker, x, yy, s.size);
  }
  std::string svg;
  if (!bars.empty())
    svg += "<path d=\"" + bars + "\" stroke=\"" + xml_escape(s.color) + "\" stroke-width=\"1.1\" fill=\"none\"/>\n";
  if (!marks.empty()) svg += "<g fill=\"" + xml_escape(s.color) + "\">" + marks + "</g>\n";
  return svg;
}

struct LegendEntry {
  enum class Kind { line, points, bars } kind;
  std::string name;
  std::string color;
  bool dashed = false;
  bool error_bars = false;
  Marker marker = Marker::circle;
};

std::vector<LegendEntry> legend_entries(const Panel& panel) {
  std::vector<LegendEntry> entries;
  for (const auto& s : panel.bars)
    if (!s.name.empty()) entries.push_back({LegendEntry::Kind::bars, s.name, s.color});
  for (const auto& s : panel.lines)
    if (!s.name.empty()) entries.push_back({LegendEntry::Kind::line, s.name, s.color, s.dashed});
  for (const auto& s : panel.points)
    if (!s.name.empty())
      entries.push_back({LegendEntry::Kind::points, s.name, s.color, false, !s.y_low.empty() && !s.y_high.empty(),
                         s.marker});
  return entries;
}

/// Data points (and error bars) of the panel inside the box at (bx, by) of box_w × box_h, with
/// a 4 px margin: the legend goes where this is smallest.
std::size_t points_under(const Panel& panel, const PreparedAxis& xa, const PreparedAxis& ya, double plot_bottom,
                         double bx, double by, double box_w, double box_h) {
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
      if (std::isnan(y0)) y0 = plot_bottom;
      if (std::isnan(y1)) y1 = y0;
      if (x >= bx - 4 && x <= bx + box_w + 4 && std::max(y0, y1) >= by - 4 && std::min(y0, y1) <= by + box_h + 4)
        ++count;
    }
  for (const auto& s : panel.bars)
    for (std::size_t i = 0; i < std::min(s.x.size(), s.y.size()); ++i) {
      const double x = xa.map(s.x[i]);
      if (x >= bx - 4 && x <= bx + box_w + 4 && ya.map(s.y[i]) <= by + box_h) ++count;
    }
  return count;
}

std::string legend_row_svg(const LegendEntry& e, double sx, double cy) {
  std::string svg;
  const std::string color = xml_escape(e.color);
  switch (e.kind) {
    case LegendEntry::Kind::line:
      svg += "<path d=\"M" + px(sx) + ' ' + px(cy) + "h24\" stroke=\"" + color + "\" stroke-width=\"2\"" +
             (e.dashed ? " stroke-dasharray=\"6 4\"" : "") + "/>\n";
      break;
    case LegendEntry::Kind::points:
      if (e.error_bars)
        svg += "<path d=\"M" + px(sx + 12) + ' ' + px(cy - 6) + "v12M" + px(sx + 9) + ' ' + px(cy - 6) + "h6M" +
               px(sx + 9) + ' ' + px(cy + 6) + "h6\" stroke=\"" + color + "\" stroke-width=\"1.1\"/>\n";
      svg += "<g fill=\"" + color + "\">" + svg::marker(e.marker, sx + 12, cy, 3) + "</g>\n";
      break;
    case LegendEntry::Kind::bars:
      svg += "<rect x=\"" + px(sx + 6) + "\" y=\"" + px(cy - 6) + "\" width=\"12\" height=\"12\" fill=\"" + color +
             "\"/>\n";
      break;
  }
  return svg + "<text x=\"" + px(sx + 32) + "\" y=\"" + px(cy + 4) + "\" fill=\"#222\">" + xml_escape(e.name) +
         "</text>\n";
}

/// The legend in the corner of the plot area with the fewest data points under it.
std::string legend_svg(const Panel& panel, const PreparedAxis& xa, const PreparedAxis& ya, const PlotArea& area) {
  const std::vector<LegendEntry> entries = legend_entries(panel);
  if (!panel.legend || entries.empty()) return {};
  double text_w = 0;
  for (const auto& e : entries) text_w = std::max(text_w, text_width(e.name));
  const double box_w = text_w + 44, row_h = 18, box_h = row_h * double(entries.size()) + 8;
  const double pad = 8;
  const std::array<std::pair<double, double>, 4> corners = {{
      {area.right - pad - box_w, area.top + pad},
      {area.left + pad, area.top + pad},
      {area.right - pad - box_w, area.bottom - pad - box_h},
      {area.left + pad, area.bottom - pad - box_h},
  }};
  std::size_t best = 0, best_count = SIZE_MAX;
  for (std::size_t c = 0; c < corners.size(); ++c) {
    const std::size_t count =
        points_under(panel, xa, ya, area.bottom, corners[c].first, corners[c].second, box_w, box_h);
    if (count < best_count) {
      best_count = count;
      best = c;
    }
  }
  const auto [bx, by] = corners[best];
  std::string svg = "<g class=\"legend\">\n" + svg::rect_open(bx, by, box_w, box_h) +
                    " fill=\"#ffffff\" fill-opacity=\"0.92\" stroke=\"#999\" stroke-width=\"0.8\"/>\n";
  for (std::size_t k = 0; k < entries.size(); ++k)
    svg += legend_row_svg(entries[k], bx + 8, by + 4 + row_h * (double(k) + 0.5));
  return svg + "</g>\n";
}

/// One panel: axes under the series, the series clipped to the plot area (`clip_id`), tick marks
/// and frame above them, then the legend.
std::string panel_svg(const Panel& panel, const PanelLayout& L, const DataRange& range, double plot_left,
                      double plot_right, const std::string& clip_id) {
  const PlotArea area{plot_left, plot_right, L.plot_top, L.plot_bottom};
  const PreparedAxis xa = prepare_axis(panel.x, range.x_lo, range.x_hi, plot_left, plot_right, true);
  const PreparedAxis ya = prepare_axis(panel.y, range.y_lo, range.y_hi, L.plot_bottom, L.plot_top, false);
  std::string svg = "<g class=\"panel\">\n";
  if (!panel.title.empty())
    svg += "<text x=\"" + px(plot_left) + "\" y=\"" + px(L.top + 14) + "\" font-size=\"13\" fill=\"#222\">" +
           xml_escape(panel.title) + "</text>\n";
  const AxesDrawing axes = draw_axes(panel.x, xa, panel.y, ya, area);
  svg += axes.under;
  svg += "<g clip-path=\"url(#" + clip_id + ")\">\n";
  for (const auto& s : panel.bars) svg += bars_svg(s, panel, xa, ya);
  for (const auto& s : panel.lines) svg += line_svg(s, xa, ya);
  for (const auto& s : panel.points) svg += points_svg(s, xa, ya, L.plot_bottom);
  svg += "</g>\n";
  svg += "<path d=\"" + axes.tick_marks + "\" stroke=\"#444\" stroke-width=\"1\" fill=\"none\"/>\n";
  svg += svg::rect_open(plot_left, L.plot_top, plot_right - plot_left, L.plot_bottom - L.plot_top) +
         " fill=\"none\" stroke=\"#444\" stroke-width=\"1\"/>\n";
  svg += legend_svg(panel, xa, ya, area);
  return svg + "</g>\n";
}

}  // namespace

std::string render_svg(const Figure& figure) {
  const std::string id = svg::sanitize_id(figure.id);
  const double width = std::max(figure.width_px, 200.0);

  // Data ranges per panel; the left margin fits the widest y tick label of all.
  std::vector<DataRange> ranges;
  for (const Panel& panel : figure.panels) ranges.push_back(data_range(panel));
  double margin_left = 56;
  for (std::size_t p = 0; p < figure.panels.size(); ++p) {
    const Panel& panel = figure.panels[p];
    const auto [lo, hi] = axis_range(panel.y, ranges[p].y_lo, ranges[p].y_hi);
    for (const auto& t : axis_ticks(panel.y, lo, hi))
      margin_left = std::max(margin_left, 34 + text_width(t.label) + 8);
  }
  const double plot_left = margin_left;
  const double plot_right = width - kMarginRight;
  std::vector<PanelLayout> layout;
  const double height = stack_panels(figure, layout);

  std::string svg;
  svg.reserve(32768);
  svg += "<svg xmlns=\"http://www.w3.org/2000/svg\" version=\"1.1\" width=\"" + px(width) + "\" height=\"" +
         px(height) + "\" viewBox=\"0 0 " + px(width) + ' ' + px(height) + "\" role=\"img\" aria-labelledby=\"" +
         id + "-title\" font-family=\"sans-serif\" font-size=\"" + fixed(svg::kFontSize, 0) + "\">\n";
  svg += "<title id=\"" + id + "-title\">" + xml_escape(figure.title.empty() ? std::string("plot") : figure.title) +
         "</title>\n";
  svg += "<rect x=\"0\" y=\"0\" width=\"" + px(width) + "\" height=\"" + px(height) + "\" fill=\"#ffffff\"/>\n";
  if (!figure.title.empty())
    svg += "<text x=\"" + px(plot_left) + "\" y=\"" + px(kTopPadding + 18) + "\" font-size=\"" +
           fixed(svg::kTitleFontSize, 0) + "\" font-weight=\"bold\" fill=\"#222\">" + xml_escape(figure.title) +
           "</text>\n";
  svg += "<defs>\n";
  for (std::size_t p = 0; p < figure.panels.size(); ++p)
    svg += svg::clip_path(id + "-clip" + std::to_string(p), plot_left, layout[p].plot_top, plot_right - plot_left,
                          layout[p].plot_bottom - layout[p].plot_top);
  svg += "</defs>\n";
  for (std::size_t p = 0; p < figure.panels.size(); ++p)
    svg += panel_svg(figure.panels[p], layout[p], ranges[p], plot_left, plot_right,
                     id + "-clip" + std::to_string(p));
  svg += "</svg>\n";
  return svg;
}

std::string svg_document(const Figure& figure) {
  return "<?xml version=\"1.0\" encoding=\"UTF-8\"?>\n" + render_svg(figure);
}

}  // namespace periodfit::report
