#pragma once
// Captures for the batch tests: a DUT that is a textbook second-order low-pass
// H(s) = g/((s/ωn)² + 2ζ s/ωn + 1), driven by an odd multisine (harmonics 1, 3, … 49 of f0,
// Schroeder phases), recorded as a two-channel CSV with a time column. The output is the exact
// periodic steady state (each harmonic scaled by H(jnω0)), plus seeded Gaussian noise.
#include <algorithm>
#include <cmath>
#include <complex>
#include <cstdio>
#include <fstream>
#include <numbers>
#include <random>
#include <string>

namespace periodfit::test {

struct LowpassCapture {
  double fn_hz = 1000;       ///< natural frequency
  double zeta = 0.5;         ///< damping ratio
  double gain = 1.0;         ///< dc gain
  double f0_hz = 100.013;    ///< multisine fundamental (not a round number: the tool locks onto it)
  double fs_hz = 50000;
  double duration_s = 0.1;
  double noise_rms = 2e-4;   ///< per channel, V
  unsigned seed = 1;
  std::string input_name = "v_in";
  std::string output_name = "v_out";
};

inline std::complex<double> lowpass_response(const LowpassCapture& c, double f_hz) {
  const std::complex<double> s(0, f_hz / c.fn_hz);
  return c.gain / (s * s + 2 * c.zeta * s + 1.0);
}

inline void write_lowpass_csv(const std::string& path, const LowpassCapture& c) {
  std::mt19937 rng(c.seed);
  std::normal_distribution<double> noise(0, c.noise_rms);
  constexpr int kLines = 25;
  const double amplitude = 0.15;  // per line, V
  std::ofstream out(path, std::ios::binary);
  out << "time (s)," << c.input_name << " (V)," << c.output_name << " (V)\n";
  const auto count = static_cast<long>(std::lround(c.duration_s * c.fs_hz));
  const double w0 = 2 * std::numbers::pi * c.f0_hz;
  char line[128];
  for (long k = 0; k < count; ++k) {
    const double t = static_cast<double>(k) / c.fs_hz;
    double x = 0, y = 0;
    for (int i = 1; i <= kLines; ++i) {
      const int n = 2 * i - 1;
      // Schroeder (1970) phases for a flat multisine.
      const double phase = -std::numbers::pi * i * (i - 1) / kLines;
      const std::complex<double> h = lowpass_response(c, n * c.f0_hz);
      x += amplitude * std::cos(n * w0 * t + phase);
      y += amplitude * std::abs(h) * std::cos(n * w0 * t + phase + std::arg(h));
    }
    x += noise(rng);
    y += noise(rng);
    std::snprintf(line, sizeof line, "%.9f,%.7e,%.7e\n", t, x, y);
    out << line;
  }
}

/// A one-channel capture for analyze-mode batches: a1·cos(ωt) + a3·cos(3ωt) in volts, so its THD
/// is a3/a1 exactly (IEEE Std 1241 THD of a two-line signal), optionally clipped at ±clip_v
/// (0 = not clipped), noise-free, written with 9 significant digits.
struct SineCapture {
  double f0_hz = 1200;
  double fs_hz = 48000;
  int samples = 960;   ///< 24 periods
  double a1_v = 1;
  double a3_v = 0.093; ///< THD 9.3 %
  double clip_v = 0;
};

inline void write_sine_csv(const std::string& path, const SineCapture& c) {
  std::ofstream out(path, std::ios::binary);
  out << "time (s),v (V)\n";
  char line[96];
  for (int k = 0; k < c.samples; ++k) {
    const double t = k / c.fs_hz;
    const double w = 2 * std::numbers::pi * c.f0_hz * t;
    double x = c.a1_v * std::cos(w) + c.a3_v * std::cos(3 * w);
    if (c.clip_v > 0) x = std::clamp(x, -c.clip_v, c.clip_v);
    std::snprintf(line, sizeof line, "%.9g,%.9g\n", t, x);
    out << line;
  }
}

/// An identify config for these captures with limits on the filter (dc gain, corner, damping).
inline std::string lowpass_config(const std::string& extra = "") {
  return "[analysis]\nmode = \"frf\"\ninput = \"0\"\noutput = \"1\"\norder = \"0/2\"\n"
         "f0_hint_hz = 100\n\n"
         "[[limit]]\nresult = \"dc_gain\"\nnominal = 1\ntolerance = 0.02\nguard_band = true\n\n"
         "[[limit]]\nresult = \"natural_frequency_hz\"\npole = 1\nnominal = 1000\ntolerance_pct = 5\n\n"
         "[[limit]]\nresult = \"damping\"\npole = 1\nmin = 0.45\nmax = 0.55\n" +
         extra;
}

}  // namespace periodfit::test
