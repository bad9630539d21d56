// SVG plots: ticks (common practice for engineering plots: 1-2-5 steps, a major tick per
// decade on log axes), SI labels, escaping of user strings, and well-formed XML checked by
// xmllint (Debian libxml2-utils) when it is installed.
#include <doctest/doctest.h>

#include <cmath>
#include <complex>
#include <limits>
#include <cstdlib>
#include <numbers>
#include <string>
#include <vector>

#include "report/figures.hpp"
#include "report/svg_plot.hpp"
#include "support/cli_runner.hpp"
#include "support/lowpass_bode.hpp"

using namespace periodfit::report;
using periodfit::test::second_order_lowpass;

namespace {

const std::string kMinus = "\xE2\x88\x92";  // U+2212 in tick labels
const std::string kHostile = "<script>alert(1)</script> & \"q\" 'a'";

std::vector<std::string> labels(const std::vector<Tick>& ticks) {
  std::vector<std::string> out;
  for (const auto& t : ticks)
    if (!t.label.empty()) out.push_back(t.label);
  return out;
}

bool have_xmllint() { return std::system("command -v xmllint >/dev/null 2>&1") == 0; }

/// xmllint's verdict on `svg` (true = well-formed), or nullopt when xmllint is absent.
bool xml_well_formed(const std::string& svg, const std::string& name) {
  periodfit::test::TempDir dir("svg_" + name);
  const std::string path = dir.file(name + ".svg");
  periodfit::test::write_text(path, svg);
  return std::system(("xmllint --noout '" + path + "' 2>/dev/null").c_str()) == 0;
}

BodePlotData bode_data() { return periodfit::test::lowpass_bode_data(kHostile); }

}  // namespace

TEST_CASE("svg: xml_escape makes hostile text inert and keeps UTF-8") {
  CHECK(xml_escape("<script>alert(1)</script>") == "&lt;script&gt;alert(1)&lt;/script&gt;");
  CHECK(xml_escape("a&b \"c\" 'd'") == "a&amp;b &quot;c&quot; &#39;d&#39;");
  CHECK(xml_escape("phase (\xC2\xB0) \xCE\xA9") == "phase (\xC2\xB0) \xCE\xA9");
  // A lone continuation byte, a truncated sequence and a control character become U+FFFD.
  CHECK(xml_escape("a\x80" "b") == "a\xEF\xBF\xBD" "b");
  CHECK(xml_escape("c\xE2\x88") == "c\xEF\xBF\xBD\xEF\xBF\xBD");
  CHECK(xml_escape(std::string("x\x01y", 3)) == "x\xEF\xBF\xBDy");
  CHECK(xml_escape("tab\tnewline\n") == "tab\tnewline\n");
}

TEST_CASE("svg: SI-prefixed numbers") {
  CHECK(format_si(0) == "0");
  CHECK(format_si(20) == "20");
  CHECK(format_si(1000) == "1k");
  CHECK(format_si(1500) == "1.5k");
  CHECK(format_si(0.002) == "2m");
  CHECK(format_si(2.5e6) == "2.5M");
  CHECK(format_si(999999) == "1M");  // rounds up into the next prefix, not "1e+03k"
  CHECK(format_si(-2500) == "-2.5k");
  CHECK(format_si(4.7e-6) == "4.7\xC2\xB5");
}

