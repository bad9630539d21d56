#include "ident/cost_band.hpp"

#include <boost/math/distributions/chi_squared.hpp>

#include <algorithm>
#include <cmath>
#include <cstdint>
#include <limits>
#include <random>
#include <utility>

#include "core/error.hpp"
#include "core/number_format.hpp"

namespace periodfit::ident {

namespace {

/// One point's term is a·F(2, d2); d2 = ∞ means a known covariance (the term is χ²₂, a = 2).
struct TermLaw {
  double a = 2;
  double d2 = std::numeric_limits<double>::infinity();
  bool operator==(const TermLaw&) const = default;
};

TermLaw term_law(const FrfPoint& p) {
  if (p.covariance_dof <= 0) return {};
  const double m = p.covariance_dof;
  // Hotelling: P·ēᵀS⁻¹ē with S on m dof, dimension 2 → 2m/(m − 1)·F(2, m − 1). m ≥ 2 is needed
  // for S to be invertible at all (FrfOptions asks for ≥ 3 periods); a caller's m = 1 gets the
  // m = 2 law rather than a division by zero.
  if (p.covariance_sampled_2x2) {
    const double mm = std::max(m, 2.0);
    return {2 * mm / (mm - 1), mm - 1};
  }
  return {2, m};  // 2|e|²/σ̂² with σ̂²/σ² ~ χ²_ν/ν → 2·F(2, ν)
}

constexpr int kMonteCarloDraws = 8192;
/// Up to this denominator dof the F tails are too heavy for a two-moment match: measured by
/// tests/cost_band_test.cpp, the Satterthwaite band covers 96.9 % at d2 = 6 (P = 8) and 96.0 % at
/// d2 = 8 against 95 % (the draws cover 95.0–95.3 %). Above it the match is within ±0.5 %.
constexpr double kMonteCarloMaxD2 = 30;
constexpr std::uint64_t kMonteCarloSeed = 0x7065'7269'6f64'6669ULL;  // fixed: a verdict must not wobble

/// Sorted Monte Carlo draws of Σ_k a_k·F_k(2, d2_k). Fits of one FRF (auto order tries several)
/// and repeated fits of like data share the laws, so the last result is kept per thread.
const std::vector<double>& monte_carlo_sums(const std::vector<TermLaw>& laws) {
  thread_local std::vector<TermLaw> cached_laws;
  thread_local std::vector<double> cached_sums;
  if (!cached_sums.empty() && cached_laws == laws) return cached_sums;
  std::mt19937_64 rng(kMonteCarloSeed);
  std::exponential_distribution<double> chi2_2_half(1.0);  // χ²₂/2 is Exp(1)
  std::vector<double> sums(kMonteCarloDraws, 0.0);
  for (int draw = 0; draw < kMonteCarloDraws; ++draw) {
    double s = 0;
    for (const TermLaw& law : laws) {
      const double num = chi2_2_half(rng);
      if (std::isinf(law.d2)) {
        s += law.a * num;
        continue;
      }
      // χ²_d/d is Gamma(shape d/2, scale 2/d).
      std::gamma_distribution<double> den(law.d2 / 2, 2 / law.d2);
      s += law.a * num / den(rng);
    }
    sums[static_cast<std::size_t>(draw)] = s;
  }
  std::sort(sums.begin(), sums.end());
  cached_laws = laws;
  cached_sums = std::move(sums);
  return cached_sums;
}

double sorted_quantile(const std::vector<double>& v, double q) {
  const double pos = q * static_cast<double>(v.size() - 1);
  const auto i = static_cast<std::size_t>(std::floor(pos));
  const double f = pos - static_cast<double>(i);
  return i + 1 < v.size() ? v[i] + f * (v[i + 1] - v[i]) : v.back();
}

// The one table of the band methods: the code the JSON writes, the words the text report prints.
struct BandMethodText {
  CostBandMethod method;
  std::string_view code;
  std::string_view description;
};
constexpr BandMethodText kBandMethods[] = {
    {CostBandMethod::chi2, "chi2", "chi-square"},
    {CostBandMethod::scaled_chi2, "scaled-chi2", "chi-square scaled for estimated weights"},
    {CostBandMethod::monte_carlo, "monte-carlo", "Monte Carlo, estimated weights"},
};

const BandMethodText& band_method_text(CostBandMethod method) {
  // kBandMethods lists the methods in the enum's order (tests/cost_band_test.cpp checks it).
  return kBandMethods[static_cast<std::size_t>(method)];
}

}  // namespace

std::string_view code(CostBandMethod method) { return band_method_text(method).code; }

std::string_view description(CostBandMethod method) { return band_method_text(method).description; }

CostBand cost_band(const std::vector<FrfPoint>& points, int dof, double confidence) {
  if (!(confidence > 0 && confidence < 1))
    throw OptionError("confidence", format_shortest(confidence), "must be in (0, 1)");
  if (dof <= 0) throw OptionError("dof", std::to_string(dof), "must be > 0");
  const double lo_q = (1 - confidence) / 2, hi_q = (1 + confidence) / 2;
  std::vector<TermLaw> laws;
  laws.reserve(points.size());
  bool all_known = true, heavy_tails = false, mean_exists = true;
  double mean = 0, variance = 0;
  for (const FrfPoint& p : points) {
    const TermLaw law = term_law(p);
    laws.push_back(law);
    if (std::isinf(law.d2)) {
      mean += 2;
      variance += 4;
      continue;
    }
    all_known = false;
    heavy_tails = heavy_tails || law.d2 <= kMonteCarloMaxD2;
    // F(2, d2): mean d2/(d2 − 2) for d2 > 2, variance d2³/((d2 − 2)²(d2 − 4)) for d2 > 4 (from
    // the F law's moments).
    if (law.d2 > 2) mean += law.a * law.d2 / (law.d2 - 2);
    else mean_exists = false;
    if (law.d2 > 4)
      variance += law.a * law.a * law.d2 * law.d2 * law.d2 / ((law.d2 - 2) * (law.d2 - 2) * (law.d2 - 4));
  }
  // The fit absorbs n_θ of the 2K real equations; scale the sum of the K terms accordingly.
  const double absorbed = points.empty() ? 1.0 : static_cast<double>(dof) / (2.0 * static_cast<double>(points.size()));

  CostBand band;
  if (all_known) {
    const boost::math::chi_squared chi2(dof);
    band.lower = boost::math::quantile(chi2, lo_q);
    band.upper = boost::math::quantile(chi2, hi_q);
    band.expected = dof;
    band.method = CostBandMethod::chi2;
  } else if (!heavy_tails) {
    // Satterthwaite: c·χ²_ν with c·ν = mean, 2c²ν = variance (of the scaled sum).
    const double m = absorbed * mean, v = absorbed * absorbed * variance;
    const double c = v / (2 * m), nu = 2 * m * m / v;
    const boost::math::chi_squared chi2(nu);
    band.lower = c * boost::math::quantile(chi2, lo_q);
    band.upper = c * boost::math::quantile(chi2, hi_q);
    band.expected = m;
    band.method = CostBandMethod::scaled_chi2;
  } else {
    const std::vector<double>& sums = monte_carlo_sums(laws);
    band.lower = absorbed * sorted_quantile(sums, lo_q);
    band.upper = absorbed * sorted_quantile(sums, hi_q);
    // With some d2 ≤ 2 the mean is infinite; the median is the honest "typical" value then.
    band.expected = absorbed * (mean_exists ? mean : sorted_quantile(sums, 0.5));
    band.method = CostBandMethod::monte_carlo;
  }
  return band;
}

CovarianceInflation covariance_inflation(const std::vector<FrfPoint>& points) {
  CovarianceInflation out;
  if (points.empty()) return out;
  double sum = 0;
  for (const FrfPoint& p : points) {
    if (p.covariance_dof <= 0) {
      sum += 1;
      continue;
    }
    const double m = p.covariance_dof;
    const double limit = p.covariance_sampled_2x2 ? 5 : 4;
    if (m <= limit) {
      // No finite second moment: count the first-moment correction (m/(m − 3), ν/(ν − 2))
      // where it exists, and say the result is not a covariance.
      out.defined = false;
      const double first = p.covariance_sampled_2x2 ? 3 : 2;
      sum += m > first ? m / (m - first) : 1;
      continue;
    }
    sum += m / (m - limit);
  }
  out.factor = sum / static_cast<double>(points.size());
  return out;
}

}  // namespace periodfit::ident
