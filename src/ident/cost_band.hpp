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
///  - every F term with d2 > 30 (P ≥ 32 periods, or the noise-bin method's ≥ 64 dof): a scaled
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
  std::string method;   ///< "chi2", "scaled-chi2" or "monte-carlo"
};

/// Band of the cost of a fit to `points` with `dof` = 2K − n_θ > 0 residual degrees of freedom.
/// Throws OptionError when confidence is outside (0, 1) or dof ≤ 0.
CostBand cost_band(const std::vector<FrfPoint>& points, int dof, double confidence);

}  // namespace periodfit::ident