TEST_CASE("svg: log axis ticks label 1-2-5 per decade over few decades, decades only over many") {
  Axis f;
  f.scale = AxisScale::log;
  f.labels = TickLabels::si_prefix;
  const auto lo_hi = axis_range(f, 37, 7300);
  [[maybe_unused]] const auto& lo = std::get<0>(lo_hi);
  [[maybe_unused]] const auto& hi = std::get<1>(lo_hi);
  CHECK(lo == doctest::Approx(20));    // largest 1-2-5 value below 37
  CHECK(hi == doctest::Approx(10000)); // smallest 1-2-5 value above 7300
  CHECK(labels(axis_ticks(f, lo, hi)) ==
        std::vector<std::string>{"20", "50", "100", "200", "500", "1k", "2k", "5k", "10k"});
  // Minor ticks at the other integers of each decade.
  std::size_t minor = 0;
  for (const auto& t : axis_ticks(f, lo, hi)) minor += t.label.empty() ? 1u : 0u;
  CHECK(minor == 18);  // 30 40 60 70 80 90 | 300 … 900 | 3k … 9k: six per decade, three decades
  const auto wide = labels(axis_ticks(f, 1, 1e7));
  CHECK(wide == std::vector<std::string>{"1", "10", "100", "1k", "10k", "100k", "1M", "10M"});
}

TEST_CASE("svg: linear ticks step 1-2-5, angles 15-30-45-90, integers for harmonic numbers") {
  Axis db;
  const auto lo_hi = axis_range(db, -73.2, 2.1);
  [[maybe_unused]] const auto& lo = std::get<0>(lo_hi);
  [[maybe_unused]] const auto& hi = std::get<1>(lo_hi);
  CHECK(lo == -80);
  CHECK(hi == 20);
  CHECK(labels(axis_ticks(db, lo, hi)) ==
        std::vector<std::string>{kMinus + "80", kMinus + "60", kMinus + "40", kMinus + "20", "0", "20"});
  Axis phase;
  phase.angle_steps = true;
  const auto plo_phi = axis_range(phase, -350, 0);
  [[maybe_unused]] const auto& plo = std::get<0>(plo_phi);
  [[maybe_unused]] const auto& phi = std::get<1>(plo_phi);
  CHECK(plo == -360);
  CHECK(labels(axis_ticks(phase, plo, phi)) ==
        std::vector<std::string>{kMinus + "360", kMinus + "270", kMinus + "180", kMinus + "90", "0"});
  Axis n;
  n.integer_steps = true;
  CHECK(labels(axis_ticks(n, 0, 4)) == std::vector<std::string>{"0", "1", "2", "3", "4"});
  Axis small;
  CHECK(labels(axis_ticks(small, 0, 0.05)) ==
        std::vector<std::string>{"0.00", "0.01", "0.02", "0.03", "0.04", "0.05"});
}

TEST_CASE("svg: a common SI prefix moves into the unit") {
  Axis t;
  t.quantity = "time";
  t.unit = "s";
  t.labels = TickLabels::scaled_unit;
  std::string prefix;
  const auto ticks = axis_ticks(t, 0, 1.003e-3, &prefix);
  CHECK(prefix == "m");
  CHECK(labels(ticks) == std::vector<std::string>{"0.0", "0.2", "0.4", "0.6", "0.8", "1.0"});
  // Units that are not SI keep their numbers as they are.
  t.unit = "FS";
  axis_ticks(t, 0, 1.003e-3, &prefix);
  CHECK(prefix.empty());
}

TEST_CASE("svg: Bode figure unwraps the phase and aligns the model curve with it") {
  const Figure fig = bode_figure(bode_data());
  REQUIRE(fig.panels.size() == 2);
  const auto& phase = fig.panels[1];
  REQUIRE(phase.points.size() == 1);
  // The measured phase of a second-order low-pass falls monotonically towards −180° and never
  // jumps by a turn: textbook second-order section.
  const auto& p = phase.points[0].y;
  for (std::size_t i = 1; i < p.size(); ++i) CHECK(p[i] < p[i - 1] + 1e-9);
  CHECK(p.back() > -180);
  CHECK(p.back() < -150);
  REQUIRE(phase.lines.size() == 1);
  // The model curve starts at the axis' left end in the principal turn, as the measurement.
  const double f_first = phase.lines[0].x.front();
  CHECK(f_first == doctest::Approx(50));  // 1-2-5 value below the first point, 97 Hz
  CHECK(phase.lines[0].y.front() ==
        doctest::Approx(std::arg(second_order_lowpass(f_first)) * 180 / std::numbers::pi));
  // Magnitude points in dB: 20·log10|H| (definition of the decibel for amplitude ratios).
  const auto& m = fig.panels[0].points[0];
  CHECK(m.y[0] == doctest::Approx(20 * std::log10(std::abs(second_order_lowpass(97)))));
  CHECK(m.y_low[0] == doctest::Approx(20 * std::log10(std::abs(second_order_lowpass(97)) - 0.01)));
  CHECK(fig.panels[0].x.scale == AxisScale::log);
}

