#pragma once
/// Baseline drift: a slow additive trend (a thermal offset drift, an ac-coupling settling, a
/// ramp) under a periodic signal, modelled as a Legendre polynomial of degree ≤ 2 over the
/// record and estimated from the harmonic fit's residual.
///
/// Model: x_k = periodic(t_k) + c_1·P_1(u_k) + c_2·Q_2(u_k) + e_k, u_k = 2k/(N−1) − 1 ∈ [−1, 1],
/// P_1(u) = u, Q_2 = P_2 − mean(P_2) (so the trend has zero mean and the dc term a_0 stays the
/// record's mean level). On the symmetric grid P_1 and Q_2 are exactly orthogonal, so each
/// coefficient is the residual's projection c_j = Σ r_k·q_j(u_k) / Σ q_j(u_k)², with white-noise
/// variance σ²/Σ q_j². The trend is significant when either |c_j| exceeds kTrendSigmas of its
/// standard uncertainty (σ from the residual with the trend removed) and its peak-to-peak size
/// exceeds kTrendFloor of the record's largest |x| (rounding in noise-free records is not a
/// trend). Under white Gaussian noise the false-alarm rate is 2·2·Φ(−5) ≈ 1.1e-6 per record.
///
/// The IEEE Std 1057 four-parameter fit models a constant offset only; adding a low-order
/// polynomial for a slow trend is common practice in sine-fit ADC and waveform testing. The
/// periodic part is nearly orthogonal to a slow trend over many periods (their cross-product
/// falls as 1/(n·ω0·T)), so estimating the trend from the residual and refitting the harmonics
/// on x − trend (analyze does one such round) reaches the joint least-squares solution to
/// within a small fraction of the noise.
///
/// Misuse: a trend over a few periods is partly absorbed by the low harmonics; coloured (1/f)
/// noise looks like a trend and is reported as one.
#include <span>
#include <vector>

namespace periodfit::dsp {

inline constexpr double kTrendSigmas = 5;
inline constexpr double kTrendFloor = 1e-9;

struct BaselineTrend {
  bool significant = false;
  double c1 = 0, c2 = 0;      ///< Legendre coefficients (channel unit)
  double z1 = 0, z2 = 0;      ///< |c_j| / u(c_j)
  double peak_to_peak = 0;    ///< max − min of the trend over the record
  double power = 0;           ///< mean square of the trend over the record
  double removed_ss = 0;      ///< Σ trend_k² (what it takes out of ‖r‖²)
  /// The trend at sample k (u_k as above).
  double at(std::size_t k, std::size_t n) const;
};

/// `residual`: the harmonic fit's residual; `dof`: its degrees of freedom (the trend uses 2
/// more); `scale`: the record's largest |x| (for kTrendFloor).
BaselineTrend fit_baseline_trend(std::span<const double> residual, int dof, double scale);

}  // namespace periodfit::dsp
