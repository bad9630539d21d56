// One channel's analysis: fit, lock, uncertainties, figures and flags (see harmonics.hpp).
#include "dsp/harmonics.hpp"

#include <algorithm>
#include <array>
#include <cmath>
#include <limits>
#include <numbers>
#include <string>

#include <boost/math/distributions/fisher_f.hpp>
#include <boost/math/distributions/students_t.hpp>

#include "core/error.hpp"
#include "dsp/clipping.hpp"
#include "dsp/magnitude_interval.hpp"
#include "core/number_format.hpp"

namespace periodfit::dsp {
namespace {

constexpr double kPi = std::numbers::pi;
constexpr double kTwoPi = 2 * std::numbers::pi;
/// Harmonics above this fraction of fs count for "aliasing-risk".
constexpr double kAliasBandFraction = 0.4;
/// ... when they reach this fraction of the fundamental (−60 dB; common practice for a
/// "significant" spur in ADC testing).
constexpr double kAliasLevel = 1e-3;
/// Period-to-period scatter below this share of the residual variance means the periods repeat:
/// white noise gives ≈ 0.9 (the interpolation kernel passes 0.88 of the band) with a spread of
/// √(2/(M·(P − 1))), i.e. a few % for any record analyze locks, so 0.5 is never reached by noise;
/// a coherent capture whose periods hold the same codes gives 0.
constexpr double kIdenticalPeriodsRatio = 0.5;
/// Family-wise false-alarm level of "aliasing-risk" on records with no harmonic in the top band
/// (the target is ≤ 5 % of noise-only records; 1 % leaves room for the approximate null law).
constexpr double kAliasFamilyAlpha = 0.01;
/// A forced f0 further than this many u from the free fit's f0 is flagged ("forced-f0-off"):
/// 4 u puts the false-alarm rate of a correct forced f0 at 6e-5 (normal law).
constexpr double kForcedF0Sigmas = 4;
/// Harmonics used for the two half-record fits of the drift check: the strongest lines carry
/// nearly all the information on f0, and three keep the check cheap on long records.
constexpr int kDriftHarmonics = 3;

/// Unexplained residual lines carrying this share of the line power (harmonics + residual
/// lines) make the record "not-periodic" rather than a periodic signal with interference: a
/// second tone or modulation sidebands 10 dB below the rest (common practice threshold).
constexpr double kNotPeriodicShare = 0.1;
/// A residual line is reported as "interference" when it carries at least this share of the
/// residual power (it then moves SNR and SINAD by ≥ 0.04 dB); weaker lines (a quantiser's
/// spurs, a hum far below the noise) are listed in the JSON only.
constexpr double kInterferenceShare = 0.01;
/// Residual lines below this fraction of the fundamental are rounding, not interference.
constexpr double kLineRoundingFloor = 1e-9;

/// Two-sided 95 % coverage factor for `dof` degrees of freedom (Student t; normal when 0 or large).
double coverage_95(int dof) {
  if (dof <= 0 || dof > 1000) return 1.959963984540054;
  return boost::math::quantile(boost::math::students_t_distribution<double>(dof), 0.975);
}

std::string sig(double v, int digits = 4) { return format_significant(v, digits); }

double wrap_deg(double d) {
  d = std::fmod(d, 360.0);
  if (d > 180) d -= 360;
  if (d <= -180) d += 360;
  return d;
}

/// Period-to-period scatter of a locked record against its residual variance, and the error
/// floor to use when the periods repeat (see analyze_unit_scaled).
struct PeriodScatterFloor {
  double ratio = 1;           ///< pooled per-period scatter variance / residual variance
  bool identical = false;     ///< ratio below kIdenticalPeriodsRatio (and the residual above rounding)
  double step = 0;            ///< quantisation step Δ found in the samples (0 = none found)
  double error_variance = 0;  ///< max(residual variance, Δ²/12): one sample's error that repeats
};

/// Quantisation step of `x`: the greatest common divisor of the gaps between its distinct
/// values (Euclid on reals, remainders within kStepTolerance of a gap taken as 0), accepted when
/// every value is a whole number of steps from the lowest and the range spans at most 2^24
/// steps (a 24-bit converter); 0 otherwise (not quantised, or too finely to tell).
double quantisation_step(std::span<const double> x) {
  constexpr double kStepTolerance = 1e-6;  // codes written in decimal carry rounding ~1e-12 of a step
  constexpr double kMaxCodes = 16777216;   // 2^24
  std::vector<double> v(x.begin(), x.end());
  std::sort(v.begin(), v.end());
  v.erase(std::unique(v.begin(), v.end()), v.end());
  if (v.size() < 2) return 0;
  const double range = v.back() - v.front();
  const double floor_step = range / kMaxCodes;
  double step = v[1] - v[0];
  for (std::size_t i = 2; i < v.size() && step > floor_step; ++i) {
    double a = step, b = v[i] - v[i - 1];
    while (b > floor_step) {
      double r = std::fmod(a, b);
      if (r < kStepTolerance * b || b - r < kStepTolerance * b) r = 0;
      a = b;
      b = r;
    }
    step = a;
  }
  if (!(step > floor_step)) return 0;
  for (double value : v) {
    const double codes = (value - v[0]) / step;
    if (std::abs(codes - std::round(codes)) > 1e-3) return 0;
  }
  return step;
}

PeriodScatterFloor period_scatter_floor(const PeriodGrid& grid, std::span<const double> x, double sigma2) {
  PeriodScatterFloor f;
  const int m = grid.samples_per_period, p = grid.periods;
  // Below this residual variance (the samples are unit-scaled: peak in [0.5, 1)) the residual is
  // double rounding, which repeats with the periods of an exact synthetic record as well.
  constexpr double kRoundingVariance = 1e-24;
  if (p < 2 || !(sigma2 > kRoundingVariance)) return f;
  const auto M = static_cast<std::size_t>(m), P = static_cast<std::size_t>(p);
  double ss = 0;
  for (std::size_t k = 0; k < M; ++k) {
    double mean = 0;
    for (std::size_t q = 0; q < P; ++q) mean += grid.samples[q * M + k];
    mean /= static_cast<double>(P);
    for (std::size_t q = 0; q < P; ++q) ss += (grid.samples[q * M + k] - mean) * (grid.samples[q * M + k] - mean);
  }
  f.ratio = ss / (static_cast<double>(M) * static_cast<double>(P - 1)) / sigma2;
  f.identical = f.ratio < kIdenticalPeriodsRatio;
  if (f.identical) {
    f.step = quantisation_step(x);
    f.error_variance = std::max(sigma2, f.step * f.step / 12);
  }
  return f;
}

}  // namespace

bool ChannelAnalysis::has_flag(const std::string& code) const {
  return std::any_of(flags.begin(), flags.end(), [&](const AnalysisFlag& f) { return f.code == code; });
}

void validate(const AnalyzeOptions& o) {
  validate(o.lock);
  if (o.samples_per_period != 0 && o.samples_per_period < 4)
    throw OptionError("samples_per_period", std::to_string(o.samples_per_period),
                      "must be 0 (automatic) or >= 4");
  if (!(o.drift_sigmas > 0))
    throw OptionError("drift_sigmas", format_shortest(o.drift_sigmas), "must be > 0");
  if (!(o.significance > 0))
    throw OptionError("significance", format_shortest(o.significance), "must be > 0");
}

namespace {

/// `exponent`: the samples are the channel's × 2^-exponent (the full scale follows them).
ChannelAnalysis analyze_unit_scaled(const SampleView& channel, double fs, double t0,
                                    const AnalyzeOptions& options, int exponent);

/// Multiplies every result in the channel's unit by 2^exponent (exact; ldexp, since 2^exponent
/// itself may not be representable for a peak near the ends of the double range).
void scale_results(ChannelAnalysis& a, int exponent) {
  const auto up = [exponent](double& v) { v = std::ldexp(v, exponent); };
  up(a.fundamental.residual_rms);
  up(a.dc);
  up(a.dc_u);
  up(a.rms);
  up(a.peak_abs);
  for (auto& line : a.harmonics) {
    up(line.amplitude);
    up(line.amplitude_u);
    line.phasor = {std::ldexp(line.phasor.real(), exponent), std::ldexp(line.phasor.imag(), exponent)};
  }
  up(a.noise_rms);
  up(a.noise_floor);
  up(a.full_scale_range);
  for (auto& line : a.harmonics) {
    up(line.amplitude_lo);
    up(line.amplitude_hi);
  }
  // Powers (squares) scale by 2^(2·exponent).
  const auto up2 = [exponent](double& v) { v = std::ldexp(v, 2 * exponent); };
  up(a.baseline.c1);
  up(a.baseline.c2);
  up(a.baseline.peak_to_peak);
  up2(a.baseline.power);
  up(a.quantisation_step);
  for (auto& line : a.harmonics) {
    up2(line.cov_re_re);
    up2(line.cov_im_im);
    up2(line.cov_re_im);
  }
  up2(a.baseline.removed_ss);
  for (auto& line : a.residual_lines.lines) up(line.amplitude);
  up2(a.residual_lines.power);
}

bool all_finite(const ChannelAnalysis& a) {
  bool ok = std::isfinite(a.fundamental.f0_hz) && std::isfinite(a.fundamental.f0_u_hz) &&
            std::isfinite(a.fundamental.residual_rms) && std::isfinite(a.dc) && std::isfinite(a.dc_u) &&
            std::isfinite(a.rms) && std::isfinite(a.peak_abs) && std::isfinite(a.noise_rms) &&
            std::isfinite(a.noise_floor) && std::isfinite(a.distortion.thd) &&
            std::isfinite(a.distortion.thd_n);
  for (const auto& line : a.harmonics)
    ok = ok && std::isfinite(line.amplitude) && std::isfinite(line.amplitude_u) &&
         std::isfinite(line.phase_deg) && std::isfinite(line.phase_u_deg);
  return ok;
}

}  // namespace

// The numerics (sums of squares, variances, the Gram matrix) square the samples, so values
// beyond ~1e154 overflow and values below ~1e-154 underflow into sub-normals, which silently
// turned uncertainties into 0 (issue 11, class 7). The channel is therefore analysed in a unit
// where its peak is in [0.5, 1): multiplying by a power of two only changes the exponent, so it
// is exact (IEEE 754 §5.3.3 scaleB) and every result is the one of the unit-scaled channel,
// scaled back the same exact way. Ratios (THD, SNR, dBc), f0 and phases are unchanged by it.
ChannelAnalysis analyze_channel(const Channel& channel, double fs, double t0,
                                const AnalyzeOptions& options) {
  return analyze_channel(SampleView{channel.name, channel.unit, channel.samples}, fs, t0, options);
}

ChannelAnalysis analyze_channel(const SampleView& channel, double fs, double t0,
                                const AnalyzeOptions& options) {
  validate(options);
  double peak = 0;
  bool constant = true;
  for (double v : channel.samples) {
    peak = std::max(peak, std::abs(v));
    constant = constant && v == channel.samples.front();
  }
  // A constant channel is refused by the fit quoting its value, which must be the file's.
  if (!(peak > 0) || !std::isfinite(peak) || constant) return analyze_unit_scaled(channel, fs, t0, options, 0);
  const int exponent = std::ilogb(peak) + 1;  // peak·2^-exponent in [0.5, 1)
  if (exponent == 0) return analyze_unit_scaled(channel, fs, t0, options, 0);
  std::vector<double> scaled_samples;
  scaled_samples.reserve(channel.samples.size());
  for (double v : channel.samples) scaled_samples.push_back(std::ldexp(v, -exponent));
  const SampleView scaled{channel.name, channel.unit, scaled_samples};
  // The full-scale range is in the channel's unit, so it is scaled with the samples (ENOB is a
  // ratio of it to the noise and distortion).
  AnalyzeOptions scaled_options = options;
  scaled_options.full_scale_range = std::ldexp(options.full_scale_range, -exponent);
  ChannelAnalysis out = analyze_unit_scaled(scaled, fs, t0, scaled_options, exponent);
  scale_results(out, exponent);
  if (!all_finite(out))
    throw AnalysisError("channel \"" + channel.name + "\": the results exceed the range of double " +
                        "precision numbers (peak " + format_significant(peak, 4) +
                        "); give the data in a larger unit");
  return out;
}

namespace {

ChannelAnalysis analyze_unit_scaled(const SampleView& channel, double fs, double t0,
                                    const AnalyzeOptions& options, int exponent) {
  ChannelAnalysis out;
  out.name = channel.name;
  out.unit = channel.unit;
  const std::span<const double> x = channel.samples;
  const std::size_t n = x.size();
  LockedChannel locked;
  try {
    locked = lock_channel(x, fs, t0, options.lock, options.samples_per_period);
  } catch (const AnalysisError& e) {
    throw AnalysisError("channel \"" + channel.name + "\": " + e.what());
  }
  out.selection = locked.selection;
  double peak = 0;
  for (double v : x) peak = std::max(peak, std::abs(v));
  // Baseline drift (dsp/baseline.hpp): a significant trend is estimated from the residual, the
  // channel is locked again on x − trend (f0 started where it was, H as chosen), and the trend
  // of the new residual is added; the noise figures and the grid then exclude it.
  out.baseline = fit_baseline_trend(locked.fit.residual, locked.fit.fundamental.dof, peak);
  if (out.baseline.significant && options.model_baseline) {
    std::vector<double> detrended(n);
    for (std::size_t k = 0; k < n; ++k) detrended[k] = x[k] - out.baseline.at(k, n);
    LockOptions again = options.lock;
    again.max_harmonic = locked.fit.harmonics();
    if (again.f0_hz <= 0) {
      again.f0_hint_hz = 0;
      again.f0_start_hz = locked.fit.fundamental.f0_hz;
    }
    try {
      LockedChannel relocked = lock_channel(detrended, fs, t0, again, options.samples_per_period);
      HarmonicFit& refit = relocked.fit;
      const BaselineTrend more = fit_baseline_trend(refit.residual, refit.fundamental.dof, peak);
      out.baseline.c1 += more.c1;
      out.baseline.c2 += more.c2;
      for (std::size_t k = 0; k < n; ++k) refit.residual[k] -= more.at(k, n);
      double ss = 0;
      for (double v : refit.residual) ss += v * v;
      refit.residual_ss = ss;
      refit.fundamental.dof -= 2;
      refit.sigma2 = ss / refit.fundamental.dof;
      refit.fundamental.residual_rms = std::sqrt(ss / static_cast<double>(n));
      refit.fundamental.iterations += locked.fit.fundamental.iterations;
      // The grid is the model plus the residual with the whole trend removed.
      relocked.grid = resample_fitted(refit.residual, refit, relocked.grid.samples_per_period);
      relocked.spectra = period_spectra(relocked.grid, refit.harmonics(), relocked.grid.periods < 4);
      relocked.selection = locked.selection;
      locked = std::move(relocked);
      out.baseline_modelled = true;
    } catch (const AnalysisError&) {
      // The detrended record has no clear fundamental: keep the first fit, trend in the noise.
    }
    // Size of the total trend (both rounds).
    const BaselineTrend sized = out.baseline;
    double lo = sized.at(0, n), hi = lo, ms = 0;
    for (std::size_t k = 0; k < n; ++k) {
      const double v = sized.at(k, n);
      lo = std::min(lo, v);
      hi = std::max(hi, v);
      ms += v * v;
    }
    out.baseline.peak_to_peak = hi - lo;
    out.baseline.power = ms / static_cast<double>(n);
  }
  const HarmonicFit& fit = locked.fit;
  const PeriodGrid& grid = locked.grid;
  const PeriodSpectra& spectra = locked.spectra;
  out.f0_u_noise_factor = locked.f0_u_noise_factor;
  const double f0 = fit.fundamental.f0_hz;
  const int h = fit.harmonics();
  out.fundamental = fit.fundamental;
  if (!fit.fundamental.converged) out.status = "not-converged";
  out.periods = static_cast<double>(n) * f0 / fs;
  const int m = grid.samples_per_period;
  out.whole_periods = grid.periods;
  out.samples_per_period = m;
  double sumsq = 0;
  for (double v : grid.samples) sumsq += v * v;
  out.rms = std::sqrt(sumsq / static_cast<double>(grid.samples.size()));
  out.peak_abs = peak;
  out.crest_factor = crest_factor(peak, out.rms);

  // Noise level at each harmonic, as a ratio to white noise of the fit's residual variance
  // (used for dc, the fit's f0 cross terms, and the noise-bin / fit-residual methods), and, with
  // whole periods enough, the 2×2 sample covariance of the per-period (Re, Im) phasors.
  const double sigma2 = fit.sigma2;
  const auto H = static_cast<std::size_t>(h);
  std::vector<double> ratio(H + 1, 1.0);
  std::vector<std::array<double, 3>> scatter(H + 1, {0.0, 0.0, 0.0});  // {rr, ii, ri} of one period
  const int p = grid.periods;
  const double samples_per_period_fs = fs / f0;
  const PeriodScatterFloor floor = period_scatter_floor(grid, x, sigma2);
  out.period_scatter_ratio = floor.ratio;
  out.quantisation_step = floor.step;
  if (p >= 4) {
    out.noise_method = "per-period";
    out.noise_dof = p - 1;
    for (std::size_t k = 0; k <= H; ++k) {
      double rr = 0, ii = 0, ri = 0;
      for (int q = 0; q < p; ++q) {
        const std::complex<double> d = spectra.per_period[static_cast<std::size_t>(q)][k] - spectra.mean[k];
        rr += d.real() * d.real();
        ii += d.imag() * d.imag();
        ri += d.real() * d.imag();
      }
      scatter[k] = {rr / (p - 1), ii / (p - 1), ri / (p - 1)};
      const double white = (k == 0 ? 1.0 : 4.0) * sigma2 * f0 / fs;  // E|ΔX|² of one period
      ratio[k] = white > 0 ? (scatter[k][0] + scatter[k][1]) / white : 1.0;
      // Near fs/2 the grid's residual is interpolated at the kernel's band edge, and its
      // per-period scatter under-reads the noise (measured: 84–91 % amplitude coverage at
      // 0.44·fs, docs/performance.md); there the fit residual's white level is a floor, the
      // scatter's shape kept.
      if (static_cast<double>(k) * f0 >= kAliasBandFraction * fs && ratio[k] > 0 && ratio[k] < 1) {
        for (double& c : scatter[k]) c /= ratio[k];
        ratio[k] = 1;
      }
    }
  } else if (spectra.noise_bin_dof > 0) {
    out.noise_method = "noise-bins";
    out.noise_dof = spectra.noise_bin_dof;
    for (std::size_t k = 0; k <= H; ++k) {
      const double white = (k == 0 ? 1.0 : 4.0) * sigma2 * f0 / (p * fs);
      ratio[k] = white > 0 ? spectra.noise_bin_variance[k] / white : 1.0;
    }
  } else {
    out.noise_method = "fit-residual";
    out.noise_dof = fit.fundamental.dof;
  }
  if (floor.identical) {
    // The scatter (and the bins between harmonics) cannot show the error of a record whose
    // periods repeat: the residual (or the quantisation step) over one period is the error that
    // does not average out. Its size is a model value, so it gets the normal coverage factor.
    out.noise_method += " + one-period floor";
    out.noise_dof = 0;
  }

  // Harmonic lines with uncertainties. The fit's covariance σ²·C_unit of (a, b, ν) is
  // propagated to (Re X, Im X) at t = 0. Its (a, b) block is replaced by the noise the data show:
  //  - per-period (P ≥ 4): the 2×2 sample covariance S of the per-period phasors divided by the
  //    record's effective number of periods (the mean of P independent periods has covariance
  //    S/P; Pintelon & Schoukens, System Identification, 2nd ed., §2.4, sample mean and sample
  //    covariance of periodic measurements). S keeps the noise's shape, so noise that is not
  //    circular (sampling jitter moves the phase, not the amplitude) is covered;
  //  - otherwise the white-noise block scaled by the noise ratio r (circular).
  // The f0 terms are the fit's, scaled by the noise along the harmonics' phases (below). A record whose periods repeat
  // exactly adds the one-period floor 2·σ_e²/M per component (σ_e² = max(residual variance,
  // Δ²/12), M = fs/f0 samples per period; IEEE Std 1241-2010 §4.1.4.2 / Widrow's quantisation
  // noise model). Amplitude and phase then follow to first order (JCGM 100:2008 §5.1.2).
  out.harmonics.reserve(H);
  const double k95 = coverage_95(out.noise_dof);
  std::vector<double> amplitudes(H + 1, 0.0);
  std::vector<double> noise_power(H + 1, 0.0);  // E|ΔX_n|², for THD's noise bias
  const double floor_component = floor.identical ? 2 * floor.error_variance / samples_per_period_fs : 0.0;
  // f0 is read from the phases' progression over the record, so its variance scales with the
  // noise along each harmonic's phase direction, weighted by the information n²·A_n² it carries
  // (the ν row of JᵀJ). With P ≥ 4 that noise is measured per period: sampling jitter puts 1.5×
  // the white share there, which the fit's white σ² misses (issue 12). The ratio has the per-period
  // estimate's P − 1 degrees of freedom, like the (a, b) block.
  double nu_ratio = 1;
  if (p >= 4 && !floor.identical && fit.fundamental.method != "forced") {
    // The residual is orthogonal to the fit's ω column, a ramp over the periods along each
    // harmonic's phase direction with weight w_k = k²A_k²/Σ n²A_n²: harmonic k's per-period
    // deviations lose w_k of their P − 1 degrees of freedom along its phase, so the scatter
    // there reads (P − 1 − w_k)/(P − 1) of the noise (25 % low for a lone fundamental at P = 5).
    // Restored as a rank-one update along the phase direction.
    double total = 0;
    for (std::size_t k = 1; k <= H; ++k) total += static_cast<double>(k * k) * std::norm(fit.phasor(static_cast<int>(k)));
    for (std::size_t k = 1; k <= H && total > 0; ++k) {
      const std::complex<double> X = fit.phasor(static_cast<int>(k));
      const double w = static_cast<double>(k * k) * std::norm(X) / total;
      const double phi = std::arg(X), cp = std::cos(phi), sp = std::sin(phi);
      const double along_phase = sp * sp * scatter[k][0] - 2 * sp * cp * scatter[k][2] + cp * cp * scatter[k][1];
      const double extra = along_phase * w / (p - 1 - w);
      scatter[k][0] += extra * sp * sp;
      scatter[k][1] += extra * cp * cp;
      scatter[k][2] -= extra * sp * cp;
    }
  }
  if (p >= 4 && !floor.identical) {
    const double white_component = 2.0 * sigma2 * f0 / fs;  // one period, one direction
    double weighted = 0, weight = 0;
    for (std::size_t k = 1; k <= H && white_component > 0; ++k) {
      const std::complex<double> X = fit.phasor(static_cast<int>(k));
      const double w = static_cast<double>(k * k) * std::norm(X);
      const double phi = std::arg(X), cp = std::cos(phi), sp = std::sin(phi);
      const double along_phase = sp * sp * scatter[k][0] - 2 * sp * cp * scatter[k][2] + cp * cp * scatter[k][1];
      weighted += w * along_phase / white_component;
      weight += w;
    }
    if (weight > 0) nu_ratio = weighted / weight;
  }
  for (std::size_t k = 0; k <= H; ++k) {
    const auto& u = fit.unit_cov[k];
    const double r = std::sqrt(std::max(ratio[k], 0.0));
    const double cvv = sigma2 * u[2] * nu_ratio;
    const double rv = std::sqrt(std::max(nu_ratio, 0.0));
    const double cav = sigma2 * u[4] * r * rv, cbv = sigma2 * u[5] * r * rv;
    if (k == 0) {
      out.dc = fit.a[0];
      const double caa = sigma2 * u[0] * r * r;
      out.dc_u = std::sqrt(std::max(caa, 0.0) + 0.5 * floor_component);
      continue;
    }
    const std::complex<double> X = fit.phasor(static_cast<int>(k));
    // ∂X/∂a = e^{−jα}, ∂X/∂b = −j·e^{−jα}, ∂X/∂ν = −j·n·fs·t_c·X (α = n·ω·t_c).
    const double cycles = static_cast<double>(k) * f0 * fit.tc_s;
    const double alpha = kTwoPi * (cycles - std::floor(cycles));
    const double ca = std::cos(alpha), sa = std::sin(alpha);
    const double g = static_cast<double>(k) * fs * fit.tc_s;
    // White-noise (a, b) block in (Re X, Im X): rows (ca, −sa) and (−sa, −ca).
    const double waa = sigma2 * u[0], wbb = sigma2 * u[1], wab = sigma2 * u[3];
    const double wrr = ca * ca * waa - 2 * ca * sa * wab + sa * sa * wbb;
    const double wii = sa * sa * waa + 2 * sa * ca * wab + ca * ca * wbb;
    const double wri = -ca * sa * waa - ca * ca * wab + sa * sa * wab + sa * ca * wbb;
    double crr = 0, cii = 0, cri = 0;
    if (p >= 4) {
      const double white = 4.0 * sigma2 * f0 / fs;
      const double periods_eff = wrr + wii > 0 ? white / (wrr + wii) : static_cast<double>(p);
      crr = scatter[k][0] / periods_eff;
      cii = scatter[k][1] / periods_eff;
      cri = scatter[k][2] / periods_eff;
    } else {
      crr = wrr * r * r;
      cii = wii * r * r;
      cri = wri * r * r;
    }
    crr += floor_component;
    cii += floor_component;
    // f0 part: ν's variance and its cross terms with (a, b).
    const double vr = g * X.imag(), vi = -g * X.real();
    const double xr = ca * cav - sa * cbv, xi = -sa * cav - ca * cbv;  // Cov(Re X, ν), Cov(Im X, ν) via (a, b)
    crr += 2 * xr * vr + vr * vr * cvv;
    cii += 2 * xi * vi + vi * vi * cvv;
    cri += xr * vi + xi * vr + vr * vi * cvv;
    HarmonicLine line;
    line.n = static_cast<int>(k);
    line.freq_hz = static_cast<double>(k) * f0;
    line.amplitude = std::abs(X);
    line.phasor = X;
    line.cov_re_re = crr;
    line.cov_im_im = cii;
    line.cov_re_im = cri;
    noise_power[k] = crr + cii;
    const double phi = std::arg(X);
    const double cp = std::cos(phi), sp = std::sin(phi);
    line.amplitude_u = std::sqrt(std::max(0.0, cp * cp * crr + 2 * cp * sp * cri + sp * sp * cii));
    line.phase_deg = wrap_deg(phi * 180 / kPi);
    const double var_t = sp * sp * crr - 2 * cp * sp * cri + cp * cp * cii;
    line.phase_u_deg = line.amplitude > 0
                           ? std::min(180.0, std::sqrt(std::max(0.0, var_t)) / line.amplitude * 180 / kPi)
                           : 180.0;
    line.significant = line.amplitude >= options.significance * line.amplitude_u && line.amplitude > 0;
    // 95 % amplitude interval inside [0, ∞): Rice inversion with σ² per component the mean of
    // the two projections' variances (dsp/magnitude_interval.hpp).
    const MagnitudeInterval iv =
        magnitude_interval(line.amplitude, std::sqrt(std::max(0.5 * (crr + cii), 0.0)), k95);
    line.amplitude_lo = iv.lo;
    line.amplitude_hi = iv.hi;
    line.phase_defined = !iv.consistent_with_zero;
    amplitudes[k] = line.amplitude;
    out.harmonics.push_back(line);
  }

  // Figures: residual mean square (THD+N) and unbiased noise power (SNR).
  const double residual_power = fit.residual_ss / static_cast<double>(n);
  if (options.full_scale_range > 0) {
    out.full_scale_range = options.full_scale_range;
    out.enob_note = "full scale given";
  } else if (channel.unit == "FS") {
    out.full_scale_range = std::ldexp(2.0, -exponent);  // audio: ±1 full scale, in the scaled unit
    out.enob_note = "audio full scale (±1 FS)";
  } else {
    out.enob_note = "no full-scale range known (give one with --full-scale)";
  }
  out.distortion = distortion_figures(amplitudes, residual_power, sigma2, out.full_scale_range, noise_power);
  out.noise_rms = std::sqrt(sigma2);
  out.noise_floor = 2 * out.noise_rms / std::sqrt(static_cast<double>(n));
  out.noise_floor_dbc = amplitudes[1] > 0 && out.noise_floor > 0
                            ? 20 * std::log10(out.noise_floor / amplitudes[1])
                            : 0;
  // The automatic count kept no harmonic above the fundamental: lines 2…K were examined and none
  // stood out of its noise (Holm, α = 0.01), so the table's THD of 0 is not a measurement. Its
  // one-sided 95 % bound is that of K − 1 noise-only lines at the white noise floor: each |A_n|²
  // is noise_floor²·χ²(2)/2, their sum noise_floor²·(K − 1)·(1 + 1.645/√(K − 1)) at 95 % (normal
  // approximation of χ²(2(K − 1)), common practice); coloured noise makes it approximate.
  if (out.selection.automatic && amplitudes.size() <= 2 && out.selection.highest_examined > 1 &&
      amplitudes[1] > 0) {
    const double lines = static_cast<double>(out.selection.highest_examined - 1);
    out.distortion.thd_above_noise = false;
    out.distortion.thd_upper =
        std::sqrt(out.noise_floor * out.noise_floor * lines * (1 + 1.6448536269514722 / std::sqrt(lines))) /
        amplitudes[1];
  }

  // ---- flags -----------------------------------------------------------------------------
  if (!fit.fundamental.converged)
    out.flags.push_back({"not-converged", "the f0 fit stopped after " +
                                              std::to_string(fit.fundamental.iterations) +
                                              " iterations without converging; f0 may be off"});
  const ClipCheck clip = check_clipping(x);
  // Lines beside the harmonics (dsp/residual_lines.hpp): interference, or not one periodic signal.
  bool top_band_harmonics = false;  // harmonics up near fs/2: aliased ones are to be expected
  for (const auto& line : out.harmonics)
    top_band_harmonics = top_band_harmonics || (line.significant && line.n >= 2 && line.freq_hz >= 0.375 * fs);
  out.residual_lines = find_residual_lines(fit.residual, fs, f0, top_band_harmonics, h);
  {
    double amax = 0, harm_power = 0;
    for (double a : amplitudes) amax = std::max(amax, a);
    for (std::size_t k = 1; k < amplitudes.size(); ++k) harm_power += 0.5 * amplitudes[k] * amplitudes[k];
    auto& lines = out.residual_lines.lines;
    lines.erase(std::remove_if(lines.begin(), lines.end(),
                               [&](const ResidualLine& l) { return l.amplitude < kLineRoundingFloor * amax; }),
                lines.end());
    double line_power = 0;
    for (const auto& l : lines) line_power += 0.5 * l.amplitude * l.amplitude;
    out.residual_lines.power = line_power;
    out.explained_share = harm_power + line_power > 0 ? harm_power / (harm_power + line_power) : 1;
    // The fundamental carries little and most harmonics below the strongest are empty: a tone
    // "explained" as a high harmonic of a sub-multiple (issue 12).
    std::size_t strongest = 1;
    for (std::size_t k = 1; k < amplitudes.size(); ++k)
      if (amplitudes[k] > amplitudes[strongest]) strongest = k;
    int occupied = 0;
    for (std::size_t k = 0; k < out.harmonics.size() && out.harmonics[k].n <= static_cast<int>(strongest); ++k)
      occupied += out.harmonics[k].significant ? 1 : 0;
    const double a1 = amplitudes.size() > 1 ? amplitudes[1] : 0;
    const bool sparse = strongest >= 4 && a1 * a1 < 0.01 * 2 * harm_power &&
                        occupied * 4 < static_cast<int>(strongest);
    const std::string unit = out.unit.empty() ? "" : " " + out.unit;
    const auto line_text = [&](const ResidualLine& l) {
      // Messages quote levels in the channel's unit: the analysis runs on the unit-scaled
      // samples (× 2^-exponent, see analyze_channel), so each level is scaled back here.
      return sig(l.freq_hz, 6) + " Hz at " + sig(std::ldexp(l.amplitude, exponent), 3) + unit +
             (a1 > 0 ? " (" + format_fixed(20 * std::log10(l.amplitude / a1), 1) + " dBc)" : "");
    };
    if (!lines.empty() && out.explained_share < 1 - kNotPeriodicShare) {
      out.flags.push_back({"not-periodic", "the harmonics of f0 = " + sig(f0, 6) + " Hz explain only " +
                                               sig(100 * out.explained_share, 3) +
                                               " % of the line power; strongest other line " +
                                               line_text(lines.front()) + " (" + std::to_string(lines.size()) +
                                               " in all): the record is not one periodic signal (several "
                                               "tones, modulation), and the figures describe only part of it"});
    } else if (sparse) {
      out.flags.push_back({"not-periodic", "the fundamental f0 = " + sig(f0, 6) + " Hz carries under 1 % of "
                                               "the harmonic power and " + std::to_string(occupied) + " of the " +
                                               std::to_string(strongest) + " harmonics up to the strongest (" +
                                               std::to_string(strongest) + ") are significant: f0 is likely a "
                                               "false sub-multiple of unrelated lines"});
    } else if (!lines.empty() && 0.5 * lines.front().amplitude * lines.front().amplitude >=
                                     kInterferenceShare * fit.residual_ss / static_cast<double>(n)) {
      out.flags.push_back({"interference", std::to_string(lines.size()) + " line" +
                                               (lines.size() > 1 ? "s" : "") +
                                               " beside the harmonics; strongest " + line_text(lines.front()) +
                                               ": not part of the periodic signal (hum, another source); it is "
                                               "counted as noise in THD+N, SINAD and SNR"});
    }
  }
  if (out.selection.truncated_lines > 0)
    out.flags.push_back({"harmonics-truncated",
                         std::to_string(out.selection.truncated_lines) + " significant harmonic" +
                             (out.selection.truncated_lines > 1 ? "s" : "") + " above the " +
                             std::to_string(h) + " asked for (up to " +
                             std::to_string(out.selection.significant_harmonics.back()) + ", " +
                             format_fixed(out.selection.truncated_dbc, 1) +
                             " dBc in all) are left out: they count as noise in SNR, THD+N and SINAD, "
                             "are missing from THD, and widen f0's uncertainty (leave --harmonics out "
                             "to include every significant harmonic)"});
  if (clip.clipped)
    out.flags.push_back({"clipped", std::to_string(clip.count) + " samples (" + sig(100 * clip.share, 3) +
                                        " % of the record; a sine puts " + sig(100 * clip.expected_share, 2) +
                                        " % there) sit on a flat plateau within " +
                                        sig(std::ldexp(clip.band, exponent), 3) + " of the " +
                                        (clip.at_max ? "maximum " : "minimum ") +
                                        sig(std::ldexp(clip.level, exponent), 6) +
                                        ": the signal looks clipped, and the harmonics describe the "
                                        "flattened waveform"});
  if (out.baseline.significant) {
    const double a1 = amplitudes.size() > 1 ? amplitudes[1] : 0;
    const std::string dbc =
        a1 > 0 ? ", " + format_fixed(20 * std::log10(out.baseline.peak_to_peak / a1), 1) + " dBc" : "";
    out.flags.push_back({"baseline-drift", "the baseline drifts by " +
                                               sig(std::ldexp(out.baseline.peak_to_peak, exponent), 3) +
                                               (out.unit.empty() ? "" : " " + out.unit) + " peak-to-peak" + dbc +
                                               " over the record (Legendre trend, degree ≤ 2); " +
                                               (out.baseline_modelled
                                                    ? "it was fitted with the harmonics and is not counted as noise"
                                                    : "it is counted as noise")});
  }
  {
    // Evidence, not a threshold crossing: among the K harmonics n ≥ 2 in the top band, white
    // noise alone makes one of them "significant" (amplitude ≥ 3·u, ~1 % each) in K % of
    // records. A line counts only when its Hotelling statistic T² = Xᵀ·C⁻¹·X rejects "no line"
    // at the family-wise level kAliasFamilyAlpha (Bonferroni over the K lines; with ν noise
    // dof, T² ~ 2ν/(ν − 1)·F(2, ν − 1) under no line, Hotelling 1931; ν unknown or large: χ²₂).
    int candidates = 0;
    for (const auto& line : out.harmonics) candidates += line.n >= 2 && line.freq_hz >= kAliasBandFraction * fs;
    const double alpha = kAliasFamilyAlpha / std::max(candidates, 1);
    const int nu = out.noise_dof;
    const double t2_limit =
        nu >= 3 && nu <= 1000
            ? 2.0 * nu / (nu - 1) *
                  boost::math::quantile(boost::math::complement(
                      boost::math::fisher_f_distribution<double>(2.0, nu - 1.0), alpha))
            : -2 * std::log(alpha);
    for (const auto& line : out.harmonics) {
      if (line.n < 2 || line.freq_hz < kAliasBandFraction * fs || line.amplitude < kAliasLevel * amplitudes[1] ||
          !line.significant)
        continue;
      const double det = line.cov_re_re * line.cov_im_im - line.cov_re_im * line.cov_re_im;
      const double xr = line.phasor.real(), xi = line.phasor.imag();
      const double t2 = det > 0 ? (xr * xr * line.cov_im_im - 2 * xr * xi * line.cov_re_im + xi * xi * line.cov_re_re) / det
                                : std::numeric_limits<double>::infinity();
      if (!(t2 > t2_limit)) continue;
      out.flags.push_back(
          {"aliasing-risk", "harmonic " + std::to_string(line.n) + " at " + sig(line.freq_hz) +
                                " Hz (above 0.4·fs) is only " +
                                sig(-20 * std::log10(line.amplitude / amplitudes[1]), 3) +
                                " dB below the fundamental and stands out of the noise (T² " + sig(t2, 3) +
                                " against " + sig(t2_limit, 3) + " for 1 % over the " + std::to_string(candidates) +
                                " harmonics there): harmonics beyond fs/2 may have folded back onto the ones reported"});
      break;
    }
  }
  if (floor.identical)
    out.flags.push_back(
        {"identical-periods",
         "the periods repeat almost exactly (period-to-period scatter " + sig(100 * floor.ratio, 2) +
             " % of the residual variance; a coherent capture): the scatter cannot show the error, so the "
             "uncertainties come from " +
             (floor.step > 0 && floor.step * floor.step / 12 >= sigma2
                  ? "the quantisation step Δ = " + sig(std::ldexp(floor.step, exponent), 3) + " (Δ/√12 per sample)"
                  : std::string("the residual (") + sig(std::ldexp(std::sqrt(sigma2), exponent), 3) + " rms)") +
             " over one period, which does not average out"});
  if (out.periods < 2)
    out.flags.push_back({"few-periods", "the record holds only " + sig(out.periods, 3) +
                                            " periods: figures rest on little data"});
  bool any_significant = false;
  for (const auto& line : out.harmonics) any_significant = any_significant || line.significant;
  if (!any_significant)
    out.flags.push_back({"dc-only", "no harmonic of f0 = " + sig(f0, 6) +
                                        " Hz stands out of the noise: the channel is dc plus "
                                        "noise, and the harmonic figures are noise"});
  if (options.lock.f0_hz > 0 && any_significant) {
    // A forced f0 is taken as exact; if the data put f0 elsewhere, every phase turns by
    // 360°·n·Δf·T over the record and the amplitudes shrink, far beyond the u's (issue 12).
    LockOptions unforced = options.lock;
    unforced.f0_hz = 0;
    unforced.f0_hint_hz = 0;
    unforced.f0_start_hz = options.lock.f0_hz;
    unforced.max_harmonic = h;
    try {
      const HarmonicFit fitted = fit_harmonics(x, fs, t0, unforced);
      out.f0_free_hz = fitted.fundamental.f0_hz;
      out.f0_free_u_hz = fitted.fundamental.f0_u_hz;
      const double diff = options.lock.f0_hz - out.f0_free_hz;
      if (std::abs(diff) > kForcedF0Sigmas * out.f0_free_u_hz + 1e-10 * options.lock.f0_hz)
        out.flags.push_back({"forced-f0-off", "the forced f0 = " + sig(options.lock.f0_hz, 9) +
                                                  " Hz differs from the data's own f0 = " + sig(out.f0_free_hz, 9) +
                                                  " Hz ± " + sig(out.f0_free_u_hz, 2) + " by " +
                                                  sig(out.f0_free_u_hz > 0 ? std::abs(diff) / out.f0_free_u_hz : 0, 3) +
                                                  " u (" + sig(std::abs(diff) * static_cast<double>(n) / fs, 3) +
                                                  " bin): phases and amplitudes at the forced f0 are biased "
                                                  "beyond their uncertainties"});
    } catch (const AnalysisError&) {
      // No free fit (no clear fundamental): nothing to compare the forced f0 with.
    }
  }
  if (out.periods >= 4 && any_significant) {
    // f0 of each half, fitted from the whole record's f0 with up to kDriftHarmonics.
    LockOptions half = options.lock;
    half.f0_hz = 0;
    half.f0_hint_hz = 0;
    half.f0_start_hz = f0;
    half.max_harmonic = std::min(h, kDriftHarmonics);
    const std::size_t mid = n / 2;
    try {
      const HarmonicFit a = fit_harmonics(x.first(mid), fs, t0, half);
      const HarmonicFit b = fit_harmonics(x.subspan(mid), fs, t0 + static_cast<double>(mid) / fs, half);
      out.f0_first_half_hz = a.fundamental.f0_hz;
      out.f0_second_half_hz = b.fundamental.f0_hz;
      const double du = std::hypot(a.fundamental.f0_u_hz, b.fundamental.f0_u_hz);
      const double diff = std::abs(a.fundamental.f0_hz - b.fundamental.f0_hz);
      out.drift_sigmas = du > 0 ? diff / du : 0;
      // A floor of 1e-10·f0 keeps rounding in noise-free records from reading as drift.
      if (diff > options.drift_sigmas * du + 1e-10 * f0)
        out.flags.push_back({"drift", "f0 differs between the halves of the record (" +
                                          sig(out.f0_first_half_hz, 9) + " Hz, then " +
                                          sig(out.f0_second_half_hz, 9) + " Hz; " +
                                          sig(out.drift_sigmas, 3) +
                                          " uncertainties apart): the frequency drifts, and "
                                          "the figures are averages over the record"});
    } catch (const AnalysisError&) {
      // A half without a clear fundamental cannot show drift; the whole-record fit stands.
    }
  }
  return out;
}

}  // namespace

}  // namespace periodfit::dsp