TEST_CASE("svg: spectrum bars are 20·log10 of the amplitude") {
  SpectrumPlotData s;
  s.unit = "V";
  s.harmonic = {1, 2, 3};
  s.amplitude = {1.0, 0.1, 0.0};
  const Figure fig = spectrum_figure(s);
  const auto& bars = fig.panels[0].bars[0];
  CHECK(bars.y[0] == doctest::Approx(0));
  CHECK(bars.y[1] == doctest::Approx(-20));
  CHECK(bars.y[2] == fig.panels[0].y.min);  // a zero amplitude draws no bar
  CHECK(fig.panels[0].y.max == 40);        // 0 dB top bar + at least 25 dB headroom for the legend
  CHECK(fig.panels[0].y.min == -80);        // 120 dB shown by default
  CHECK(fig.panels[0].y.unit == "dB re 1 V");
}

TEST_CASE("svg: rendered figures are well-formed, escaped, and free of nan") {
  WaveformPlotData w;
  w.title = kHostile;
  w.quantity = "<script>alert(1)</script>";
  w.unit = "V";
  for (int k = 0; k < 1000; ++k) {
    const double t = 1e-3 * k / 1000;
    w.t_s.push_back(t);
    w.y.push_back(k == 500 ? std::nan("") : std::sin(2 * std::numbers::pi * 1000 * t));
  }
  w.fit_t_s = w.t_s;
  w.fit_y = w.y;
  SpectrumPlotData s;
  s.title = kHostile;
  s.harmonic = {1, 2, 3, 4};
  s.amplitude = {1, 1e-3, std::numeric_limits<double>::infinity(), 1e-4};
  s.noise_floor = {1e-6, 1e-6, 1e-6, 1e-6};
  Figure bode = bode_figure(bode_data());
  bode.id = "9 bad id\"";
  const std::vector<std::pair<std::string, std::string>> svgs = {
      {"bode", svg_document(bode)},
      {"spectrum", svg_document(spectrum_figure(s))},
      {"waveform", svg_document(waveform_figure(w))},
  };
  for (const auto& entry : svgs) {
    const std::string& name = entry.first;  // not a structured binding: clang 14 cannot capture one
    const std::string& svg = entry.second;
    CAPTURE(name);
    CHECK(svg.find("<script") == std::string::npos);
    CHECK(svg.find("&lt;script&gt;alert(1)&lt;/script&gt;") != std::string::npos);
    CHECK(svg.find("nan") == std::string::npos);
    CHECK(svg.find("inf\"") == std::string::npos);
    CHECK(svg.rfind("<?xml version=\"1.0\" encoding=\"UTF-8\"?>\n<svg xmlns=\"http://www.w3.org/2000/svg\"", 0) == 0);
    CHECK(svg.find("href") == std::string::npos);  // nothing external
    if (have_xmllint()) CHECK(xml_well_formed(svg, name));
  }
  CHECK(svgs[0].second.find("id=\"p9badid-clip0\"") != std::string::npos);  // sanitised id
  // Waveform markers are thinned to the cap (default 240; 1000 samples → every 5th).
  std::size_t circles = 0;
  for (std::size_t at = 0; (at = svgs[2].second.find("<circle", at)) != std::string::npos; ++at) ++circles;
  CHECK(circles == 200 - 1 + 1);  // 200 kept, the NaN one (index 500) skipped, plus 1 legend marker
  if (!have_xmllint()) MESSAGE("xmllint not installed (Debian libxml2-utils): well-formedness not checked");
}
