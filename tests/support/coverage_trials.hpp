#pragma once
// Monte Carlo trials of analyze against an exact truth (issue 12): one condition (noise, jitter,
// quantisation, a forced f0 off by a fraction of a bin) drawn `trials` times with fresh noise and
// random phases; the 95 % intervals (k from Student t with the analysis' noise_dof, as the
// outputs state them) are checked against the truth, the spreads against the exact Cramér–Rao
// bound (dsp/cramer_rao.hpp) and every flag raised is counted. Shared by tests/coverage_test.cpp
// (a fast subset) and tools/bench/coverage_montecarlo.cpp (the full grid; docs/performance.md).
#include <boost/math/distributions/students_t.hpp>
#include <cmath>
#include <complex>
#include <cstdint>
#include <limits>
#include <map>
#include <numbers>
#include <random>
#include <string>
#include <vector>

#include "core/capture.hpp"
#include "core/error.hpp"
#include "dsp/cramer_rao.hpp"
#include "dsp/harmonics.hpp"
#include "support/gaussian.hpp"

namespace periodfit::test {

struct CoverageCondition {
  std::string name;
  double fs_hz = 1000;
  double f0_hz = 10;
  double periods = 10;               ///< record length N = round(periods·fs/f0)
  std::vector<double> amplitudes = {1.0};  ///< peak A_1…A_H of the truth (phases random per trial)
  double snr_db = 40;                ///< fundamental power over white noise power; NaN = no white noise
  double jitter_rad = 0;             ///< rms sampling jitter as a phase of the fundamental (ω0·σ_t)
  int bits = 0;                      ///< quantise to this many bits over ±1 (0 = not quantised)
  double forced_offset_bins = std::numeric_limits<double>::quiet_NaN();  ///< force f0 + this·fs/N
  int max_harmonic = 0;              ///< analyze's H (0 = its default)
  std::string excusing_flag;         ///< a flag that, when raised, declares the condition
};

struct CoverageStats {
  int trials = 0, errors = 0;
  int cover_a1 = 0, cover_p1 = 0, cover_f0 = 0, cover_a2 = 0, cover_p2 = 0, has_h2 = 0;
  int excused = 0;                   ///< trials carrying the excusing flag
  double var_a1 = 0, var_p1 = 0, var_f0 = 0;     ///< Monte Carlo variances (phase in deg²)
  double crb_a1 = 0, crb_p1 = 0, crb_f0 = 0;     ///< mean exact bound over the trials
  std::map<std::string, int> flags;  ///< how many trials raised each flag
  double pct(int count) const { return trials > 0 ? 100.0 * count / trials : 0; }
};

/// Two-sided 95 % coverage factor as analyze's outputs use it (Student t; normal for dof 0).
inline double coverage_factor_95(int dof) {
  if (dof <= 0 || dof > 1000) return 1.959963984540054;
  return boost::math::quantile(boost::math::students_t_distribution<double>(dof), 0.975);
}

inline CoverageStats run_coverage(const CoverageCondition& c, int trials, std::uint64_t seed) {
  using std::numbers::pi;
  CoverageStats s;
  Gaussian gauss(seed);
  std::mt19937_64 uniform(seed ^ 0x9e3779b97f4a7c15ULL);
  std::uniform_real_distribution<double> phase(-pi, pi);
  const auto n = static_cast<std::size_t>(std::llround(c.periods * c.fs_hz / c.f0_hz));
  const double a1 = c.amplitudes.front();
  const double sigma = std::isnan(c.snr_db) ? 0 : a1 / std::sqrt(2 * std::pow(10.0, c.snr_db / 10));
  const double jitter_s = c.jitter_rad / (2 * pi * c.f0_hz);
  const double step = c.bits > 0 ? 2.0 / std::ldexp(1.0, c.bits) : 0;
  dsp::AnalyzeOptions opt;
  opt.lock.max_harmonic = c.max_harmonic;
  const bool forced = !std::isnan(c.forced_offset_bins);
  if (forced) opt.lock.f0_hz = c.f0_hz + c.forced_offset_bins * c.fs_hz / static_cast<double>(n);
  // Reference noise level of the bound: white noise, plus jitter's (A·ω·σ_t)²/2 and the
  // quantiser's Δ²/12 as if white (a reference only for those conditions).
  double ref_var = sigma * sigma + step * step / 12;
  for (std::size_t h = 0; h < c.amplitudes.size(); ++h) {
    const double d = c.amplitudes[h] * static_cast<double>(h + 1) * c.jitter_rad;
    ref_var += d * d / 2;
  }
  double sa = 0, saa = 0, sp = 0, spp = 0, sf = 0, sff = 0;
  for (int t = 0; t < trials; ++t) {
    std::vector<std::complex<double>> truth;
    for (double a : c.amplitudes) truth.push_back(std::polar(a, phase(uniform)));
    Channel ch;
    ch.name = "mc";
    ch.samples.resize(n);
    for (std::size_t k = 0; k < n; ++k) {
      const double tk = static_cast<double>(k) / c.fs_hz + (jitter_s > 0 ? jitter_s * gauss() : 0);
      double v = 0;
      for (std::size_t h = 0; h < truth.size(); ++h)
        v += std::abs(truth[h]) * std::cos(2 * pi * static_cast<double>(h + 1) * c.f0_hz * tk + std::arg(truth[h]));
      if (sigma > 0) v += sigma * gauss();
      if (step > 0) v = step * std::round(v / step);
      ch.samples[k] = v;
    }
    dsp::ChannelAnalysis a;
    try {
      a = dsp::analyze_channel(ch, c.fs_hz, 0, opt);
    } catch (const Error&) {
      ++s.errors;
      continue;
    }
    ++s.trials;
    for (const auto& f : a.flags) ++s.flags[std::string(code(f.flag))];
    const FlagInfo* excusing = find_flag(c.excusing_flag);
    if (excusing && a.has_flag(excusing->flag)) ++s.excused;
    const double k = coverage_factor_95(a.noise_dof);
    const auto& h1 = a.harmonics.front();
    const double da = h1.amplitude - a1;
    const double dp = std::remainder(h1.phase_deg - std::arg(truth[0]) * 180 / pi, 360.0);
    const double df = a.fundamental.f0_hz - c.f0_hz;
    s.cover_a1 += std::abs(da) <= k * h1.amplitude_u;
    s.cover_p1 += std::abs(dp) <= k * h1.phase_u_deg;
    s.cover_f0 += !forced && std::abs(df) <= k * a.fundamental.f0_u_hz;
    if (truth.size() > 1 && a.harmonics.size() > 1) {
      const auto& h2 = a.harmonics[1];
      ++s.has_h2;
      s.cover_a2 += std::abs(h2.amplitude - std::abs(truth[1])) <= k * h2.amplitude_u;
      s.cover_p2 +=
          std::abs(std::remainder(h2.phase_deg - std::arg(truth[1]) * 180 / pi, 360.0)) <= k * h2.phase_u_deg;
    }
    sa += da, saa += da * da, sp += dp, spp += dp * dp, sf += df, sff += df * df;
    dsp::HarmonicTruth ht;
    ht.fs_hz = c.fs_hz;
    ht.f0_hz = c.f0_hz;
    ht.samples = n;
    ht.phasors = truth;
    // The bound of the model analyze fitted: its harmonic count, the ones beyond the truth at 0.
    ht.phasors.resize(static_cast<std::size_t>(std::max<int>(a.fundamental.harmonics_fitted, 1)), 0.0);
    ht.noise_sigma = std::sqrt(ref_var);
    ht.f0_known = forced;
    const dsp::HarmonicBound b = dsp::multi_harmonic_crb(ht);
    s.crb_a1 += b.amplitude_var[0];
    s.crb_p1 += b.phase_var_rad2[0] * std::pow(180 / pi, 2);
    s.crb_f0 += b.f0_var_hz2;
  }
  if (s.trials > 1) {
    const double T = s.trials;
    s.var_a1 = (saa - sa * sa / T) / (T - 1);
    s.var_p1 = (spp - sp * sp / T) / (T - 1);
    s.var_f0 = (sff - sf * sf / T) / (T - 1);
    s.crb_a1 /= T, s.crb_p1 /= T, s.crb_f0 /= T;
  }
  return s;
}

}  // namespace periodfit::test
