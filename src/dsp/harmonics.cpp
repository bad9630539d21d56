// One channel's analysis: fit, lock, uncertainties, figures and flags (see harmonics.hpp).
#include "dsp/harmonics.hpp"

#include <algorithm>
#include <array>
#include <cmath>
#include <numbers>
#include <string>

#include "core/error.hpp"
#include "io/number_format.hpp"

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

std::string sig(double v, int digits = 4) { return io::format_significant(v, digits); }

double wrap_deg(double d) {
  d = std::fmod(d, 360.0);
  if (d > 180) d -= 360;
  if (d <= -180) d += 360;
  return d;
}

struct ClipCheck {
  bool clipped = false;
  std::size_t count = 0;
  bool at_max = true;
};

/// Flat runs at the extremes: ≥ 3 consecutive samples exactly at the max (or min), and more
/// samples there than a sine quantised at the data's own resolution would spend within one
/// step of its peak (fraction √(2q/A)/π; common practice, derived from the arcsine law).
ClipCheck check_clipping(std::span<const double> x) {
  ClipCheck out;
  const auto [mn_it, mx_it] = std::minmax_element(x.begin(), x.end());
  const double mn = *mn_it, mx = *mx_it;
  const double half_range = 0.5 * (mx - mn);
  if (!(half_range > 0)) return out;
  for (bool top : {true, false}) {
    const double level = top ? mx : mn;
    std::size_t count = 0, run = 0, longest = 0;
    double next = top ? mn : mx;  // nearest other value: the data's resolution at the extreme
    for (double v : x) {
      if (v == level) {
        ++count;
        longest = std::max(longest, ++run);
      } else {
        run = 0;
        next = top ? std::max(next, v) : std::min(next, v);
      }
    }
    const double q = std::abs(level - next);
    const double expected = std::sqrt(2 * q / half_range) / kPi;
    const double fraction = static_cast<double>(count) / static_cast<double>(x.size());
    if (longest >= 3 && fraction > 3 * expected) {
      out.clipped = true;
      out.count = count;
      out.at_max = top;
      return out;
    }
  }
  return out;
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
    throw OptionError("drift_sigmas", io::format_shortest(o.drift_sigmas), "must be > 0");
  if (!(o.significance > 0))
    throw OptionError("significance", io::format_shortest(o.significance), "must be > 0");
}

namespace {

ChannelAnalysis analyze_unit_scaled(const Channel& channel, double fs, double t0,
                                    const AnalyzeOptions& options);

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
  validate(options);
  double peak = 0;
  bool constant = true;
  for (double v : channel.samples) {
    peak = std::max(peak, std::abs(v));
    constant = constant && v == channel.samples.front();
  }
  // A constant channel is refused by the fit quoting its value, which must be the file's.
  if (!(peak > 0) || !std::isfinite(peak) || constant) return analyze_unit_scaled(channel, fs, t0, options);
  const int exponent = std::ilogb(peak) + 1;  // peak·2^-exponent in [0.5, 1)
  if (exponent == 0) return analyze_unit_scaled(channel, fs, t0, options);
  Channel scaled{channel.name, channel.unit, {}};
  scaled.samples.reserve(channel.samples.size());
  for (double v : channel.samples) scaled.samples.push_back(std::ldexp(v, -exponent));
  ChannelAnalysis out = analyze_unit_scaled(scaled, fs, t0, options);
  scale_results(out, exponent);
  if (!all_finite(out))
    throw AnalysisError("channel \"" + channel.name + "\": the results exceed the range of double " +
                        "precision numbers (peak " + io::format_significant(peak, 4) +
                        "); give the data in a larger unit");
  return out;
}

namespace {

ChannelAnalysis analyze_unit_scaled(const Channel& channel, double fs, double t0,
                                    const AnalyzeOptions& options) {
  ChannelAnalysis out;
  out.name = channel.name;
  out.unit = channel.unit;
  const std::span<const double> x(channel.samples);
  const std::size_t n = x.size();
  HarmonicFit fit;
  try {
    fit = fit_harmonics(x, fs, t0, options.lock);
  } catch (const AnalysisError& e) {
    throw AnalysisError("channel \"" + channel.name + "\": " + e.what());
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
  double peak = 0;
  for (double v : x) peak = std::max(peak, std::abs(v));
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
    amplitudes[k] = line.amplitude;
    out.harmonics.push_back(line);
  }

  // Figures: residual mean square (THD+N) and unbiased noise power (SNR).
  const double residual_power = fit.residual_ss / static_cast<double>(n);
  out.distortion = distortion_figures(amplitudes, residual_power, sigma2);
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
  if (clip.clipped)
    out.flags.push_back({"clipped", std::to_string(clip.count) + " samples sit at the " +
                                        (clip.at_max ? "maximum" : "minimum") +
                                        " in flat runs: the signal looks clipped, and the "
                                        "harmonics describe the flattened waveform"});
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
