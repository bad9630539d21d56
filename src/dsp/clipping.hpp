#pragma once
/// Clipping detection: flat plateaus at the record's extremes that a smooth waveform does not
/// produce, with the plateau allowed to carry noise (an amplifier saturating ahead of the
/// digitiser) or to sit exactly on a digital rail (a WAV clipped at full scale).
///
/// Rule, per extreme (the maximum, then the minimum):
///  1. Rail noise σ_r: among the samples within kCoarseBand of the record's range from the
///     extreme, the median of |x[k+1] − x[k]| over consecutive pairs, / (0.6745·√2) (a robust
///     σ of the difference of two independent Gaussian samples; median absolute deviation,
///     Hampel 1974). On a plateau those differences are noise; near a smooth peak they are the
///     waveform's slope, which makes σ_r large and the test below self-consistent.
///  2. Plateau band: samples within δ = max(kBandSigmas·σ_r, q) of the extreme, q the data's
///     resolution there (distance to the nearest other value). The extreme of a noisy plateau
///     lies ≈ 4σ_r above its level, so kBandSigmas = 8 holds nearly all of it.
///  3. A sine of amplitude A = range/2 spends the share e = √(2δ/A)/π of its time within δ of
///     its peak (arcsine law, δ ≪ A). The extreme is a plateau when the band's share is above
///     kShareFactor·e and above kMinShare, and it holds a run of ≥ kMinRun consecutive samples.
///  4. Not clipping:
///     - a plateau at zero (|level| ≤ δ + 1e-3·range): a waveform resting at 0 V (half-wave
///       rectifier, gated or pulsed source, switch off) is by far the commoner cause on a bench
///       than an amplifier rail at 0 V; a single-supply stage saturating at ground is missed;
///     - a two-level waveform: when under kMinTransitionShare of the samples lie between the
///       two extremes' bands (square, pulse train: flat levels by design joined by fast edges).
///       A clipped sine spends most of its period between its rails (71 % at ±0.9·A).
///  5. The waveform was cut: at each plateau edge a least-squares parabola through the samples
///     approaching it (the kMinApproach…kMaxApproach samples it takes to rise kApproachBands
///     bands) is extrapolated to its vertex; the median over the entries into the plateau and
///     the median over the exits from it must both lie more than kMinExcessBands bands above
///     the plateau — the waveform's own curvature would have carried it beyond the rail. A sine clipped at level c·A has its vertex A(1 − c²)/(2c)
///     above the rail (0.105·A at c = 0.9); an exponential settling onto a level (a square
///     wave through an RC low-pass) or a flat-topped smooth peak decelerates short of it
///     (vertex below the plateau) — it leaves the level at a corner, the input's step, but
///     enters it smoothly — and is not flagged. A corner with no curvature (a straight
///     approach) counts as cut.
/// Known false flags: a trapezoid or slew-limited square whose straight edges take over
/// kMinTransitionShare of the period (a corner without curvature counts as cut). Measured figures: docs/methods.md.
#include <cstddef>
#include <span>

namespace periodfit::dsp {

inline constexpr double kCoarseBand = 0.02;           ///< of the range, for σ_r
inline constexpr double kBandSigmas = 8;              ///< δ = 8·σ_r
inline constexpr double kShareFactor = 3;             ///< share ≥ 3× a sine's
inline constexpr double kMinShare = 0.005;            ///< and ≥ 0.5 % of the record
inline constexpr std::size_t kMinRun = 3;             ///< consecutive samples on the plateau
inline constexpr double kMinTransitionShare = 0.10;   ///< between the extremes' bands
inline constexpr std::size_t kMinApproach = 4;        ///< samples in a plateau edge's parabola
inline constexpr std::size_t kMaxApproach = 64;
inline constexpr double kApproachBands = 4;           ///< the approach spans a rise of 4 bands
inline constexpr double kMinExcessBands = 2;          ///< vertex above the plateau, in bands

struct ClipCheck {
  bool clipped = false;
  bool at_max = true;        ///< which extreme (the first found: maximum first)
  std::size_t count = 0;     ///< samples on that plateau
  double level = 0;          ///< the extreme's value
  double share = 0;          ///< count / N
  double expected_share = 0; ///< a sine's share within the same band
  double band = 0;           ///< δ
  double rail_noise = 0;     ///< σ_r
  double excess_bands = 0;   ///< median extrapolated vertex above the plateau, in bands
};

ClipCheck check_clipping(std::span<const double> x);

}  // namespace periodfit::dsp
