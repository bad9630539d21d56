// Rice-distribution confidence interval for a magnitude (see magnitude_interval.hpp).
#include "dsp/magnitude_interval.hpp"

#include <algorithm>
#include <cmath>

#include <boost/math/distributions/non_central_chi_squared.hpp>

namespace periodfit::dsp {

double rice_cdf(double r, double nu, double sigma) {
  if (!(r > 0)) return 0;
  // (R/σ)² is non-central χ² with 2 degrees of freedom and non-centrality (ν/σ)² (Rice 1945;
  // the identity behind scipy.stats.rice).
  const double s = r / sigma, a = nu / sigma;
  if (a == 0) return -std::expm1(-0.5 * s * s);  // Rayleigh
  return boost::math::cdf(boost::math::non_central_chi_squared_distribution<double>(2.0, a * a), s * s);
}

namespace {

/// ν with F(r; ν, σ) = target on [lo, hi], where F decreases in ν (bisection: F is smooth and
/// monotone, and 60 halvings reach the double resolution of the bracket).
double invert(double r, double sigma, double target, double lo, double hi) {
  for (int i = 0; i < 60 && hi - lo > 1e-13 * (hi + sigma); ++i) {
    const double mid = 0.5 * (lo + hi);
    if (rice_cdf(r, mid, sigma) > target)
      lo = mid;
    else
      hi = mid;
  }
  return 0.5 * (lo + hi);
}

}  // namespace

MagnitudeInterval magnitude_interval(double r, double sigma, double k) {
  MagnitudeInterval out;
  r = std::max(r, 0.0);
  if (!(sigma > 0) || !std::isfinite(sigma) || !std::isfinite(r)) {
    out.lo = out.hi = r;
    out.method = MagnitudeIntervalMethod::normal;
    return out;
  }
  if (r / sigma >= kRiceSnrLimit) {
    out.lo = std::max(0.0, r - k * sigma);
    out.hi = r + k * sigma;
    out.method = MagnitudeIntervalMethod::normal;
    out.consistent_with_zero = out.lo == 0;
    return out;
  }
  out.method = MagnitudeIntervalMethod::rice;
  const double alpha = 0.5 * std::erfc(k / std::sqrt(2.0));  // one-sided tail of k
  // F(r; ν) ≤ α for ν = r + (k + 10)·σ: the Rice distribution is within a few σ of ν there.
  out.hi = invert(r, sigma, alpha, 0.0, r + (k + 10) * sigma);
  const double rayleigh = -std::expm1(-0.5 * (r / sigma) * (r / sigma));  // F(r; 0)
  if (rayleigh <= 1 - alpha) {
    out.lo = 0;
    out.consistent_with_zero = true;
  } else {
    out.lo = invert(r, sigma, 1 - alpha, 0.0, r);
  }
  return out;
}

}  // namespace periodfit::dsp
