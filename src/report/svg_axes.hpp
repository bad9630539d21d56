#pragma once
/// Axes of report/svg_plot figures: ranges, ticks, tick labels, the data-to-pixel mapping and the
/// drawing of grid, tick marks, tick labels and axis titles.
///
/// Ticks follow common practice for engineering plots: linear axes step by 1, 2 or 5 × 10^k
/// (or 15/30/45/90/180 for angles), log axes put a major tick at every decade and label
/// 1-2-5 within a decade when the axis spans few decades. Labels use SI prefixes ("2k",
/// "500m") or move a common prefix into the unit ("time (ms)").
///
/// Usage:
///   const auto [lo, hi] = report::axis_range(axis, data_lo, data_hi);
///   for (const report::Tick& t : report::axis_ticks(axis, lo, hi)) …
#include <limits>
#include <string>
#include <utility>
#include <vector>

namespace periodfit::report {

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

/// Data value → pixel along one axis (log10 on a log axis; values ≤ 0 there go off the plot).
struct AxisMapping {
  double lo = 0, hi = 1;  ///< axis range in data units
  double p0 = 0, p1 = 1;  ///< pixels for lo and hi
  bool log = false;
  double operator()(double v) const;
};

/// An axis ready to draw: its mapping, its ticks (thinned for the pixel length) and the SI
/// prefix moved into its unit.
struct PreparedAxis {
  AxisMapping map;
  std::vector<Tick> ticks;
  std::string prefix;
};

/// The axis for data in [data_lo, data_hi] drawn from pixel p0 to p1.
PreparedAxis prepare_axis(const Axis& axis, double data_lo, double data_hi, double p0, double p1,
                          bool horizontal);

/// The plotting area of a panel, in px (top < bottom).
struct PlotArea {
  double left = 0, right = 0, top = 0, bottom = 0;
};

/// Vertical space under the plotting area for the x tick labels.
inline constexpr double kXTickSpace = 18;

/// What an axis pair draws: `under` (background, grid, tick labels, axis titles) goes below the
/// series, `tick_marks` (one path) above them.
struct AxesDrawing {
  std::string under;
  std::string tick_marks;
};
AxesDrawing draw_axes(const Axis& x_axis, const PreparedAxis& xa, const Axis& y_axis, const PreparedAxis& ya,
                      const PlotArea& area);

}  // namespace periodfit::report
