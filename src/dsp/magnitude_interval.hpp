#pragma once
/// Confidence interval for the magnitude ν = |X| of a complex quantity estimated with circular
/// Gaussian noise (a harmonic's amplitude, an FRF point's |H|), valid at any SNR and never
/// below 0.
///
/// Model: the estimate X̂ = X + e with Re e, Im e independent N(0, σ²). Its magnitude R = |X̂|
/// then follows the Rice distribution with parameters ν = |X| and σ (S. O. Rice, "Mathematical
/// analysis of random noise", Bell Syst. Tech. J. 24, 1945, §3.10; e.g. scipy.stats.rice with
/// b = ν/σ, scale = σ). Its CDF F(r; ν, σ) = 1 − Q₁(ν/σ, r/σ) (Marcum Q) decreases in ν, so the
/// confidence set for ν at level 1 − 2α is the Neyman inversion
///     ν_hi: F(r; ν_hi) = α,      ν_lo: F(r; ν_lo) = 1 − α,  or ν_lo = 0 when F(r; 0) ≤ 1 − α
/// (F(r; 0) = 1 − e^{−r²/2σ²}, the Rayleigh CDF). ν_lo = 0 means the magnitude is consistent
/// with zero at that level; the phase of X̂ is then undefined (any phase is consistent).
/// α is the one-sided tail of the coverage factor k the caller uses for its symmetric
/// intervals (α = 1 − Φ(k)), so a Student-t k for few degrees of freedom widens this interval
/// the same way (an approximation: σ itself is estimated).
///
/// Far from zero (r/σ ≥ kRiceSnrLimit) the Rice distribution is Gaussian to within its bias
/// σ²/(2ν) ≤ σ/60, and the interval is r ± k·σ (same as the first-order one).
///
/// Misuse: non-circular noise (very unequal radial and tangential variances) is approximated
/// by σ² = (σ²_re + σ²_im)/2; the interval is for ν, not for the estimate's next value.
///
///   const MagnitudeInterval iv = magnitude_interval(std::abs(h), sigma, 1.96);
///   if (iv.consistent_with_zero) { /* report the phase as undefined */ }
#include <string_view>

namespace periodfit::dsp {

/// r/σ from which the interval is the Gaussian r ± k·σ.
inline constexpr double kRiceSnrLimit = 30;

/// How the interval was found: the Rice inversion (bounded at 0), or the Gaussian r ± k·σ once
/// r/σ ≥ kRiceSnrLimit. Its code ("rice", "normal") through code() only.
enum class MagnitudeIntervalMethod { rice, normal };

inline std::string_view code(MagnitudeIntervalMethod method) {
  switch (method) {
    case MagnitudeIntervalMethod::rice: return "rice";
    case MagnitudeIntervalMethod::normal: return "normal";
  }
  return "normal";
}

struct MagnitudeInterval {
  double lo = 0;                      ///< ≥ 0
  double hi = 0;
  bool consistent_with_zero = false;  ///< lo = 0: the Rayleigh CDF at r is below 1 − α
  MagnitudeIntervalMethod method = MagnitudeIntervalMethod::normal;
};

/// `r` observed magnitude, `sigma` noise standard deviation per component (Re or Im), `k` the
/// coverage factor (> 0) defining the two-sided level 1 − 2·(1 − Φ(k)). sigma = 0 gives [r, r].
MagnitudeInterval magnitude_interval(double r, double sigma, double k);

/// Rice CDF F(r; ν, σ) (as the non-central χ²₂ CDF of (r/σ)², Boost.Math); exposed for tests.
double rice_cdf(double r, double nu, double sigma);

}  // namespace periodfit::dsp
