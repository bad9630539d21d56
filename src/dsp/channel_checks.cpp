// The checks of one channel's analysis and the flags they raise (see internal/channel_checks.hpp;
// the flags' meanings and severities: core/flags.hpp, docs/flags.md).
#include "dsp/internal/channel_checks.hpp"

#include <algorithm>
#include <cmath>
#include <limits>
#include <string>

#include <boost/math/distributions/fisher_f.hpp>

#include "core/error.hpp"
#include "core/number_format.hpp"

namespace periodfit::dsp::internal {
namespace {

/// ... when they reach this fraction of the fundamental (−60 dB; common practice for a
/// "significant" spur in ADC testing).
constexpr double kAliasLevel = 1e-3;
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

std::string sig(double v, int digits = 4) { return format_significant(v, digits); }

double fundamental_amplitude(const ChannelAnalysis& out) {
  return out.harmonics.empty() ? 0 : out.harmonics.front().amplitude;
}

/// Lines beside the harmonics (dsp/residual_lines.hpp): interference, or not one periodic signal.
void check_residual_lines(ChannelAnalysis& out, ChannelChecks& checks, double fs, const HarmonicFit& fit) {
  const double f0 = fit.fundamental.f0_hz;
  bool top_band_harmonics = false;  // harmonics up near fs/2: aliased ones are to be expected
  for (const auto& line : out.harmonics)
    top_band_harmonics = top_band_harmonics || (line.significant && line.n >= 2 && line.freq_hz >= 0.375 * fs);
  out.residual_lines = find_residual_lines(fit.residual, fs, f0, top_band_harmonics, fit.harmonics());
  double amax = 0, harm_power = 0;
  std::size_t strongest = 1;  // harmonic number of the strongest line
  for (const auto& line : out.harmonics) {
    amax = std::max(amax, line.amplitude);
    harm_power += 0.5 * line.amplitude * line.amplitude;
    if (line.amplitude > out.harmonics[strongest - 1].amplitude) strongest = static_cast<std::size_t>(line.n);
  }
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
  int occupied = 0;
  for (std::size_t k = 0; k < out.harmonics.size() && out.harmonics[k].n <= static_cast<int>(strongest); ++k)
    occupied += out.harmonics[k].significant ? 1 : 0;
  const double a1 = fundamental_amplitude(out);
  const bool sparse = strongest >= 4 && a1 * a1 < 0.01 * 2 * harm_power && occupied * 4 < static_cast<int>(strongest);
  if (!lines.empty() && a1 > 0) checks.strongest_line_dbc = 20 * std::log10(lines.front().amplitude / a1);
  if (!lines.empty() && out.explained_share < 1 - kNotPeriodicShare) {
    checks.lines = ChannelChecks::Lines::not_periodic;
  } else if (sparse) {
    checks.lines = ChannelChecks::Lines::sparse_comb;
    checks.comb_occupied = occupied;
    checks.comb_strongest = static_cast<int>(strongest);
  } else if (!lines.empty() && 0.5 * lines.front().amplitude * lines.front().amplitude >=
                                   kInterferenceShare * fit.residual_ss / static_cast<double>(fit.residual.size())) {
    checks.lines = ChannelChecks::Lines::interference;
  }
}

/// Evidence, not a threshold crossing: among the K harmonics n ≥ 2 in the top band, white
/// noise alone makes one of them "significant" (amplitude ≥ 3·u, ~1 % each) in K % of
/// records. A line counts only when its Hotelling statistic T² = Xᵀ·C⁻¹·X rejects "no line"
/// at the family-wise level kAliasFamilyAlpha (Bonferroni over the K lines; with ν noise
/// dof, T² ~ 2ν/(ν − 1)·F(2, ν − 1) under no line, Hotelling 1931; ν unknown or large: χ²₂).
std::optional<ChannelChecks::Alias> check_aliasing(const ChannelAnalysis& out, double fs) {
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
  const double a1 = fundamental_amplitude(out);
  for (const auto& line : out.harmonics) {
    if (line.n < 2 || line.freq_hz < kAliasBandFraction * fs || line.amplitude < kAliasLevel * a1 || !line.significant)
      continue;
    const double det = line.cov_re_re * line.cov_im_im - line.cov_re_im * line.cov_re_im;
    const double xr = line.phasor.real(), xi = line.phasor.imag();
    const double t2 = det > 0 ? (xr * xr * line.cov_im_im - 2 * xr * xi * line.cov_re_im + xi * xi * line.cov_re_re) / det
                              : std::numeric_limits<double>::infinity();
    if (!(t2 > t2_limit)) continue;
    return ChannelChecks::Alias{line.n, line.freq_hz, -20 * std::log10(line.amplitude / a1), t2, t2_limit, candidates};
  }
  return std::nullopt;
}

/// A forced f0 is taken as exact; if the data put f0 elsewhere, every phase turns by
/// 360°·n·Δf·T over the record and the amplitudes shrink, far beyond the u's (issue 12).
void check_forced_f0(ChannelAnalysis& out, ChannelChecks& checks, std::span<const double> x, double fs, double t0,
                     const LockOptions& lock) {
  LockOptions unforced = lock;
  unforced.f0_hz = 0;
  unforced.f0_hint_hz = 0;
  unforced.f0_start_hz = lock.f0_hz;
  unforced.max_harmonic = checks.harmonics;
  try {
    const HarmonicFit fitted = fit_harmonics(x, fs, t0, unforced);
    out.f0_free_hz = fitted.fundamental.f0_hz;
    out.f0_free_u_hz = fitted.fundamental.f0_u_hz;
    const double diff = lock.f0_hz - out.f0_free_hz;
    checks.forced_f0_hz = lock.f0_hz;
    checks.forced_f0_off_bins = std::abs(diff) * static_cast<double>(x.size()) / fs;
    checks.forced_f0_off = std::abs(diff) > kForcedF0Sigmas * out.f0_free_u_hz + 1e-10 * lock.f0_hz;
  } catch (const AnalysisError&) {
    // No free fit (no clear fundamental): nothing to compare the forced f0 with.
  }
}

/// f0 of each half, fitted from the whole record's f0 with up to kDriftHarmonics.
void check_drift(ChannelAnalysis& out, ChannelChecks& checks, std::span<const double> x, double fs, double t0,
                 const AnalyzeOptions& options) {
  const double f0 = out.fundamental.f0_hz;
  LockOptions half = options.lock;
  half.f0_hz = 0;
  half.f0_hint_hz = 0;
  half.f0_start_hz = f0;
  half.max_harmonic = std::min(checks.harmonics, kDriftHarmonics);
  const std::size_t mid = x.size() / 2;
  try {
    const HarmonicFit a = fit_harmonics(x.first(mid), fs, t0, half);
    const HarmonicFit b = fit_harmonics(x.subspan(mid), fs, t0 + static_cast<double>(mid) / fs, half);
    out.f0_first_half_hz = a.fundamental.f0_hz;
    out.f0_second_half_hz = b.fundamental.f0_hz;
    const double du = std::hypot(a.fundamental.f0_u_hz, b.fundamental.f0_u_hz);
    const double diff = std::abs(a.fundamental.f0_hz - b.fundamental.f0_hz);
    out.drift_sigmas = du > 0 ? diff / du : 0;
    // A floor of 1e-10·f0 keeps rounding in noise-free records from reading as drift.
    checks.drift = diff > options.drift_sigmas * du + 1e-10 * f0;
  } catch (const AnalysisError&) {
    // A half without a clear fundamental cannot show drift; the whole-record fit stands.
  }
}

bool any_significant(const ChannelAnalysis& out) {
  return std::any_of(out.harmonics.begin(), out.harmonics.end(), [](const HarmonicLine& l) { return l.significant; });
}

// ---- the flags' messages (levels in the channel's unit) ---------------------------------------

std::string unit_suffix(const ChannelAnalysis& out) { return out.unit.empty() ? "" : " " + out.unit; }

/// The strongest residual line: "50 Hz at 0.3 V (−20.0 dBc)".
std::string strongest_line_text(const ChannelAnalysis& out, const ChannelChecks& checks) {
  const ResidualLine& l = out.residual_lines.lines.front();
  return sig(l.freq_hz, 6) + " Hz at " + sig(l.amplitude, 3) + unit_suffix(out) +
         (checks.strongest_line_dbc ? " (" + format_fixed(*checks.strongest_line_dbc, 1) + " dBc)" : "");
}

void raise_lines_flag(ChannelAnalysis& out, const ChannelChecks& checks) {
  const double f0 = out.fundamental.f0_hz;
  const std::size_t count = out.residual_lines.lines.size();
  switch (checks.lines) {
    case ChannelChecks::Lines::none: return;
    case ChannelChecks::Lines::not_periodic:
      out.flags.push_back({Flag::not_periodic, "the harmonics of f0 = " + sig(f0, 6) + " Hz explain only " +
                                                   sig(100 * out.explained_share, 3) +
                                                   " % of the line power; strongest other line " +
                                                   strongest_line_text(out, checks) + " (" + std::to_string(count) +
                                                   " in all): the record is not one periodic signal (several "
                                                   "tones, modulation), and the figures describe only part of it"});
      return;
    case ChannelChecks::Lines::sparse_comb:
      out.flags.push_back({Flag::not_periodic, "the fundamental f0 = " + sig(f0, 6) + " Hz carries under 1 % of "
                                                   "the harmonic power and " + std::to_string(checks.comb_occupied) +
                                                   " of the " + std::to_string(checks.comb_strongest) +
                                                   " harmonics up to the strongest (" +
                                                   std::to_string(checks.comb_strongest) + ") are significant: f0 is "
                                                   "likely a false sub-multiple of unrelated lines"});
      return;
    case ChannelChecks::Lines::interference:
      out.flags.push_back({Flag::interference, std::to_string(count) + " line" + (count > 1 ? "s" : "") +
                                                   " beside the harmonics; strongest " + strongest_line_text(out, checks) +
                                                   ": not part of the periodic signal (hum, another source); it is "
                                                   "counted as noise in THD+N, SINAD and SNR"});
      return;
  }
}

void raise_level_flags(ChannelAnalysis& out, const ChannelChecks& checks) {
  const ClipCheck& clip = checks.clip;
  if (clip.clipped)
    out.flags.push_back({Flag::clipped, std::to_string(clip.count) + " samples (" + sig(100 * clip.share, 3) +
                                            " % of the record; a sine puts " + sig(100 * clip.expected_share, 2) +
                                            " % there) sit on a flat plateau within " + sig(clip.band, 3) +
                                            " of the " + (clip.at_max ? "maximum " : "minimum ") + sig(clip.level, 6) +
                                            ": the signal looks clipped, and the harmonics describe the "
                                            "flattened waveform"});
  if (out.baseline.significant)
    out.flags.push_back({Flag::baseline_drift,
                         "the baseline drifts by " + sig(out.baseline.peak_to_peak, 3) + unit_suffix(out) +
                             " peak-to-peak" +
                             (checks.baseline_dbc ? ", " + format_fixed(*checks.baseline_dbc, 1) + " dBc" : "") +
                             " over the record (Legendre trend, degree ≤ 2); " +
                             (out.baseline_modelled ? "it was fitted with the harmonics and is not counted as noise"
                                                    : "it is counted as noise")});
}

}  // namespace

ChannelChecks check_channel(ChannelAnalysis& out, std::span<const double> x, double fs, double t0,
                            const HarmonicFit& fit, const AnalyzeOptions& options) {
  ChannelChecks checks;
  checks.harmonics = fit.harmonics();
  check_residual_lines(out, checks, fs, fit);
  checks.clip = check_clipping(x);
  const double a1 = fundamental_amplitude(out);
  if (out.baseline.significant && a1 > 0) checks.baseline_dbc = 20 * std::log10(out.baseline.peak_to_peak / a1);
  checks.aliasing = check_aliasing(out, fs);
  const bool significant = any_significant(out);
  if (options.lock.f0_hz > 0 && significant) check_forced_f0(out, checks, x, fs, t0, options.lock);
  if (out.periods >= 4 && significant) check_drift(out, checks, x, fs, t0, options);
  return checks;
}

void scale_checks(ChannelChecks& checks, int exponent) {
  checks.clip.band = std::ldexp(checks.clip.band, exponent);
  checks.clip.level = std::ldexp(checks.clip.level, exponent);
  checks.clip.rail_noise = std::ldexp(checks.clip.rail_noise, exponent);
}

void raise_flags(ChannelAnalysis& out, const ChannelChecks& checks) {
  const Fundamental& fit = out.fundamental;
  if (!fit.converged)
    out.flags.push_back({Flag::not_converged, "the f0 fit stopped after " + std::to_string(fit.iterations) +
                                                  " iterations without converging; f0 may be off"});
  raise_lines_flag(out, checks);
  const HarmonicSelection& s = out.selection;
  if (s.truncated_lines > 0)
    out.flags.push_back({Flag::harmonics_truncated,
                         std::to_string(s.truncated_lines) + " significant harmonic" + (s.truncated_lines > 1 ? "s" : "") +
                             " above the " + std::to_string(checks.harmonics) + " asked for (up to " +
                             std::to_string(s.significant_harmonics.back()) + ", " + format_fixed(s.truncated_dbc, 1) +
                             " dBc in all) are left out: they count as noise in SNR, THD+N and SINAD, "
                             "are missing from THD, and widen f0's uncertainty (leave --harmonics out "
                             "to include every significant harmonic)"});
  raise_level_flags(out, checks);
  if (const auto& a = checks.aliasing)
    out.flags.push_back({Flag::aliasing_risk, "harmonic " + std::to_string(a->n) + " at " + sig(a->freq_hz) +
                                                  " Hz (above 0.4·fs) is only " + sig(a->db_below, 3) +
                                                  " dB below the fundamental and stands out of the noise (T² " +
                                                  sig(a->t2, 3) + " against " + sig(a->t2_limit, 3) +
                                                  " for 1 % over the " + std::to_string(a->candidates) +
                                                  " harmonics there): harmonics beyond fs/2 may have folded back "
                                                  "onto the ones reported"});
  if (checks.identical_periods)
    out.flags.push_back(
        {Flag::identical_periods,
         "the periods repeat almost exactly (period-to-period scatter " + sig(100 * out.period_scatter_ratio, 2) +
             " % of the residual variance; a coherent capture): the scatter cannot show the error, so the "
             "uncertainties come from " +
             (checks.quantisation_floor
                  ? "the quantisation step Δ = " + sig(out.quantisation_step, 3) + " (Δ/√12 per sample)"
                  : std::string("the residual (") + sig(out.noise_rms, 3) + " rms)") +
             " over one period, which does not average out"});
  if (out.periods < 2)
    out.flags.push_back({Flag::few_periods, "the record holds only " + sig(out.periods, 3) +
                                                " periods: figures rest on little data"});
  if (!any_significant(out))
    out.flags.push_back({Flag::dc_only, "no harmonic of f0 = " + sig(fit.f0_hz, 6) +
                                            " Hz stands out of the noise: the channel is dc plus "
                                            "noise, and the harmonic figures are noise"});
  if (checks.forced_f0_off)
    out.flags.push_back({Flag::forced_f0_off,
                         "the forced f0 = " + sig(checks.forced_f0_hz, 9) + " Hz differs from the data's own f0 = " +
                             sig(out.f0_free_hz, 9) + " Hz ± " + sig(out.f0_free_u_hz, 2) + " by " +
                             sig(out.f0_free_u_hz > 0 ? std::abs(checks.forced_f0_hz - out.f0_free_hz) / out.f0_free_u_hz : 0, 3) +
                             " u (" + sig(checks.forced_f0_off_bins, 3) +
                             " bin): phases and amplitudes at the forced f0 are biased beyond their uncertainties"});
  if (checks.drift)
    out.flags.push_back({Flag::drift, "f0 differs between the halves of the record (" + sig(out.f0_first_half_hz, 9) +
                                          " Hz, then " + sig(out.f0_second_half_hz, 9) + " Hz; " +
                                          sig(out.drift_sigmas, 3) +
                                          " uncertainties apart): the frequency drifts, and "
                                          "the figures are averages over the record"});
}

}  // namespace periodfit::dsp::internal
