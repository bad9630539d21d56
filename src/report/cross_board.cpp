#include "report/cross_board.hpp"

#include <algorithm>
#include <cmath>

#include "core/number_format.hpp"
#include "report/svg_plot.hpp"

namespace periodfit::report {

namespace {

// Margin below this fraction of the tolerance width is shown amber (see the header).
constexpr double kNarrowMargin = 0.1;
// Curves beyond this many are not drawn in the overlay (the page stays a few MB); the table
// and histograms still hold every board.
constexpr std::size_t kMaxOverlayCurves = 400;

std::string number(double v) {
  if (!std::isfinite(v)) return "-";
  return format_significant(v, 5);
}

Figure histogram(const CrossBoardLimit& limit, const std::vector<double>& values, std::size_t index) {
  ToleranceHistogram spec;
  spec.id = "xh" + std::to_string(index);
  spec.title = limit.name;
  spec.quantity = "value";
  spec.unit = limit.unit;
  spec.lo = limit.lo;
  spec.hi = limit.hi;
  return tolerance_histogram(spec, values);
}

Figure overlay(const CrossBoardView& v) {
  Figure fig;
  fig.id = "xo";
  fig.title = "every board's response, limits in red";
  Panel p;
  p.x.quantity = v.x_quantity;
  p.x.unit = v.x_unit;
  p.x.scale = v.x_log ? AxisScale::log : AxisScale::linear;
  p.x.labels = v.x_log ? TickLabels::si_prefix : TickLabels::plain;
  p.y.quantity = v.y_quantity;
  p.y.unit = v.y_unit;
  p.legend = false;
  double ylo = std::numeric_limits<double>::infinity(), yhi = -ylo;
  std::size_t drawn = 0;
  for (const auto& r : v.responses) {
    if (r.x.empty() || drawn >= kMaxOverlayCurves) continue;
    ++drawn;
    LineSeries l;
    l.x = r.x;
    l.y = r.y;
    l.color = r.passed ? "#4a7ab5" : "#e08a1e";
    l.width = 0.8;
    for (double y : r.y)
      if (std::isfinite(y)) ylo = std::min(ylo, y), yhi = std::max(yhi, y);
    p.lines.push_back(std::move(l));
  }
  for (const auto& lim : v.response_limits) {
    LineSeries l;
    const double top = std::isfinite(lim.hi) ? lim.hi : yhi;
    const double bottom = std::isfinite(lim.lo) ? lim.lo : ylo;
    l.x = {lim.x, lim.x};
    l.y = {bottom, top};
    l.color = "#b3261e";
    l.width = 3;
    p.lines.push_back(std::move(l));
    PointSeries ends;
    ends.color = "#b3261e";
    ends.marker = Marker::square;
    for (const double b : {lim.lo, lim.hi})
      if (std::isfinite(b)) ends.x.push_back(lim.x), ends.y.push_back(b);
    if (!ends.x.empty()) p.points.push_back(std::move(ends));
  }
  fig.panels.push_back(std::move(p));
  return fig;
}

}  // namespace

Figure tolerance_histogram(const ToleranceHistogram& spec, const std::vector<double>& values) {
  Figure fig;
  fig.id = spec.id;
  fig.title = spec.title;
  fig.width_px = spec.width_px;
  Panel p;
  p.x.quantity = spec.quantity;
  p.x.unit = spec.unit;
  p.y.quantity = spec.count_label;
  p.y.integer_steps = true;
  p.height_px = 160;
  double lo = *std::min_element(values.begin(), values.end());
  double hi = *std::max_element(values.begin(), values.end());
  if (std::isfinite(spec.lo)) lo = std::min(lo, spec.lo);
  if (std::isfinite(spec.hi)) hi = std::max(hi, spec.hi);
  if (!(hi > lo)) {
    lo -= 0.5;
    hi += 0.5;
  }
  // A margin around values and bounds, so a bound is never hidden in the frame.
  const double pad = 0.05 * (hi - lo);
  lo -= pad;
  hi += pad;
  // Square-root rule for the bin count (common practice), at least 5 bins.
  const std::size_t bins =
      std::max<std::size_t>(5, static_cast<std::size_t>(std::ceil(std::sqrt(static_cast<double>(values.size())))));
  const double width = (hi - lo) / static_cast<double>(bins);
  BarSeries b;
  b.name = spec.count_label + " per bin";
  b.bar_width = width * 0.9;
  b.base = 0;
  std::vector<double> counts(bins, 0);
  for (double v : values) counts[std::min(bins - 1, static_cast<std::size_t>((v - lo) / width))] += 1;
  const double peak = *std::max_element(counts.begin(), counts.end());
  for (std::size_t i = 0; i < bins; ++i) {
    b.x.push_back(lo + (static_cast<double>(i) + 0.5) * width);
    b.y.push_back(counts[i]);
  }
  p.bars.push_back(std::move(b));
  p.y.min = 0;
  p.y.max = peak + 1;
  const std::pair<double, const char*> bounds[] = {{spec.lo, "LSL"}, {spec.hi, "USL"}};
  for (const auto& bound : bounds)
    if (std::isfinite(bound.first)) {
      LineSeries l;
      l.name = bound.second;
      l.x = {bound.first, bound.first};
      l.y = {0, peak + 1};
      l.color = "#b3261e";
      l.dashed = true;
      p.lines.push_back(std::move(l));
    }
  p.legend = spec.legend;
  fig.panels.push_back(std::move(p));
  return fig;
}

std::string render_cross_board(const CrossBoardView& v, const std::vector<std::string>& paths) {
  const bool any_response = std::any_of(v.responses.begin(), v.responses.end(),
                                        [](const BoardResponse& r) { return !r.x.empty(); });
  if (v.limits.empty() && !any_response) return "";
  std::string h = "<h2 id=\"boards\">All boards against the limits</h2>\n";
  if (!v.limits.empty()) {
    h += "<table class=\"boards\">\n<thead><tr><th>#</th><th>file</th>";
    for (const auto& l : v.limits)
      h += "<th>" + xml_escape(l.name) + (l.unit.empty() ? "" : " (" + xml_escape(l.unit) + ")") + "<br><small>" +
           xml_escape(l.allowed) + "</small></th>";
    h += "</tr></thead>\n<tbody>\n";
    for (std::size_t i = 0; i < v.cells.size(); ++i) {
      h += "<tr><td class=\"num\">" + std::to_string(i + 1) + "</td><td class=\"path\"><a href=\"#file-" +
           std::to_string(i + 1) + "\">" + xml_escape(i < paths.size() ? paths[i] : "") + "</a></td>";
      for (std::size_t k = 0; k < v.limits.size(); ++k) {
        const CrossBoardCell c = k < v.cells[i].size() ? v.cells[i][k] : CrossBoardCell{};
        const char* tone = !c.evaluated ? "none"
                           : !c.passed ? "fail"
                           : (std::isfinite(c.margin_fraction) && c.margin_fraction < kNarrowMargin) ? "narrow"
                                                                                                    : "pass";
        const std::string value = v.limits[k].yes_no ? (c.value != 0 ? "yes" : "no") : number(c.value);
        h += std::string("<td class=\"num m-") + tone + "\" title=\"" + xml_escape(c.verdict) + "\">" +
             (c.evaluated ? value : "-") + "</td>";
      }
      h += "</tr>\n";
    }
    h += "</tbody>\n</table>\n<p class=\"legend\"><span class=\"m-pass\">pass</span> <span class=\"m-narrow\">pass, "
         "under 10 % of the tolerance left</span> <span class=\"m-fail\">fail</span> <span class=\"m-none\">not "
         "evaluated</span></p>\n";
  }
  h += "<div class=\"plots\">\n";
  for (std::size_t k = 0; k < v.limits.size(); ++k) {
    if (v.limits[k].yes_no) continue;
    std::vector<double> values;
    for (const auto& row : v.cells)
      if (k < row.size() && row[k].evaluated && std::isfinite(row[k].value)) values.push_back(row[k].value);
    if (!values.empty()) h += render_svg(histogram(v.limits[k], values, k + 1));
  }
  if (any_response) h += render_svg(overlay(v));
  h += "</div>\n";
  return h;
}

}  // namespace periodfit::report
