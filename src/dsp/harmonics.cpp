// One channel's analysis: fit, lock, uncertainties, figures and flags (see harmonics.hpp).
#include "dsp/harmonics.hpp"

#include <algorithm>
#include <array>
#include <cmath>
#include <numbers>
#include <string>

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
  HarmonicFit fit;
  try {
    fit = fit_harmonics(x, fs, t0, options.lock);
  } catch (const AnalysisError& e) {
    throw AnalysisError("channel \"" + channel.name + "\": " + e.what());
  }
  double peak = 0;
  for (double v : x) peak = std::max(peak, std::abs(v));
  // Baseline drift (dsp/baseline.hpp): a significant trend is estimated from the residual, the
  // harmonics are refitted on x − trend (f0 started where it was), and the trend of the new
  // residual is added; the noise figures then exclude it.
  out.baseline = fit_baseline_trend(fit.residual, fit.fundamental.dof, peak);
  if (out.baseline.significant && options.model_baseline) {
    std::vector<double> detrended(n);
    for (std::size_t k = 0; k < n; ++k) detrended[k] = x[k] - out.baseline.at(k, n);
    LockOptions again = options.lock;
    if (again.f0_hz <= 0) {
      again.f0_hint_hz = 0;
      again.f0_start_hz = fit.fundamental.f0_hz;
      again.max_harmonic = fit.harmonics();
    }
    try {
      HarmonicFit refit = fit_harmonics(detrended, fs, t0, again);
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
      refit.fundamental.iterations += fit.fundamental.iterations;
      fit = std::move(refit);
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
  const double f0 = fit.fundamental.f0_hz;
  const int h = fit.harmonics();
  out.fundamental = fit.fundamental;
  if (!fit.fundamental.converged) out.status = "not-converged";
  out.periods = static_cast<double>(n) * f0 / fs;

  // Lock: fitted model at the grid times + interpolated residual.
  const std::vector<double>& residual = fit.residual;
  const int m = options.samples_per_period > 0 ? std::max(options.samples_per_period, 2 * h + 2)
                                               : default_samples_per_period(fs, f0, h);
  PeriodGrid grid;
  try {
    grid = resample_fitted(residual, fit, m);
  } catch (const AnalysisError& e) {
    throw AnalysisError("channel \"" + channel.name + "\": " + e.what());
  }
  const PeriodSpectra spectra = period_spectra(grid, h, grid.periods < 4);
  out.whole_periods = grid.periods;
  out.samples_per_period = m;
  double sumsq = 0;
  for (double v : grid.samples) sumsq += v * v;
  out.rms = std::sqrt(sumsq / static_cast<double>(grid.samples.size()));
  out.peak_abs = peak;
  out.crest_factor = crest_factor(peak, out.rms);

  // Noise level at each harmonic, as a ratio to white noise of the fit's residual variance.
  const double sigma2 = fit.sigma2;
  const auto H = static_cast<std::size_t>(h);
  std::vector<double> ratio(H + 1, 1.0);
  const int p = grid.periods;
  if (p >= 4) {
    out.noise_method = "per-period";
    out.noise_dof = p - 1;
    for (std::size_t k = 0; k <= H; ++k) {
      double v = 0;
      for (int q = 0; q < p; ++q)
        v += std::norm(spectra.per_period[static_cast<std::size_t>(q)][k] - spectra.mean[k]);
      v /= (p - 1);
      const double white = (k == 0 ? 1.0 : 4.0) * sigma2 * f0 / fs;  // E|ΔX|² of one period
      ratio[k] = white > 0 ? v / white : 1.0;
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

  // Harmonic lines with uncertainties: C = diag(√r, √r, 1)·σ²·C_unit·diag(…) for (a, b, ν),
  // propagated to (Re X, Im X) at t = 0 and then to amplitude and phase.
  out.harmonics.reserve(H);
  const double k95 = coverage_95(out.noise_dof);
  std::vector<double> amplitudes(H + 1, 0.0);
  for (std::size_t k = 0; k <= H; ++k) {
    const auto& u = fit.unit_cov[k];
    const double r = std::sqrt(std::max(ratio[k], 0.0));
    const double caa = sigma2 * u[0] * r * r, cbb = sigma2 * u[1] * r * r, cvv = sigma2 * u[2];
    const double cab = sigma2 * u[3] * r * r, cav = sigma2 * u[4] * r, cbv = sigma2 * u[5] * r;
    if (k == 0) {
      out.dc = fit.a[0];
      out.dc_u = std::sqrt(std::max(caa, 0.0));
      continue;
    }
    const std::complex<double> X = fit.phasor(static_cast<int>(k));
    // ∂X/∂a = e^{−jα}, ∂X/∂b = −j·e^{−jα}, ∂X/∂ν = −j·n·fs·t_c·X (α = n·ω·t_c).
    const double cycles = static_cast<double>(k) * f0 * fit.tc_s;
    const double alpha = kTwoPi * (cycles - std::floor(cycles));
    const double ca = std::cos(alpha), sa = std::sin(alpha);
    const double g = static_cast<double>(k) * fs * fit.tc_s;
    const std::array<double, 3> jr = {ca, -sa, g * X.imag()};
    const std::array<double, 3> ji = {-sa, -ca, -g * X.real()};
    const double c[3][3] = {{caa, cab, cav}, {cab, cbb, cbv}, {cav, cbv, cvv}};
    auto quad = [&](const std::array<double, 3>& p1, const std::array<double, 3>& p2) {
      double s = 0;
      for (int i = 0; i < 3; ++i)
        for (int j = 0; j < 3; ++j) s += p1[static_cast<std::size_t>(i)] * c[i][j] * p2[static_cast<std::size_t>(j)];
      return s;
    };
    const double crr = quad(jr, jr), cii = quad(ji, ji), cri = quad(jr, ji);
    HarmonicLine line;
    line.n = static_cast<int>(k);
    line.freq_hz = static_cast<double>(k) * f0;
    line.amplitude = std::abs(X);
    line.phasor = X;
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
  out.distortion = distortion_figures(amplitudes, residual_power, sigma2, out.full_scale_range);
  out.noise_rms = std::sqrt(sigma2);
  out.noise_floor = 2 * out.noise_rms / std::sqrt(static_cast<double>(n));
  out.noise_floor_dbc = amplitudes[1] > 0 && out.noise_floor > 0
                            ? 20 * std::log10(out.noise_floor / amplitudes[1])
                            : 0;

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
  out.residual_lines = find_residual_lines(fit.residual, fs, f0, top_band_harmonics);
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
      return sig(l.freq_hz, 6) + " Hz at " + sig(l.amplitude, 3) + unit +
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
  if (clip.clipped)
    out.flags.push_back({"clipped", std::to_string(clip.count) + " samples (" + sig(100 * clip.share, 3) +
                                        " % of the record; a sine puts " + sig(100 * clip.expected_share, 2) +
                                        " % there) sit on a flat plateau within " + sig(clip.band, 3) +
                                        " of the " + (clip.at_max ? "maximum " : "minimum ") +
                                        sig(clip.level, 6) +
                                        ": the signal looks clipped, and the harmonics describe the "
                                        "flattened waveform"});
  if (out.baseline.significant) {
    const double a1 = amplitudes.size() > 1 ? amplitudes[1] : 0;
    const std::string dbc =
        a1 > 0 ? ", " + format_fixed(20 * std::log10(out.baseline.peak_to_peak / a1), 1) + " dBc" : "";
    out.flags.push_back({"baseline-drift", "the baseline drifts by " + sig(out.baseline.peak_to_peak, 3) +
                                               (out.unit.empty() ? "" : " " + out.unit) + " peak-to-peak" + dbc +
                                               " over the record (Legendre trend, degree ≤ 2); " +
                                               (out.baseline_modelled
                                                    ? "it was fitted with the harmonics and is not counted as noise"
                                                    : "it is counted as noise")});
  }
  for (const auto& line : out.harmonics) {
    if (line.freq_hz >= kAliasBandFraction * fs && line.amplitude >= kAliasLevel * amplitudes[1] &&
        line.significant) {
      out.flags.push_back(
          {"aliasing-risk", "harmonic " + std::to_string(line.n) + " at " + sig(line.freq_hz) +
                                " Hz (above 0.4·fs) is only " +
                                sig(-20 * std::log10(line.amplitude / amplitudes[1]), 3) +
                                " dB below the fundamental: harmonics beyond fs/2 may have "
                                "folded back onto the ones reported"});
      break;
    }
  }
  if (out.periods < 2)
    out.flags.push_back({"few-periods", "the record holds only " + sig(out.periods, 3) +
                                            " periods: figures rest on little data"});
  bool any_significant = false;
  for (const auto& line : out.harmonics) any_significant = any_significant || line.significant;
  if (!any_significant)
    out.flags.push_back({"dc-only", "no harmonic of f0 = " + sig(f0, 6) +
                                        " Hz stands out of the noise: the channel is dc plus "
                                        "noise, and the harmonic figures are noise"});
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
