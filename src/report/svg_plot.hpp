#pragma once
/// Small SVG plotting for reports and `--plot`: figures of one or more stacked panels, each with
/// a linear or logarithmic x and y axis, line series, markers with error bars, and bar series.
/// The output is self-contained SVG 1.1 text: no scripts, no external fonts (generic
/// "sans-serif"), no links; every string from the user (titles, channel names, legend entries)
/// is XML-escaped, and invalid UTF-8 or control characters are replaced, so the text is always
/// well-formed XML and can be inlined into HTML.
///
/// The parts: report/svg_canvas (element writing, escaping, clip paths), report/svg_axes
/// (ranges, ticks, labels, grid) and this file's renderer (layout, series, legend).
///
/// Usage:
///   report::BodePlotData bode{.title = "board 07", .freq_hz = f, .mag = m, .mag_u95 = mu,
///                              .phase_deg = p, .phase_u95_deg = pu};
///   bode.model = [&](double f_hz) { return model.response(2 * std::numbers::pi * f_hz); };
///   io::write_file_atomic("bode.svg", report::svg_document(report::bode_figure(bode)));  // report/figures.hpp
#include <complex>
#include <functional>
#include <limits>
#include <string>
#include <string_view>
#include <vector>

#include "report/svg_axes.hpp"
#include "report/svg_canvas.hpp"

namespace periodfit::report {

struct LineSeries {
  std::string name;          ///< legend entry; empty = not in the legend
  std::vector<double> x, y;  ///< non-finite points break the line
  std::string color = "#1f5fa8";
  double width = 1.6;
  bool dashed = false;
};

/// Markers with optional error bars from y_low to y_high (absolute values, same length as y).
struct PointSeries {
  std::string name;
  std::vector<double> x, y;
  std::vector<double> y_low, y_high;  ///< empty = no error bars
  std::string color = "#c0392b";
  Marker marker = Marker::circle;
  double size = 3.0;  ///< marker radius / half side in px
};

/// Vertical bars from the bottom of the y range (or `base` when inside it) to y.
struct BarSeries {
  std::string name;
  std::vector<double> x, y;
  double bar_width = 0.6;  ///< in x data units
  double base = std::numeric_limits<double>::quiet_NaN();  ///< NaN = bottom of the y axis
  std::string color = "#4a7ab5";
};

struct Panel {
  std::string title;  ///< optional heading above the panel
  Axis x, y;
  std::vector<BarSeries> bars;      ///< drawn first
  std::vector<LineSeries> lines;    ///< then lines
  std::vector<PointSeries> points;  ///< then markers, on top
  bool legend = true;
  double height_px = 260;  ///< height of the plotting area
};

struct Figure {
  std::string id = "plot";  ///< prefix of element ids; unique per HTML page (sanitised)
  std::string title;        ///< drawn on top and used as the SVG <title>
  std::vector<Panel> panels;  ///< stacked top to bottom
  double width_px = 720;
};

/// The figure as an `<svg>` element (no XML declaration), for inlining into HTML.
std::string render_svg(const Figure& figure);

/// The figure as a standalone .svg document (XML declaration + element).
std::string svg_document(const Figure& figure);

}  // namespace periodfit::report
