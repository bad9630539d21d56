#pragma once
/// The band a weighted least-squares cost falls in when the model is right, allowing for weights
/// that were themselves estimated from the data.
///
/// The rational fit's cost is V = Σ_k e_kᵀ Ĉ_k⁻¹ e_k (ident/rational_fit.hpp). With the true
/// covariances C_k each term is χ²₂ and V ~ χ²(2K − n_θ). Measured covariances are estimates:
///  - a 2×2 sample covariance of P per-period deviations (m = P − 1 dof, the FRF's
///    per-period method): the term is Hotelling's T², T² ~ 2m/(m − 1)·F(2, m − 1)
///    (Hotelling 1931; Anderson, An Introduction to Multivariate Statistical Analysis, 3rd ed.,
///    §5.2), mean 2m/(m − 3): 3 per point instead of 2 at P = 10;
///  - a circular σ̂² on ν real dof (the FRF's noise-bin method): the term is 2·F(2, ν), mean
///    2ν/(ν − 2).
/// Ignoring this makes a right model look inadequate with few periods (cost/dof ≈ 1.5 at
/// P = 10). The band here is that of Σ_k of the per-point laws, scaled by (2K − n_θ)/(2K) for
/// the parameters the fit absorbed (exact for known weights in the mean; first order otherwise):
///  - all weights known: χ²(2K − n_θ) itself, method "chi2";
///  - every F term with d2 > 30 (P ≥ 33 periods, d2 = P − 2, or the noise-bin method's ≥ 64 dof): a scaled
///    χ² c·χ²_ν matching the sum's mean and variance (Satterthwaite 1946, Biometrics Bull.
///    2(6):110–114), method "scaled-chi2";
///  - otherwise (heavier F tails, where two moments over-cover: 96.9 % at P = 8): the quantiles
///    of 8192 Monte Carlo draws of the sum from a fixed seed (deterministic; the 97.5 % point to
///    ±0.2 % in probability), method "monte-carlo".
///
/// Misuse: the scaling by (2K − n_θ)/(2K) is the known-weights result carried over; with very
/// few points per parameter and few periods, read the verdict loosely.
///
/// Usage:
///   const CostBand b = cost_band(points, fit.dof, 0.95);
///   bool adequate = b.lower <= fit.cost && fit.cost <= b.upper;
#include <string>
#include <vector>

#include "ident/rational_fit.hpp"

namespace periodfit::ident {

struct CostBand {
  double lower = 0;     ///< central `confidence` band of V for a right model
  double upper = 0;
  double expected = 0;  ///< E[V] for a right model (infinite mean: the Monte Carlo median)
  CostBandMethod method = CostBandMethod::chi2;
};

/// Band of the cost of a fit to `points` with `dof` = 2K − n_θ > 0 residual degrees of freedom.
/// Throws OptionError when confidence is outside (0, 1) or dof ≤ 0.
CostBand cost_band(const std::vector<FrfPoint>& points, int dof, double confidence);

/// What estimated weights do to the parameter covariance. To first order θ̂ − θ =
/// (JᵀŴJ)⁻¹JᵀŴe; with K points JᵀŴJ ≈ E[Ŵ] terms, so the true covariance is
/// (JᵀWJ)⁻¹·c/κ² with κ·W = E[Ŵ] and c·W = E[Ŵ C Ŵ], while the fit reports (JᵀŴJ)⁻¹ ≈
/// (JᵀWJ)⁻¹/κ. Their ratio c/κ per point: for a 2×2 sample covariance on m dof (Ŵ = S⁻¹, S
/// Wishart) E[S⁻¹] = m/(m − 3)·C⁻¹ and E[S⁻¹CS⁻¹] = m²/((m − 3)(m − 5))·C⁻¹ (second moment of
/// the inverse Wishart law; von Rosen 1988, Scand. J. Statist. 15:97–109), so the factor is
/// m/(m − 5); for a circular σ̂² on ν dof the same argument with inverse-χ² moments gives
/// ν/(ν − 4); known weights 1. The factor returned is the mean over the points.
/// Measured (tests/cost_band_test.cpp): with it and the normal quantile, ±1.96u of a 0/1 fit's
/// parameters cover 94.4–95.2 % at P = 10…64 (87–94 % with the Student-t quantile and no
/// factor), conservatively 96–97 % at P = 7–8.
struct CovarianceInflation {
  double factor = 1;     ///< multiply the fit's (JᵀŴJ)⁻¹ by this
  bool defined = true;   ///< false when some point has m ≤ 5 (P ≤ 6) or ν ≤ 4: no second moment
};
CovarianceInflation covariance_inflation(const std::vector<FrfPoint>& points);

}  // namespace periodfit::ident
