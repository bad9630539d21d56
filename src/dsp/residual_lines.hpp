#pragma once
/// Spectral lines left in a harmonic fit's residual: interference beside the periodic signal
/// (mains hum next to a test tone), a second incommensurate tone, modulation sidebands.
///
/// Method: Hann-windowed periodogram p_k of the residual (N points, no padding), a local noise
/// floor per block of kFloorBlock bins = the block's median power / ln 2 (the median of an
/// exponential variable is ln 2 times its mean; a few lines do not move a median), and a line
/// wherever a local maximum exceeds T times that floor. Under Gaussian noise each bin's
/// p_k/floor is Exp(1)-distributed (χ² with 2 dof over 2), so P(p_k > T·floor) = e^{−T}; with
///     T = ln(M / kLineFalseAlarm),   M = bins examined,
/// the chance of any false line in a noise-only record is ≈ kLineFalseAlarm (Bonferroni;
/// the Hann window's correlated neighbours make it smaller). Excluded bins: below kLowBins
/// record bins (baseline drift and 1/f noise, analyze's baseline-drift check covers them) and
/// within ±kHarmonicGuardBins of every harmonic n·f0 below fs/2 and, when the record has
/// significant harmonics in the top quarter of the band (analyze decides), of every harmonic
/// above fs/2 folded back into the band, up to the order at which those guards cover kFoldedShare of
/// the spectrum (harmonics, fitted, above the fitted count or aliased, and a quantiser's spurs
/// are the signal's, not interference). The price: an interferer that happens to fall within
/// the guard of a folded harmonic (chance ≈ kFoldedShare) is not seen.
/// A line's amplitude is 2|X_k|/Σw corrected for the Hann scalloping at the interpolated
/// offset (log-parabolic peak interpolation, Gasior & Gonzalez 2004).
///
/// Misuse: a line closer than kHarmonicGuardBins to a harmonic is not seen; a record of
/// under ~64 bins cannot have a local floor and returns nothing.
#include <span>
#include <vector>

namespace periodfit::dsp {

inline constexpr double kLineFalseAlarm = 1e-3;
inline constexpr int kFloorBlock = 64;
inline constexpr int kLowBins = 4;
inline constexpr int kHarmonicGuardBins = 3;
/// Guard of a harmonic the fit removed (orders 1…fitted_harmonics): its nearest bin ± this.
inline constexpr int kFittedGuardBins = 2;
/// Share of the spectrum the guards around folded harmonics (orders above fs/2/f0) may cover.
inline constexpr double kFoldedShare = 0.25;

struct ResidualLine {
  double freq_hz = 0;
  double amplitude = 0;      ///< peak, channel unit
  double over_floor_db = 0;  ///< 10·log10(p_k / floor)
};

struct ResidualLines {
  std::vector<ResidualLine> lines;  ///< strongest first
  double threshold_db = 0;          ///< 10·log10(T)
  int bins_examined = 0;            ///< M
  double power = 0;                 ///< Σ A²/2 over the lines
};

/// `folded`: also guard the harmonics folded back from above fs/2 (the caller passes true when
/// the record shows harmonics near the top of the band, so aliased ones are to be expected).
/// `fitted_harmonics`: orders up to it were fitted (removed from the residual) and get the
/// narrower kFittedGuardBins guard (not with `folded`); 0 = none.
ResidualLines find_residual_lines(std::span<const double> residual, double fs_hz, double f0_hz, bool folded,
                                  int fitted_harmonics = 0);

}  // namespace periodfit::dsp
