// Distortion figures per IEEE Std 1241 (see metrics.hpp).
#include "dsp/metrics.hpp"

#include <cmath>
#include <limits>

namespace periodfit::dsp {

DistortionFigures distortion_figures(std::span<const double> amplitudes, double residual_power,
                                     double noise_power) {
  DistortionFigures d;
  const double inf = std::numeric_limits<double>::infinity();
  const double a1 = amplitudes.size() > 1 ? amplitudes[1] : 0;
  double harm_sq = 0;  // Σ_{n≥2} A_n²
  for (std::size_t n = 2; n < amplitudes.size(); ++n) harm_sq += amplitudes[n] * amplitudes[n];
  const double fund_power = a1 * a1 / 2;
  d.thd_r = (harm_sq + a1 * a1) > 0 ? std::sqrt(harm_sq / (harm_sq + a1 * a1)) : 0;
  if (a1 == 0) {
    d.thd = inf;
    d.thd_n = inf;
    d.sinad_db = -inf;
    d.snr_db = -inf;
    d.enob_bits = -inf;
    return d;
  }
  d.thd = std::sqrt(harm_sq) / a1;
  d.thd_n = std::sqrt((harm_sq / 2 + residual_power) / fund_power);
  d.sinad_db = -20 * std::log10(d.thd_n);
  d.snr_db = noise_power > 0 ? 10 * std::log10(fund_power / noise_power) : inf;
  // IEEE Std 1241 ENOB for a full-scale sine: 6.02 dB per bit, 1.76 dB offset.
  d.enob_bits = (d.sinad_db - 1.76) / 6.02;
  return d;
}

double crest_factor(double peak_abs, double rms) { return rms > 0 ? peak_abs / rms : 0; }

}  // namespace periodfit::dsp
