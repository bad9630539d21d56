// One channel's analysis: fit, lock, uncertainties, figures and flags (see harmonics.hpp).
#include "dsp/harmonics.hpp"

#include <algorithm>
#include <array>
#include <cmath>
#include <numbers>
#include <string>

#include <boost/math/distributions/students_t.hpp>

#include "core/error.hpp"
#include "dsp/internal/channel_checks.hpp"
#include "dsp/magnitude_interval.hpp"
#include "core/number_format.hpp"

namespace periodfit::dsp {
namespace {

using internal::kAliasBandFraction;

constexpr double kPi = std::numbers::pi;
constexpr double kTwoPi = 2 * std::numbers::pi;
/// Period-to-period scatter below this share of the residual variance means the periods repeat:
/// white noise gives ≈ 0.9 (the interpolation kernel passes 0.88 of the band) with a spread of
/// √(2/(M·(P − 1))), i.e. a few % for any record analyze locks, so 0.5 is never reached by noise;
/// a coherent capture whose periods hold the same codes gives 0.
constexpr double kIdenticalPeriodsRatio = 0.5;

/// Two-sided 95 % coverage factor for `dof` degrees of freedom (Student t; normal when 0 or large).
double coverage_95(int dof) {
  if (dof <= 0 || dof > 1000) return 1.959963984540054;
  return boost::math::quantile(boost::math::students_t_distribution<double>(dof), 0.975);
}

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

bool ChannelAnalysis::has_flag(Flag flag) const {
  return std::any_of(flags.begin(), flags.end(), [flag](const AnalysisFlag& f) { return f.flag == flag; });
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

/// A channel's analysis in its unit-scaled domain, with the checks' evidence for its flags.
struct ScaledAnalysis {
  ChannelAnalysis result;
  internal::ChannelChecks checks;
};

/// `exponent`: the samples are the channel's × 2^-exponent (the full scale follows them).
ScaledAnalysis analyze_unit_scaled(const SampleView& channel, double fs, double t0,
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
// The flags are worded last, from the results in the channel's unit, so their messages quote
// levels in that unit.
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
  const bool scalable = peak > 0 && std::isfinite(peak) && !constant;
  const int exponent = scalable ? std::ilogb(peak) + 1 : 0;  // peak·2^-exponent in [0.5, 1)
  if (exponent == 0) {
    ScaledAnalysis a = analyze_unit_scaled(channel, fs, t0, options, 0);
    internal::raise_flags(a.result, a.checks);
    return std::move(a.result);
  }
  std::vector<double> scaled_samples;
  scaled_samples.reserve(channel.samples.size());
  for (double v : channel.samples) scaled_samples.push_back(std::ldexp(v, -exponent));
  const SampleView scaled{channel.name, channel.unit, scaled_samples};
  // The full-scale range is in the channel's unit, so it is scaled with the samples (ENOB is a
  // ratio of it to the noise and distortion).
  AnalyzeOptions scaled_options = options;
  scaled_options.full_scale_range = std::ldexp(options.full_scale_range, -exponent);
  ScaledAnalysis a = analyze_unit_scaled(scaled, fs, t0, scaled_options, exponent);
  scale_results(a.result, exponent);
  internal::scale_checks(a.checks, exponent);
  if (!all_finite(a.result))
    throw AnalysisError("channel \"" + channel.name + "\": the results exceed the range of double " +
                        "precision numbers (peak " + format_significant(peak, 4) +
                        "); give the data in a larger unit");
  internal::raise_flags(a.result, a.checks);
  return std::move(a.result);
}

namespace {

/// Baseline drift (dsp/baseline.hpp): the channel is locked again on x − trend (f0 started where
/// it was, H as chosen), and the trend of the new residual is added; the noise figures and the
/// grid then exclude it. Leaves `locked` as it was when the detrended record has no clear
/// fundamental (the trend then stays in the noise).
void relock_detrended(std::span<const double> x, double fs, double t0, const AnalyzeOptions& options,
                      double peak, LockedChannel& locked, ChannelAnalysis& out) {
  const std::size_t n = x.size();
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
}

/// Phase 1, the lock (dsp/channel_lock.cpp), with a significant baseline trend estimated from the
/// residual and, unless options.model_baseline is off, modelled.
LockedChannel lock_with_baseline(const SampleView& channel, double fs, double t0, const AnalyzeOptions& options,
                                 double peak, ChannelAnalysis& out) {
  const std::span<const double> x = channel.samples;
  const std::size_t n = x.size();
  LockedChannel locked;
  try {
    locked = lock_channel(x, fs, t0, options.lock, options.samples_per_period);
  } catch (const AnalysisError& e) {
    throw AnalysisError("channel \"" + channel.name + "\": " + e.what());
  }
  out.selection = locked.selection;
  out.baseline = fit_baseline_trend(locked.fit.residual, locked.fit.fundamental.dof, peak);
  if (!out.baseline.significant || !options.model_baseline) return locked;
  relock_detrended(x, fs, t0, options, peak, locked, out);
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
  return locked;
}

/// Phase 2: f0, the record's length and level figures of the locked channel.
void describe_record(ChannelAnalysis& out, const LockedChannel& locked, double fs, std::size_t n, double peak) {
  const HarmonicFit& fit = locked.fit;
  out.f0_u_noise_factor = locked.f0_u_noise_factor;
  out.fundamental = fit.fundamental;
  if (!fit.fundamental.converged) out.status = Status::not_converged;
  out.periods = static_cast<double>(n) * fit.fundamental.f0_hz / fs;
  out.whole_periods = locked.grid.periods;
  out.samples_per_period = locked.grid.samples_per_period;
  double sumsq = 0;
  for (double v : locked.grid.samples) sumsq += v * v;
  out.rms = std::sqrt(sumsq / static_cast<double>(locked.grid.samples.size()));
  out.peak_abs = peak;
  out.crest_factor = crest_factor(peak, out.rms);
}

/// The noise at each harmonic n = 0…H: its power as a ratio to white noise of the fit's residual
/// variance (used for dc, the fit's f0 cross terms, and the noise-bin / fit-residual methods),
/// and, with whole periods enough, the 2×2 sample covariance of the per-period (Re, Im) phasors.
struct HarmonicNoise {
  std::vector<double> ratio;
  std::vector<std::array<double, 3>> scatter;  ///< {rr, ii, ri} of one period
  PeriodScatterFloor floor;
  double nu_ratio = 1;  ///< noise along the harmonics' phases over white: scales f0's variance
};

/// "per-period" (P ≥ 4): each harmonic's per-period scatter, floored at the band edge.
void per_period_noise(HarmonicNoise& noise, const LockedChannel& locked, double fs) {
  const PeriodSpectra& spectra = locked.spectra;
  const int p = locked.grid.periods;
  const double f0 = locked.fit.fundamental.f0_hz, sigma2 = locked.fit.sigma2;
  for (std::size_t k = 0; k < noise.ratio.size(); ++k) {
    double rr = 0, ii = 0, ri = 0;
    for (int q = 0; q < p; ++q) {
      const std::complex<double> d = spectra.per_period[static_cast<std::size_t>(q)][k] - spectra.mean[k];
      rr += d.real() * d.real();
      ii += d.imag() * d.imag();
      ri += d.real() * d.imag();
    }
    auto& scatter = noise.scatter[k];
    scatter = {rr / (p - 1), ii / (p - 1), ri / (p - 1)};
    const double white = (k == 0 ? 1.0 : 4.0) * sigma2 * f0 / fs;  // E|ΔX|² of one period
    double& ratio = noise.ratio[k];
    ratio = white > 0 ? (scatter[0] + scatter[1]) / white : 1.0;
    // Near fs/2 the grid's residual is interpolated at the kernel's band edge, and its
    // per-period scatter under-reads the noise (measured: 84–91 % amplitude coverage at
    // 0.44·fs, docs/performance.md); there the fit residual's white level is a floor, the
    // scatter's shape kept.
    if (static_cast<double>(k) * f0 >= kAliasBandFraction * fs && ratio > 0 && ratio < 1) {
      for (double& c : scatter) c /= ratio;
      ratio = 1;
    }
  }
}

/// The residual is orthogonal to the fit's ω column, a ramp over the periods along each
/// harmonic's phase direction with weight w_k = k²A_k²/Σ n²A_n²: harmonic k's per-period
/// deviations lose w_k of their P − 1 degrees of freedom along its phase, so the scatter
/// there reads (P − 1 − w_k)/(P − 1) of the noise (25 % low for a lone fundamental at P = 5).
/// Restored as a rank-one update along the phase direction.
void restore_phase_dof(HarmonicNoise& noise, const HarmonicFit& fit, int p) {
  const std::size_t H = noise.scatter.size() - 1;
  double total = 0;
  for (std::size_t k = 1; k <= H; ++k) total += static_cast<double>(k * k) * std::norm(fit.phasor(static_cast<int>(k)));
  for (std::size_t k = 1; k <= H && total > 0; ++k) {
    auto& scatter = noise.scatter[k];
    const std::complex<double> X = fit.phasor(static_cast<int>(k));
    const double w = static_cast<double>(k * k) * std::norm(X) / total;
    const double phi = std::arg(X), cp = std::cos(phi), sp = std::sin(phi);
    const double along_phase = sp * sp * scatter[0] - 2 * sp * cp * scatter[2] + cp * cp * scatter[1];
    const double extra = along_phase * w / (p - 1 - w);
    scatter[0] += extra * sp * sp;
    scatter[1] += extra * cp * cp;
    scatter[2] -= extra * sp * cp;
  }
}

/// f0 is read from the phases' progression over the record, so its variance scales with the
/// noise along each harmonic's phase direction, weighted by the information n²·A_n² it carries
/// (the ν row of JᵀJ). With P ≥ 4 that noise is measured per period: sampling jitter puts 1.5×
/// the white share there, which the fit's white σ² misses (issue 12). The ratio has the per-period
/// estimate's P − 1 degrees of freedom, like the (a, b) block.
double phase_noise_ratio(const HarmonicNoise& noise, const HarmonicFit& fit, double fs) {
  const double white_component = 2.0 * fit.sigma2 * fit.fundamental.f0_hz / fs;  // one period, one direction
  double weighted = 0, weight = 0;
  for (std::size_t k = 1; k < noise.scatter.size() && white_component > 0; ++k) {
    const auto& scatter = noise.scatter[k];
    const std::complex<double> X = fit.phasor(static_cast<int>(k));
    const double w = static_cast<double>(k * k) * std::norm(X);
    const double phi = std::arg(X), cp = std::cos(phi), sp = std::sin(phi);
    const double along_phase = sp * sp * scatter[0] - 2 * sp * cp * scatter[2] + cp * cp * scatter[1];
    weighted += w * along_phase / white_component;
    weight += w;
  }
  return weight > 0 ? weighted / weight : 1;
}

/// Phase 3: the noise at each harmonic, its method and degrees of freedom (harmonics.hpp).
HarmonicNoise estimate_noise(const LockedChannel& locked, std::span<const double> x, double fs, ChannelAnalysis& out) {
  const HarmonicFit& fit = locked.fit;
  const PeriodSpectra& spectra = locked.spectra;
  const double sigma2 = fit.sigma2, f0 = fit.fundamental.f0_hz;
  const auto H = static_cast<std::size_t>(fit.harmonics());
  const int p = locked.grid.periods;
  HarmonicNoise noise;
  noise.ratio.assign(H + 1, 1.0);
  noise.scatter.assign(H + 1, {0.0, 0.0, 0.0});
  noise.floor = period_scatter_floor(locked.grid, x, sigma2);
  out.period_scatter_ratio = noise.floor.ratio;
  out.quantisation_step = noise.floor.step;
  if (p >= 4) {
    out.noise_method = "per-period";
    out.noise_dof = p - 1;
    per_period_noise(noise, locked, fs);
  } else if (spectra.noise_bin_dof > 0) {
    out.noise_method = "noise-bins";
    out.noise_dof = spectra.noise_bin_dof;
    for (std::size_t k = 0; k <= H; ++k) {
      const double white = (k == 0 ? 1.0 : 4.0) * sigma2 * f0 / (p * fs);
      noise.ratio[k] = white > 0 ? spectra.noise_bin_variance[k] / white : 1.0;
    }
  } else {
    out.noise_method = "fit-residual";
    out.noise_dof = fit.fundamental.dof;
  }
  if (noise.floor.identical) {
    // The scatter (and the bins between harmonics) cannot show the error of a record whose
    // periods repeat: the residual (or the quantisation step) over one period is the error that
    // does not average out. Its size is a model value, so it gets the normal coverage factor.
    out.noise_method += " + one-period floor";
    out.noise_dof = 0;
    return noise;
  }
  if (p >= 4) {
    if (fit.fundamental.method != F0Method::forced) restore_phase_dof(noise, fit, p);
    noise.nu_ratio = phase_noise_ratio(noise, fit, fs);
  }
  return noise;
}

/// Covariance {rr, ii, ri} of harmonic k's phasor (Re X, Im X) at t = 0 (see harmonic_lines).
std::array<double, 3> phasor_covariance(const HarmonicFit& fit, const HarmonicNoise& noise, std::size_t k, int p,
                                        double fs, double floor_component) {
  const double sigma2 = fit.sigma2, f0 = fit.fundamental.f0_hz;
  const auto& u = fit.unit_cov[k];
  const auto& scatter = noise.scatter[k];
  const double r = std::sqrt(std::max(noise.ratio[k], 0.0));
  const double cvv = sigma2 * u[2] * noise.nu_ratio;
  const double rv = std::sqrt(std::max(noise.nu_ratio, 0.0));
  const double cav = sigma2 * u[4] * r * rv, cbv = sigma2 * u[5] * r * rv;
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
    crr = scatter[0] / periods_eff;
    cii = scatter[1] / periods_eff;
    cri = scatter[2] / periods_eff;
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
  return {crr, cii, cri};
}

/// Harmonic k's line from its phasor and the phasor's covariance {rr, ii, ri}.
HarmonicLine harmonic_line(int k, double f0, std::complex<double> X, const std::array<double, 3>& cov,
                           double significance, double k95) {
  const auto [crr, cii, cri] = cov;
  HarmonicLine line;
  line.n = k;
  line.freq_hz = static_cast<double>(k) * f0;
  line.amplitude = std::abs(X);
  line.phasor = X;
  line.cov_re_re = crr;
  line.cov_im_im = cii;
  line.cov_re_im = cri;
  const double phi = std::arg(X);
  const double cp = std::cos(phi), sp = std::sin(phi);
  line.amplitude_u = std::sqrt(std::max(0.0, cp * cp * crr + 2 * cp * sp * cri + sp * sp * cii));
  line.phase_deg = wrap_deg(phi * 180 / kPi);
  const double var_t = sp * sp * crr - 2 * cp * sp * cri + cp * cp * cii;
  line.phase_u_deg = line.amplitude > 0
                         ? std::min(180.0, std::sqrt(std::max(0.0, var_t)) / line.amplitude * 180 / kPi)
                         : 180.0;
  line.significant = line.amplitude >= significance * line.amplitude_u && line.amplitude > 0;
  // 95 % amplitude interval inside [0, ∞): Rice inversion with σ² per component the mean of
  // the two projections' variances (dsp/magnitude_interval.hpp).
  const MagnitudeInterval iv = magnitude_interval(line.amplitude, std::sqrt(std::max(0.5 * (crr + cii), 0.0)), k95);
  line.amplitude_lo = iv.lo;
  line.amplitude_hi = iv.hi;
  line.phase_defined = !iv.consistent_with_zero;
  return line;
}

/// amplitudes[n] and E|ΔX_n|² (THD's noise bias) of n = 0…H, for the distortion figures.
struct LinePowers {
  std::vector<double> amplitudes;
  std::vector<double> noise_power;
};

/// Phase 4, dc and the harmonic lines with uncertainties. The fit's covariance σ²·C_unit of
/// (a, b, ν) is propagated to (Re X, Im X) at t = 0. Its (a, b) block is replaced by the noise
/// the data show:
///  - per-period (P ≥ 4): the 2×2 sample covariance S of the per-period phasors divided by the
///    record's effective number of periods (the mean of P independent periods has covariance
///    S/P; Pintelon & Schoukens, System Identification, 2nd ed., §2.4, sample mean and sample
///    covariance of periodic measurements). S keeps the noise's shape, so noise that is not
///    circular (sampling jitter moves the phase, not the amplitude) is covered;
///  - otherwise the white-noise block scaled by the noise ratio r (circular).
/// The f0 terms are the fit's, scaled by the noise along the harmonics' phases (phase_noise_ratio).
/// A record whose periods repeat exactly adds the one-period floor 2·σ_e²/M per component
/// (σ_e² = max(residual variance, Δ²/12), M = fs/f0 samples per period; IEEE Std 1241-2010
/// §4.1.4.2 / Widrow's quantisation noise model). Amplitude and phase then follow to first order
/// (JCGM 100:2008 §5.1.2).
LinePowers harmonic_lines(const HarmonicFit& fit, const HarmonicNoise& noise, int p, double fs,
                          const AnalyzeOptions& options, ChannelAnalysis& out) {
  const auto H = static_cast<std::size_t>(fit.harmonics());
  const double f0 = fit.fundamental.f0_hz;
  const double floor_component =
      noise.floor.identical ? 2 * noise.floor.error_variance / (fs / f0) : 0.0;
  const double r0 = std::sqrt(std::max(noise.ratio[0], 0.0));
  out.dc = fit.a[0];
  out.dc_u = std::sqrt(std::max(fit.sigma2 * fit.unit_cov[0][0] * r0 * r0, 0.0) + 0.5 * floor_component);
  out.harmonics.reserve(H);
  const double k95 = coverage_95(out.noise_dof);
  LinePowers powers{std::vector<double>(H + 1, 0.0), std::vector<double>(H + 1, 0.0)};
  for (std::size_t k = 1; k <= H; ++k) {
    const std::array<double, 3> cov = phasor_covariance(fit, noise, k, p, fs, floor_component);
    const HarmonicLine line =
        harmonic_line(static_cast<int>(k), f0, fit.phasor(static_cast<int>(k)), cov, options.significance, k95);
    powers.noise_power[k] = cov[0] + cov[1];
    powers.amplitudes[k] = line.amplitude;
    out.harmonics.push_back(line);
  }
  return powers;
}

/// Phase 5, the distortion figures: residual mean square (THD+N), unbiased noise power (SNR),
/// ENOB's full scale, the noise floor and THD's bound when no harmonic above the fundamental
/// stood out.
void distortion(ChannelAnalysis& out, const LinePowers& powers, const HarmonicFit& fit, const AnalyzeOptions& options,
                int exponent) {
  const std::size_t n = fit.residual.size();
  const std::vector<double>& amplitudes = powers.amplitudes;
  const double residual_power = fit.residual_ss / static_cast<double>(n);
  if (options.full_scale_range > 0) {
    out.full_scale_range = options.full_scale_range;
    out.enob_note = "full scale given";
  } else if (out.unit == "FS") {
    out.full_scale_range = std::ldexp(2.0, -exponent);  // audio: ±1 full scale, in the scaled unit
    out.enob_note = "audio full scale (±1 FS)";
  } else {
    out.enob_note = "no full-scale range known (give one with --full-scale)";
  }
  out.distortion = distortion_figures(amplitudes, residual_power, fit.sigma2, out.full_scale_range, powers.noise_power);
  out.noise_rms = std::sqrt(fit.sigma2);
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
}

ScaledAnalysis analyze_unit_scaled(const SampleView& channel, double fs, double t0,
                                   const AnalyzeOptions& options, int exponent) {
  ScaledAnalysis a;
  ChannelAnalysis& out = a.result;
  out.name = channel.name;
  out.unit = channel.unit;
  const std::span<const double> x = channel.samples;
  double peak = 0;
  for (double v : x) peak = std::max(peak, std::abs(v));
  const LockedChannel locked = lock_with_baseline(channel, fs, t0, options, peak, out);
  describe_record(out, locked, fs, x.size(), peak);
  const HarmonicNoise noise = estimate_noise(locked, x, fs, out);
  const LinePowers powers = harmonic_lines(locked.fit, noise, locked.grid.periods, fs, options, out);
  distortion(out, powers, locked.fit, options, exponent);
  a.checks = internal::check_channel(out, x, fs, t0, locked.fit, options);
  a.checks.identical_periods = noise.floor.identical;
  a.checks.quantisation_floor = noise.floor.step > 0 && noise.floor.step * noise.floor.step / 12 >= locked.fit.sigma2;
  return a;
}

}  // namespace

}  // namespace periodfit::dsp
