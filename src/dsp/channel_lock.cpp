// The one lock call (lock_channel) and the automatic harmonic count (select_harmonics). Method
// and sources: period_lock.hpp, "the one lock call".
#include <algorithm>
#include <cmath>
#include <limits>
#include <numeric>
#include <string>
#include <vector>

#include "core/error.hpp"
#include "dsp/period_lock.hpp"

namespace periodfit::dsp {
namespace {

/// Lines below this fraction of the strongest are rounding of double precision, not lines: a
/// coherent noise-free record repeats its rounding error in every period, so its per-period
/// scatter vanishes and the F statistic of a 1e-17 "line" is unbounded.
constexpr double kRoundingFloor = 1e-9;
/// Cap on the automatic count: the fit costs O(H³) per Gauss–Newton step and N·H per pass
/// (kMaxHarmonic's note: H = 2000 takes ~1 s on 1e5 samples). Only a nearly noise-free,
/// heavily oversampled waveform (an ideal triangle at 16 000 samples per period) has more
/// significant lines; those above it are reported as "harmonics-truncated".
constexpr int kAutoMaxHarmonic = 400;

/// log Pr(F > f) for F ~ F(2, d): (1 + 2f/d)^(−d/2), closed form for 2 numerator dof.
double log_tail_f2(double f, double d) {
  if (!(f > 0)) return 0;
  if (std::isinf(f)) return -std::numeric_limits<double>::infinity();
  return -0.5 * d * std::log1p(2 * f / d);
}

void truncate_to(PeriodSpectra& s, int h) {
  if (h >= s.max_harmonic) return;
  const auto size = static_cast<std::size_t>(h) + 1;
  s.max_harmonic = h;
  s.mean.resize(size);
  for (auto& p : s.per_period) p.resize(size);
  if (s.noise_bin_variance.size() > size) s.noise_bin_variance.resize(size);
}

}  // namespace

HarmonicSelection select_harmonics(const PeriodSpectra& s, const SelectionOptions& options) {
  if (!(options.family_alpha > 0 && options.family_alpha < 1))
    throw OptionError("family_alpha", std::to_string(options.family_alpha), "must be > 0 and < 1");
  HarmonicSelection sel;
  sel.highest_examined = s.max_harmonic;
  sel.count = std::max(1, s.max_harmonic);
  const int k_max = s.max_harmonic;
  const int p = s.periods;
  std::vector<double> log_p(static_cast<std::size_t>(std::max(k_max, 0)) + 1, 0.0);
  double strongest = 0;
  for (int k = 1; k <= k_max; ++k) strongest = std::max(strongest, std::abs(s.mean[static_cast<std::size_t>(k)]));
  if (p >= 4 && s.per_period.size() == static_cast<std::size_t>(p)) {
    sel.noise_basis = "per-period";
    for (int k = 1; k <= k_max; ++k) {
      const auto i = static_cast<std::size_t>(k);
      double scatter = 0;
      for (const auto& period : s.per_period) scatter += std::norm(period[i] - s.mean[i]);
      scatter /= (p - 1);
      const double m2 = std::norm(s.mean[i]);
      const double f = scatter > 0 ? p * m2 / scatter : (m2 > 0 ? std::numeric_limits<double>::infinity() : 0);
      log_p[i] = log_tail_f2(f, 2.0 * (p - 1));
    }
  } else if (p >= 2 && s.noise_bin_dof > 0 && s.noise_bin_variance.size() == s.mean.size()) {
    sel.noise_basis = "noise-bins";
    for (int k = 1; k <= k_max; ++k) {
      const auto i = static_cast<std::size_t>(k);
      const double v = s.noise_bin_variance[i];
      const double m2 = std::norm(s.mean[i]);
      const double f = v > 0 ? m2 / v : (m2 > 0 ? std::numeric_limits<double>::infinity() : 0);
      log_p[i] = log_tail_f2(f, s.noise_bin_dof);
    }
  } else {
    sel.rule = HarmonicRule::fallback;
    sel.noise_basis = "none";
    return sel;
  }
  sel.rule = HarmonicRule::holm_f_test;
  sel.family_alpha = options.family_alpha;
  // Holm's step-down over the K candidates (period_lock.hpp).
  std::vector<int> order(static_cast<std::size_t>(k_max));
  std::iota(order.begin(), order.end(), 1);
  std::stable_sort(order.begin(), order.end(),
                   [&](int a, int b) { return log_p[static_cast<std::size_t>(a)] < log_p[static_cast<std::size_t>(b)]; });
  const double log_alpha = std::log(options.family_alpha);
  for (std::size_t j = 0; j < order.size(); ++j) {
    const auto i = static_cast<std::size_t>(order[j]);
    const double limit = log_alpha - std::log(static_cast<double>(order.size() - j));
    if (!(log_p[i] <= limit)) break;
    if (std::abs(s.mean[i]) <= kRoundingFloor * strongest) continue;
    sel.significant_harmonics.push_back(order[j]);
  }
  std::sort(sel.significant_harmonics.begin(), sel.significant_harmonics.end());
  sel.significant = static_cast<int>(sel.significant_harmonics.size());
  sel.highest_significant = sel.significant_harmonics.empty() ? 0 : sel.significant_harmonics.back();
  sel.count = std::max(1, sel.highest_significant);
  return sel;
}

namespace {

/// u(f0) with each harmonic's local noise (period_lock.hpp, LockedChannel::f0_u_noise_factor).
double f0_noise_factor(const LockedChannel& c) {
  const PeriodSpectra& s = c.spectra;
  const int p = s.periods;
  const double sigma2 = c.fit.sigma2;
  if (p < 4 || !(sigma2 > 0) || c.fit.fundamental.method == F0Method::forced) return 1;
  const double white = 4 * sigma2 * s.f0_hz / c.fit.fs_hz;  // E|ΔX|² of one period, white noise
  double sum_w = 0, sum_w_over_r = 0;
  for (int k = 1; k <= s.max_harmonic; ++k) {
    const auto i = static_cast<std::size_t>(k);
    double scatter = 0;
    for (const auto& period : s.per_period) scatter += std::norm(period[i] - s.mean[i]);
    scatter /= (p - 1);
    const double r = scatter / white;
    const double w = static_cast<double>(k) * k * std::norm(s.mean[i]);
    if (!(r > 0)) return 1;  // a noise-free harmonic: nothing to scale
    sum_w += w;
    sum_w_over_r += w / r;
  }
  if (!(sum_w > 0 && sum_w_over_r > 0)) return 1;
  const double factor = std::sqrt(sum_w / sum_w_over_r);
  return std::isfinite(factor) ? factor : 1;
}

/// With a given H (or an automatic one capped), the significant lines above it and their total
/// power relative to the fundamental (harmonics-truncated).
void count_truncated(HarmonicSelection& sel, const PeriodSpectra& spectra, int kept) {
  for (int k : sel.significant_harmonics)
    if (k > kept) {
      ++sel.truncated_lines;
      sel.truncated_dbc += std::norm(spectra.mean[static_cast<std::size_t>(k)]);
    }
  const double a1 = std::norm(spectra.mean[1]);
  sel.truncated_dbc = sel.truncated_lines > 0 && a1 > 0 ? 10 * std::log10(sel.truncated_dbc / a1) : 0;
}

/// The fit again with the h harmonics the rule chose, from the f0 found. Returns whether the grid
/// must be made again (f0 moved by more than 0.1 u, or H grew); keeps the first fit, and sets h
/// back to its count, when the refit finds no clear fundamental.
bool refit_harmonics(LockedChannel& out, std::span<const double> x, double fs, double t0, const LockOptions& options,
                     int& h) {
  const double f0 = out.fit.fundamental.f0_hz;
  const int h_fit = out.fit.harmonics();
  LockOptions again = options;
  again.max_harmonic = h;
  if (options.f0_hz <= 0) {
    again.f0_hint_hz = 0;
    again.f0_start_hz = f0;
  }
  try {
    HarmonicFit refit = fit_harmonics(x, fs, t0, again);
    const double moved = std::abs(refit.fundamental.f0_hz - f0);
    const bool relock = h > h_fit || moved > 0.1 * refit.fundamental.f0_u_hz;
    out.fit = std::move(refit);
    return relock;
  } catch (const AnalysisError&) {
    // With fewer harmonics the strongest line no longer stands out (cannot happen for a line
    // the rule found significant, kept for safety): the first fit stands.
    h = h_fit;
    out.selection.count = h;
    return false;
  }
}

/// Scales the fit's u(f0) and its f0 covariance terms by the local-noise factor.
void apply_noise_factor(LockedChannel& out) {
  out.f0_u_noise_factor = f0_noise_factor(out);
  if (out.f0_u_noise_factor == 1) return;
  const double q = out.f0_u_noise_factor;
  out.fit.fundamental.f0_u_hz *= q;
  for (auto& c : out.fit.unit_cov) {
    c[2] *= q * q;
    c[4] *= q;
    c[5] *= q;
  }
}

}  // namespace

LockedChannel lock_channel(std::span<const double> x, double fs, double t0, const LockOptions& options,
                           int samples_per_period, const SelectionOptions& selection,
                           const std::function<void(const HarmonicFit&, const PeriodGrid&)>& first_grid) {
  validate(options);
  LockedChannel out;
  out.fit = fit_harmonics(x, fs, t0, options);
  const bool automatic = options.max_harmonic == 0;
  const double f0 = out.fit.fundamental.f0_hz;
  const int h_fit = out.fit.harmonics();
  const auto grid_size = [&](int h) {
    return samples_per_period > 0 ? std::max(samples_per_period, 2 * h + 2)
                                  : default_samples_per_period(fs, f0, h);
  };
  const int m = grid_size(h_fit);
  // Candidates: every harmonic below the band limit the grid resolves (a given H above the
  // band limit is examined up to H).
  const bool examine = automatic || selection.examine_band;
  const int examined =
      examine ? std::max(h_fit, std::min({band_limit_harmonics(fs, f0), kMaxHarmonic, (m - 1) / 2})) : h_fit;
  out.grid = resample_fitted(out.fit.residual, out.fit, m);
  if (first_grid) first_grid(out.fit, out.grid);
  out.spectra = period_spectra(out.grid, examined, out.grid.periods < 4);
  out.selection = select_harmonics(out.spectra, selection);
  HarmonicSelection& sel = out.selection;
  int h = h_fit;
  if (automatic) {
    sel.automatic = true;
    if (sel.rule != HarmonicRule::fallback) {
      // 2H + 2 ≤ N/2: half the samples stay residual degrees of freedom (default_harmonic_count).
      const int by_samples = static_cast<int>((x.size() / 2 - 2) / 2);
      h = std::clamp(sel.highest_significant, 1, std::max(1, std::min(by_samples, kAutoMaxHarmonic)));
    }
  } else {
    sel.rule = HarmonicRule::given;
  }
  count_truncated(sel, out.spectra, automatic ? h : h_fit);
  sel.count = h;
  const bool relock = h != h_fit && refit_harmonics(out, x, fs, t0, options, h);
  if (relock) {
    out.grid = resample_fitted(out.fit.residual, out.fit, grid_size(h));
    out.spectra = period_spectra(out.grid, h, out.grid.periods < 4);
  } else {
    truncate_to(out.spectra, h);
  }
  apply_noise_factor(out);
  return out;
}

void truncate_spectra(PeriodSpectra& spectra, int max_harmonic) { truncate_to(spectra, max_harmonic); }

}  // namespace periodfit::dsp
