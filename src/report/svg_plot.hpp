#pragma once
/// Small SVG plotting for reports and `--plot`: figures of one or more stacked panels, each with
/// a linear or logarithmic x and y axis, line series, markers with error bars, and bar series.
/// The output is self-contained SVG 1.1 text: no scripts, no external fonts (generic
/// "sans-serif"), no links; every string from the user (titles, channel names, legend entries)
/// is XML-escaped, and invalid UTF-8 or control characters are replaced, so the text is always
/// well-formed XML and can be inlined into HTML.
///
/// Ticks follow common practice for engineering plots: linear axes step by 1, 2 or 5 × 10^k
/// (or 15/30/45/90/180 for angles), log axes put a major tick at every decade and label
/// 1-2-5 within a decade when the axis spans few decades. Labels use SI prefixes ("2k",
/// "500m") or move a common prefix into the unit ("time (ms)").
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

namespace periodfit::report {

/// `text` made safe for XML/HTML text and attribute values: & < > " ' become entities; control
/// characters other than tab/newline and invalid UTF-8 bytes become U+FFFD.
std::string xml_escape(std::string_view text);

enum class AxisScale { linear, log };

/// How tick values are written.
enum class TickLabels {
  plain,        ///< decimals as the step needs: "−20", "0.5"
  si_prefix,    ///< each label with its own SI prefix: "20", "1k", "2.5M", "500m"
  scaled_unit,  ///< a common SI prefix moved into the unit: ticks "0 0.5 1" with "time (ms)"
};

struct Axis {
  std::string quantity;  ///< what is plotted, e.g. "frequency"
  std::string unit;      ///< unit symbol, e.g. "Hz"; the label reads "frequency (Hz)"
  AxisScale scale = AxisScale::linear;
  TickLabels labels = TickLabels::plain;
  double min = std::numeric_limits<double>::quiet_NaN();  ///< NaN = from the data
  double max = std::numeric_limits<double>::quiet_NaN();  ///< NaN = from the data
  bool angle_steps = false;    ///< linear steps of 15/30/45/90/180 when ≥ 10 (phase in degrees)
  bool integer_steps = false;  ///< linear steps of at least 1 (harmonic numbers)
  double step = 0;             ///< linear tick step; 0 = automatic
  bool show_label = true;      ///< draw the axis title (off for an x axis shared by a panel below)
};

struct Tick {
  double value = 0;
  std::string label;  ///< empty for a minor tick
  bool major = true;
};

/// Ticks of an axis over [lo, hi] (already "nice"): see the header comment. `unit_prefix`
/// receives the prefix moved into the unit for TickLabels::scaled_unit ("m", "k", … or "").
std::vector<Tick> axis_ticks(const Axis& axis, double lo, double hi, std::string* unit_prefix = nullptr);

/// The range an axis shows for data spanning [data_lo, data_hi]: explicit min/max win; else the
/// data range widened to tick steps (linear) or 1-2-5 values (log).
std::pair<double, double> axis_range(const Axis& axis, double data_lo, double data_hi);

/// Widens [lo, hi] to hold `v` when it can be shown: finite, and > 0 on a log axis.
void extend(double& lo, double& hi, double v, bool log);

/// A number with an SI prefix and at most `significant` digits: 1500 → "1.5k", 0.002 → "2m".
std::string format_si(double value, int significant = 3);

enum class Marker { circle, square };

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
