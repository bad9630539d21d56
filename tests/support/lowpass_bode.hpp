#pragma once
// Shared by the SVG plot and HTML report tests: the measured frequency response of a textbook
// second-order low-pass as the report plots it, so a test gets a real Bode figure of known
// content without a capture or a fit.
#include <cmath>
#include <complex>
#include <numbers>
#include <string>

#include "report/figures.hpp"
#include "report/svg_plot.hpp"

namespace periodfit::test {

/// H(s) = 1/((s/ωn)² + 2ζ s/ωn + 1), fn = 1 kHz, ζ = 0.3 (textbook second-order section).
inline std::complex<double> second_order_lowpass(double f_hz) {
  const std::complex<double> s(0, f_hz / 1000.0);
  return 1.0 / (s * s + 0.6 * s + 1.0);
}

/// second_order_lowpass measured on the odd harmonics 1 … max_harmonic of 97 Hz, with 95 %
/// half-widths 0.01 on |H| and 0.5° on the phase (wrapped to (−180, 180]), and the model
/// overlaid. `text` goes into the title and the model's legend entry (pass hostile text to
/// test escaping).
inline report::BodePlotData lowpass_bode_data(const std::string& text, int max_harmonic = 39) {
  report::BodePlotData b;
  b.title = "Bode of " + text;
  for (int n = 1; n <= max_harmonic; n += 2) {
    const double f = 97.0 * n;
    const auto h = second_order_lowpass(f);
    b.freq_hz.push_back(f);
    b.mag.push_back(std::abs(h));
    b.mag_u95.push_back(0.01);
    b.phase_deg.push_back(std::arg(h) * 180 / std::numbers::pi);
    b.phase_u95_deg.push_back(0.5);
  }
  b.model = second_order_lowpass;
  b.model_label = text;
  return b;
}

}  // namespace periodfit::test
