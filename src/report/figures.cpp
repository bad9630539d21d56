// The report's figures, built from plot data onto svg_plot's canvas (figures.hpp).
#include "report/figures.hpp"

#include <algorithm>
#include <cmath>
#include <limits>
#include <numbers>

namespace periodfit::report {

namespace {

constexpr double kInf = std::numeric_limits<double>::infinity();
constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();

std::vector<std::size_t> order_by(const std::vector<double>& key) {
  std::vector<std::size_t> idx(key.size());
  for (std::size_t i = 0; i < idx.size(); ++i) idx[i] = i;
  std::stable_sort(idx.begin(), idx.end(), [&](std::size_t a, std::size_t b) { return key[a] < key[b]; });
  return idx;
}

double db(double magnitude) {
  return magnitude > 0 ? 20 * std::log10(magnitude) : -std::numeric_limits<double>::infinity();
}

Axis make_axis(std::string quantity, std::string unit, AxisScale scale = AxisScale::linear,
               TickLabels labels = TickLabels::plain) {
  Axis a;
  a.quantity = std::move(quantity);
  a.unit = std::move(unit);
  a.scale = scale;
  a.labels = labels;
  return a;
}

LineSeries make_line(std::string name, std::vector<double> x, std::vector<double> y,
                     std::string color) {
  LineSeries s;
  s.name = std::move(name);
  s.x = std::move(x);
  s.y = std::move(y);
  s.color = std::move(color);
  return s;
}

PointSeries make_points(std::string name, std::vector<double> x, std::vector<double> y) {
  PointSeries s;
  s.name = std::move(name);
  s.x = std::move(x);
  s.y = std::move(y);
  return s;
}

// Removes 360° jumps between neighbours (the phase is assumed to change by less than 180°
// between consecutive points, common practice for plotting).
void unwrap_degrees(std::vector<double>& phase) {
  for (std::size_t i = 1; i < phase.size(); ++i) {
    if (!std::isfinite(phase[i]) || !std::isfinite(phase[i - 1])) continue;
    phase[i] += 360.0 * std::round((phase[i - 1] - phase[i]) / 360.0);
  }
}

}  // namespace

namespace {

/// The measured points of a Bode plot, ordered by frequency: magnitude in dB with its 95 %
/// bounds, phase unwrapped and shifted into (−180°, 180°] at the first point, with its bounds.
struct MeasuredBode {
  std::vector<double> f, mag_db, lo_db, hi_db, ph, ph_lo, ph_hi;
  bool mag_bars = false, phase_bars = false;
};

MeasuredBode measured_bode(const BodePlotData& data) {
  MeasuredBode m;
  for (std::size_t i : order_by(data.freq_hz)) {
    if (i >= data.mag.size() || i >= data.phase_deg.size()) continue;
    if (!(data.freq_hz[i] > 0) || !std::isfinite(data.freq_hz[i])) continue;
    m.f.push_back(data.freq_hz[i]);
    m.mag_db.push_back(db(data.mag[i]));
    m.ph.push_back(data.phase_deg[i]);
    if (i < data.mag_u95.size()) {
      m.lo_db.push_back(db(data.mag[i] - data.mag_u95[i]));
      m.hi_db.push_back(db(data.mag[i] + data.mag_u95[i]));
    }
  }
  m.mag_bars = m.lo_db.size() == m.f.size() && !m.f.empty();
  unwrap_degrees(m.ph);
  // Unwrapped phases are shifted by a whole number of turns so the first point lies in
  // (−180°, 180°] — the conventional principal value at the lowest frequency.
  if (!m.ph.empty() && std::isfinite(m.ph[0])) {
    const double shift = -360.0 * std::round(m.ph[0] / 360.0);
    for (auto& v : m.ph) v += shift;
  }
  m.phase_bars = !data.phase_u95_deg.empty();
  if (m.phase_bars) {
    std::size_t k = 0;
    for (std::size_t i : order_by(data.freq_hz)) {
      if (i >= data.mag.size() || i >= data.phase_deg.size()) continue;
      if (!(data.freq_hz[i] > 0) || !std::isfinite(data.freq_hz[i])) continue;
      const double u = i < data.phase_u95_deg.size() ? data.phase_u95_deg[i] : kNaN;
      m.ph_lo.push_back(m.ph[k] - u);
      m.ph_hi.push_back(m.ph[k] + u);
      ++k;
    }
  }
  return m;
}

/// The model's curve over the frequency axis [axis_lo, axis_hi] on a log grid, its phase
/// unwrapped and turned to match the measured phase at the first measured frequency.
struct ModelCurve {
  std::vector<double> f, mag_db, ph;
};

ModelCurve model_curve(const BodePlotData& data, double axis_lo, double axis_hi, const MeasuredBode& m) {
  ModelCurve c;
  if (!data.model) return c;
  constexpr int kModelPoints = 240;
  const double a = std::log10(axis_lo), b = std::log10(axis_hi);
  for (int k = 0; k < kModelPoints; ++k) {
    const double fk = std::pow(10.0, a + (b - a) * k / (kModelPoints - 1));
    const std::complex<double> h = data.model(fk);
    c.f.push_back(fk);
    c.mag_db.push_back(std::isfinite(std::abs(h)) ? db(std::abs(h)) : kNaN);
    c.ph.push_back(std::isfinite(std::abs(h)) ? std::arg(h) * 180.0 / std::numbers::pi : kNaN);
  }
  unwrap_degrees(c.ph);
  // Align the model's turn count with the measured phase at the first measured frequency.
  if (!m.ph.empty() && std::isfinite(m.ph[0])) {
    std::size_t nearest = 0;
    for (std::size_t k = 1; k < c.f.size(); ++k)
      if (std::abs(std::log(c.f[k] / m.f[0])) < std::abs(std::log(c.f[nearest] / m.f[0]))) nearest = k;
    if (std::isfinite(c.ph[nearest])) {
      const double shift = 360.0 * std::round((m.ph[0] - c.ph[nearest]) / 360.0);
      for (auto& v : c.ph) v += shift;
    }
  } else if (!c.ph.empty() && std::isfinite(c.ph[0])) {
    const double shift = -360.0 * std::round(c.ph[0] / 360.0);
    for (auto& v : c.ph) v += shift;
  }
  return c;
}

/// The magnitude axis: the measured points and the model within [flo, fhi]; error bars extend
/// it by at most 20 dB so one nearly-zero lower bound does not squash the plot (its bar is
/// clipped instead).
Axis magnitude_axis(const MeasuredBode& m, const ModelCurve& c, double flo, double fhi) {
  constexpr double kErrorBarExtension_db = 20;
  double ylo = kInf, yhi = -kInf;
  for (double v : m.mag_db) extend(ylo, yhi, v, false);
  for (std::size_t k = 0; k < c.f.size(); ++k)
    if (c.f[k] >= flo && c.f[k] <= fhi) extend(ylo, yhi, c.mag_db[k], false);
  if (std::isfinite(ylo)) {
    const double lo0 = ylo, hi0 = yhi;
    for (double v : m.lo_db)
      if (std::isfinite(v)) ylo = std::min(ylo, std::max(v, lo0 - kErrorBarExtension_db));
    for (double v : m.hi_db)
      if (std::isfinite(v)) yhi = std::max(yhi, std::min(v, hi0 + kErrorBarExtension_db));
  }
  Axis mag_axis = make_axis("magnitude", "dB");
  const auto [mlo, mhi] = axis_range(mag_axis, ylo, yhi);
  mag_axis.min = mlo;
  mag_axis.max = mhi;
  return mag_axis;
}

}  // namespace

Figure bode_figure(const BodePlotData& data) {
  MeasuredBode m = measured_bode(data);
  Axis freq = make_axis("frequency", "Hz", AxisScale::log, TickLabels::si_prefix);
  double flo = kInf, fhi = -kInf;
  for (double v : m.f) extend(flo, fhi, v, true);
  const auto [axis_lo, axis_hi] = axis_range(freq, flo, fhi);
  freq.min = axis_lo;
  freq.max = axis_hi;
  ModelCurve model = model_curve(data, axis_lo, axis_hi, m);

  Figure fig;
  fig.id = data.id;
  fig.title = data.title;
  Panel mag_panel;
  mag_panel.title = "Bode magnitude";
  mag_panel.x = freq;
  mag_panel.x.show_label = false;
  mag_panel.y = magnitude_axis(m, model, flo, fhi);
  mag_panel.height_px = 230;
  Panel phase_panel;
  phase_panel.title = "Bode phase";
  phase_panel.x = freq;
  phase_panel.y = make_axis("phase", "\xC2\xB0");
  phase_panel.y.angle_steps = true;
  phase_panel.height_px = 200;
  phase_panel.legend = false;
  if (!model.f.empty()) {
    mag_panel.lines.push_back(make_line(data.model_label, model.f, model.mag_db, "#1f5fa8"));
    phase_panel.lines.push_back(make_line(data.model_label, std::move(model.f), std::move(model.ph), "#1f5fa8"));
  }
  PointSeries mp = make_points(data.measured_label, m.f, m.mag_db);
  if (m.mag_bars) {
    mp.y_low = std::move(m.lo_db);
    mp.y_high = std::move(m.hi_db);
  }
  mag_panel.points.push_back(std::move(mp));
  PointSeries pp = make_points(data.measured_label, std::move(m.f), std::move(m.ph));
  if (m.phase_bars) {
    pp.y_low = std::move(m.ph_lo);
    pp.y_high = std::move(m.ph_hi);
  }
  phase_panel.points.push_back(std::move(pp));
  fig.panels = {std::move(mag_panel), std::move(phase_panel)};
  return fig;
}

Figure spectrum_figure(const SpectrumPlotData& data) {
  BarSeries bars;
  bars.name = "harmonic amplitude";
  double top = -kInf;
  int nlo = INT32_MAX, nhi = INT32_MIN;
  for (std::size_t i = 0; i < std::min(data.harmonic.size(), data.amplitude.size()); ++i) {
    const double level = db(std::abs(data.amplitude[i]));
    bars.x.push_back(data.harmonic[i]);
    bars.y.push_back(level);
    if (std::isfinite(level)) top = std::max(top, level);
    nlo = std::min(nlo, data.harmonic[i]);
    nhi = std::max(nhi, data.harmonic[i]);
  }
  if (!std::isfinite(top)) top = 0;
  const double range = std::clamp(data.range_db, 20.0, 300.0);
  Axis y = make_axis("amplitude", "dB re 1" + (data.unit.empty() ? "" : " " + data.unit));
  // Headroom above the tallest bar leaves space for the legend.
  y.max = std::ceil((top + 25) / 20) * 20;
  y.min = y.max - std::ceil(range / 20) * 20;
  // Show the noise floor too when it lies below the default range (up to 200 dB in all).
  double floor_lo = kInf;
  for (double v : data.noise_floor)
    if (v > 0 && std::isfinite(v)) floor_lo = std::min(floor_lo, db(v));
  if (std::isfinite(floor_lo) && floor_lo - 10 < y.min)
    y.min = std::max(y.max - 200, std::floor((floor_lo - 10) / 20) * 20);
  y.step = y.max - y.min <= 160 ? 20 : 40;
  Axis x = make_axis("harmonic number", "");
  x.integer_steps = true;
  if (nlo <= nhi) {
    x.min = nlo - 1;
    x.max = nhi + 1;
  }
  for (auto& v : bars.y)
    if (!std::isfinite(v)) v = y.min;  // zero amplitude: no bar
  if (nhi - nlo > 60) bars.bar_width = 0.8;
  Panel panel;
  panel.x = x;
  panel.y = y;
  panel.bars.push_back(std::move(bars));
  if (!data.noise_floor.empty()) {
    LineSeries floor = make_line("noise floor", {}, {}, "#888888");
    floor.width = 1.2;
    floor.dashed = true;
    for (std::size_t i = 0; i < std::min(data.harmonic.size(), data.noise_floor.size()); ++i) {
      floor.x.push_back(data.harmonic[i]);
      floor.y.push_back(db(data.noise_floor[i]));
    }
    panel.lines.push_back(std::move(floor));
  }
  Figure fig;
  fig.id = data.id;
  fig.title = data.title;
  fig.panels.push_back(std::move(panel));
  return fig;
}

Figure waveform_figure(const WaveformPlotData& data) {
  PointSeries measured = make_points(data.measured_label, {}, {});
  measured.size = 2.0;
  const std::size_t n = std::min(data.t_s.size(), data.y.size());
  const std::size_t stride =
      data.max_markers > 0 && n > data.max_markers ? (n + data.max_markers - 1) / data.max_markers : 1;
  for (std::size_t i = 0; i < n; i += stride) {
    measured.x.push_back(data.t_s[i]);
    measured.y.push_back(data.y[i]);
  }
  LineSeries fit = make_line(data.fit_label, data.fit_t_s, data.fit_y, "#1f5fa8");
  fit.width = 1.8;
  double tlo = kInf, thi = -kInf;
  for (double t : measured.x) extend(tlo, thi, t, false);
  for (double t : fit.x) extend(tlo, thi, t, false);
  Axis x = make_axis("time", "s", AxisScale::linear, TickLabels::scaled_unit);
  if (std::isfinite(tlo) && thi > tlo) {
    x.min = tlo;
    x.max = thi;
  }
  Panel panel;
  panel.x = x;
  panel.y = make_axis(data.quantity, data.unit, AxisScale::linear, TickLabels::scaled_unit);
  if (!fit.x.empty()) panel.lines.push_back(std::move(fit));
  panel.points.push_back(std::move(measured));
  Figure fig;
  fig.id = data.id;
  fig.title = data.title;
  fig.panels.push_back(std::move(panel));
  return fig;
}

}  // namespace periodfit::report
