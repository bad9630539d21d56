// Legendre baseline trend of a harmonic fit's residual (see baseline.hpp).
#include "dsp/baseline.hpp"

#include <algorithm>
#include <cmath>

namespace periodfit::dsp {
namespace {

double u_of(std::size_t k, std::size_t n) {
  return n > 1 ? 2.0 * static_cast<double>(k) / static_cast<double>(n - 1) - 1.0 : 0.0;
}

/// Mean of P_2(u) = (3u² − 1)/2 over the grid u_k: Σ u_k² = N(N+1)/(3(N−1)) in closed form.
double p2_mean(std::size_t n) {
  if (n < 2) return 0;
  const double nn = static_cast<double>(n);
  const double mean_u2 = (nn + 1) / (3 * (nn - 1));
  return 0.5 * (3 * mean_u2 - 1);
}

}  // namespace

double BaselineTrend::at(std::size_t k, std::size_t n) const {
  const double u = u_of(k, n);
  return c1 * u + c2 * (0.5 * (3 * u * u - 1) - p2_mean(n));
}

BaselineTrend fit_baseline_trend(std::span<const double> r, int dof, double scale) {
  BaselineTrend t;
  const std::size_t n = r.size();
  if (n < 8 || dof <= 2) return t;
  const double m2 = p2_mean(n);
  double s1 = 0, s2 = 0, q1 = 0, q2 = 0, rr = 0;
  for (std::size_t k = 0; k < n; ++k) {
    const double u = u_of(k, n);
    const double p2 = 0.5 * (3 * u * u - 1) - m2;
    s1 += r[k] * u;
    s2 += r[k] * p2;
    q1 += u * u;
    q2 += p2 * p2;
    rr += r[k] * r[k];
  }
  t.c1 = s1 / q1;
  t.c2 = s2 / q2;
  t.removed_ss = t.c1 * t.c1 * q1 + t.c2 * t.c2 * q2;
  t.power = t.removed_ss / static_cast<double>(n);
  const double sigma2 = std::max(rr - t.removed_ss, 0.0) / (dof - 2);
  t.z1 = sigma2 > 0 ? std::abs(t.c1) / std::sqrt(sigma2 / q1) : 0;
  t.z2 = sigma2 > 0 ? std::abs(t.c2) / std::sqrt(sigma2 / q2) : 0;
  // The trend on [−1, 1] is a quadratic: extremes at the ends and at the vertex.
  double lo = std::min(t.at(0, n), t.at(n - 1, n)), hi = std::max(t.at(0, n), t.at(n - 1, n));
  if (t.c2 != 0) {
    const double uv = -t.c1 / (3 * t.c2);  // d/du (c1·u + 1.5·c2·u²) = 0
    if (uv > -1 && uv < 1) {
      const double v = t.c1 * uv + t.c2 * (0.5 * (3 * uv * uv - 1) - m2);
      lo = std::min(lo, v);
      hi = std::max(hi, v);
    }
  }
  t.peak_to_peak = hi - lo;
  t.significant = (t.z1 > kTrendSigmas || t.z2 > kTrendSigmas) && t.peak_to_peak > kTrendFloor * scale;
  return t;
}

}  // namespace periodfit::dsp
