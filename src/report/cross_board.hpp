#pragma once
/// The cross-board view of a batch report: every board against every limit at a glance. A table
/// with one column per limit (each cell: the value in the limit's unit, the verdict, coloured by
/// its margin), a histogram per limit with its tolerance band, and an overlay of every board's
/// measured response (frf: |H| in dB over frequency; analyze: harmonic amplitudes in dB) with
/// the limits that apply to it drawn on top.
///
/// Margin colours (common practice for pass/fail dashboards): red = fail; amber = pass with
/// less than 10 % of the tolerance width left (margin_fraction < 0.1); green = the rest; grey =
/// not evaluated.
///
/// Usage: fill a CrossBoardView as files finish (a few hundred bytes per board), then
/// render_cross_board(view, paths) returns the HTML fragment.
#include <limits>
#include <string>
#include <vector>

namespace periodfit::report {

struct CrossBoardLimit {
  std::string name;     ///< "damping at pole 1"
  std::string allowed;  ///< as written
  std::string unit;     ///< the unit values are shown in ("" = SI / ratio)
  double lo = -std::numeric_limits<double>::infinity();  ///< in `unit`
  double hi = std::numeric_limits<double>::infinity();
  bool yes_no = false;
};

struct CrossBoardCell {
  bool evaluated = false;
  bool passed = false;
  double value = std::numeric_limits<double>::quiet_NaN();  ///< in the limit's unit
  double margin_fraction = std::numeric_limits<double>::quiet_NaN();
  std::string verdict;
};

/// One board's response curve.
struct BoardResponse {
  std::vector<double> x, y;
  bool passed = true;
};

/// A limit on the response, drawn as a vertical bar from lo to hi at x (one-sided: to the edge).
struct ResponseLimit {
  double x = 0;
  double lo = -std::numeric_limits<double>::infinity();
  double hi = std::numeric_limits<double>::infinity();
};

struct CrossBoardView {
  std::vector<CrossBoardLimit> limits;
  std::vector<std::vector<CrossBoardCell>> cells;  ///< [file][limit], file order as the overview
  std::string x_quantity, x_unit, y_quantity, y_unit;
  bool x_log = false;
  std::vector<BoardResponse> responses;  ///< per file (empty curve = none)
  std::vector<ResponseLimit> response_limits;
};

struct Figure;

/// A histogram of `values` (at least one) against the tolerance band [lo, hi] (an infinite bound
/// = an open side), drawn as dashed red lines; bins by the square-root rule, at least 5, over the
/// values and the finite bounds with a 5 % margin.
struct ToleranceHistogram {
  std::string id, title, quantity, unit;
  std::string count_label = "boards";
  double lo = -std::numeric_limits<double>::infinity();
  double hi = std::numeric_limits<double>::infinity();
  double width_px = 560;
  bool legend = false;  ///< name the bars and the bounds (LSL, USL)
};
Figure tolerance_histogram(const ToleranceHistogram& spec, const std::vector<double>& values);

/// The HTML fragment (heading, table, figures); `paths` label the rows. "" when there is
/// nothing to show (no limits and no responses).
std::string render_cross_board(const CrossBoardView& view, const std::vector<std::string>& paths);

}  // namespace periodfit::report
