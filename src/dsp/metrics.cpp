// Distortion figures per IEEE Std 1241 (see metrics.hpp).
#include "dsp/metrics.hpp"

#include <cmath>
#include <limits>

namespace periodfit::dsp {

DistortionFigures distortion_figures(std::span<const double> amplitudes, double residual_power,
                                     double noise_power, double full_scale_range,
                                     std::span<const double> harmonic_noise_power) {
  DistortionFigures d;
  const double inf = std::numeric_limits<double>::infinity();
  const double a1 = amplitudes.size() > 1 ? amplitudes[1] : 0;
  double harm_sq = 0;  // Σ_{n≥2} A_n²
  for (std::size_t n = 2; n < amplitudes.size(); ++n) harm_sq += amplitudes[n] * amplitudes[n];
  const double fund_power = a1 * a1 / 2;
  // Noise-bias correction of Σ_{n≥2} A_n² (see metrics.hpp); THD+N and SINAD keep the raw sum,
  // since they count the noise anyway.
  double corrected = harm_sq, corrected_var = 0;
  if (harmonic_noise_power.size() >= amplitudes.size() && amplitudes.size() > 2) {
    d.thd_noise_corrected = true;
    corrected = 0;
    for (std::size_t n = 2; n < amplitudes.size(); ++n) {
      const double v = std::max(harmonic_noise_power[n], 0.0);
      const double excess = amplitudes[n] * amplitudes[n] - v;
      corrected += excess;
      corrected_var += 2 * v * std::max(excess, 0.0) + v * v;
    }
    d.thd_above_noise = corrected >= 2 * std::sqrt(corrected_var);
    corrected = std::max(corrected, 0.0);
  }
  const double one_sided_95 = 1.6448536269514722;  // standard normal 0.95 quantile
  d.thd_r = (corrected + a1 * a1) > 0 ? std::sqrt(corrected / (corrected + a1 * a1)) : 0;
  if (a1 == 0) {
    d.thd = inf;
    d.thd_upper = inf;
    d.thd_n = inf;
    d.sinad_db = -inf;
    d.snr_db = -inf;
    d.enob_bits = std::numeric_limits<double>::quiet_NaN();
    d.nad_rms = std::sqrt(harm_sq / 2 + residual_power);
    return d;
  }
  d.thd = std::sqrt(corrected) / a1;
  d.thd_upper = std::sqrt(corrected + one_sided_95 * std::sqrt(corrected_var)) / a1;
  d.thd_n = std::sqrt((harm_sq / 2 + residual_power) / fund_power);
  d.sinad_db = -20 * std::log10(d.thd_n);
  d.snr_db = noise_power > 0 ? 10 * std::log10(fund_power / noise_power) : inf;
  d.nad_rms = std::sqrt(harm_sq / 2 + residual_power);
  d.enob_bits = enob_from_full_scale(full_scale_range, d.nad_rms);
  return d;
}

double enob_from_full_scale(double full_scale_range, double nad_rms) {
  // IEEE Std 1241-2010 §9.3: an ideal N-bit converter's quantisation noise is Q/√12 with
  // Q = FSR/2^N, so N = log2(FSR/(√12·NAD)). Referring NAD to the full-scale range rather than to
  // the signal keeps the figure right for a sine below full scale.
  if (!(full_scale_range > 0 && std::isfinite(full_scale_range)) || !(nad_rms > 0 && std::isfinite(nad_rms)))
    return std::numeric_limits<double>::quiet_NaN();
  return std::log2(full_scale_range / (std::sqrt(12.0) * nad_rms));
}

double crest_factor(double peak_abs, double rms) { return rms > 0 ? peak_abs / rms : 0; }

}  // namespace periodfit::dsp
