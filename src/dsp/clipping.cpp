// Plateau-at-the-extremes clipping check (see clipping.hpp).
#include "dsp/clipping.hpp"

#include <algorithm>
#include <cmath>
#include <limits>
#include <numbers>
#include <vector>

#include <Eigen/Dense>

namespace periodfit::dsp {
namespace {

struct Extreme {
  double level = 0;       ///< in the original sign
  double band = 0;
  double rail_noise = 0;
  std::size_t count = 0;
  std::size_t longest = 0;
  double expected = 0;
  double excess = 0;      ///< median over plateau edges of the approach's extrapolated excess / band
};

/// Least-squares parabola through y[k] at τ = 1…w (τ = 1 next to the plateau, increasing away
/// from it) and the height its vertex reaches above y's plateau `level`, in units of `band`;
/// +∞ when the approach does not decelerate towards the plateau (a corner with no curvature,
/// as a trapezoid's).
double approach_excess(const std::vector<double>& y, double level, double band) {
  const auto w = static_cast<Eigen::Index>(y.size());
  Eigen::MatrixXd a(w, 3);
  Eigen::VectorXd b(w);
  for (Eigen::Index k = 0; k < w; ++k) {
    const double t = -static_cast<double>(k + 1);  // the plateau starts at t = 0
    a(k, 0) = 1;
    a(k, 1) = t;
    a(k, 2) = t * t;
    b(k) = y[static_cast<std::size_t>(k)];
  }
  const Eigen::Vector3d p = a.colPivHouseholderQr().solve(b);
  // y(t) = p0 + p1·t + p2·t²: rising into the plateau (p1 > 0) and bending over (p2 < 0) has
  // its vertex p0 − p1²/(4·p2) at t = −p1/(2·p2).
  if (!(p(1) > 0)) return -std::numeric_limits<double>::infinity();
  if (!(p(2) < 0)) return std::numeric_limits<double>::infinity();
  const double vertex = p(0) - p(1) * p(1) / (4 * p(2));
  return (vertex - level) / band;
}

/// The maximum of y = sign·x is examined (sign = −1: the minimum of x).
Extreme examine(std::span<const double> x, double sign, double mn, double mx) {
  Extreme e;
  const double range = mx - mn;
  const double top = sign > 0 ? mx : -mn;
  e.level = sign * top;
  const auto y = [&](std::size_t k) { return sign * x[k]; };
  std::vector<double> diffs;
  double next = top - range;  // the nearest value other than the extreme: the resolution
  for (std::size_t k = 0; k < x.size(); ++k) {
    if (y(k) != top) next = std::max(next, y(k));
    if (k + 1 < x.size() && y(k) >= top - kCoarseBand * range && y(k + 1) >= top - kCoarseBand * range)
      diffs.push_back(std::abs(y(k + 1) - y(k)));
  }
  if (!diffs.empty()) {
    std::nth_element(diffs.begin(), diffs.begin() + static_cast<long>(diffs.size() / 2), diffs.end());
    e.rail_noise = diffs[diffs.size() / 2] / (0.6745 * std::sqrt(2.0));
  }
  e.band = std::max(kBandSigmas * e.rail_noise, top - next);
  const double edge = top - e.band;
  std::vector<double> entries, exits, approach;
  // One plateau edge: the samples leading away from it (step −1 before a run, +1 after it),
  // as many as it takes to rise kApproachBands bands (kMinApproach…kMaxApproach samples).
  const auto edge_excess = [&](std::size_t from, long step, std::vector<double>& excesses) {
    approach.clear();
    long k = static_cast<long>(from);
    while (k >= 0 && k < static_cast<long>(x.size()) && approach.size() < kMaxApproach) {
      const double v = y(static_cast<std::size_t>(k));
      if (v >= edge) break;  // another plateau sample: this approach is too short
      approach.push_back(v);
      if (approach.size() >= kMinApproach && approach.front() - v >= kApproachBands * e.band) break;
      k += step;
    }
    if (approach.size() >= kMinApproach) excesses.push_back(approach_excess(approach, top, e.band));
  };
  std::size_t run = 0;
  for (std::size_t k = 0; k <= x.size(); ++k) {
    if (k < x.size() && y(k) >= edge) {
      ++e.count;
      e.longest = std::max(e.longest, ++run);
      continue;
    }
    if (run >= kMinRun) {
      const std::size_t first = k - run;
      if (first > 0) edge_excess(first - 1, -1, entries);
      if (k < x.size()) edge_excess(k, +1, exits);
    }
    run = 0;
  }
  // Both edges must be cut: a square wave through an RC leaves its level at a corner (the
  // input's step) but settles onto it smoothly, which is not clipping.
  const auto median = [](std::vector<double>& v) {
    if (v.empty()) return std::numeric_limits<double>::quiet_NaN();
    std::nth_element(v.begin(), v.begin() + static_cast<long>(v.size() / 2), v.end());
    return v[v.size() / 2];
  };
  const double in = median(entries), out = median(exits);
  e.excess = std::isnan(in) ? out : (std::isnan(out) ? in : std::min(in, out));
  if (std::isnan(e.excess)) e.excess = 0;
  const double amplitude = 0.5 * range;
  e.expected = std::min(1.0, std::sqrt(2 * e.band / amplitude) / std::numbers::pi);
  return e;
}

}  // namespace

ClipCheck check_clipping(std::span<const double> x) {
  ClipCheck out;
  if (x.size() < 8) return out;
  const auto [mn_it, mx_it] = std::minmax_element(x.begin(), x.end());
  const double mn = *mn_it, mx = *mx_it;
  const double range = mx - mn;
  if (!(range > 0) || !std::isfinite(range)) return out;
  const Extreme hi = examine(x, 1.0, mn, mx);
  const Extreme lo = examine(x, -1.0, mn, mx);
  const double n = static_cast<double>(x.size());
  // Samples in neither band: a square wave or pulse train has almost none.
  std::size_t both = 0;
  for (double v : x)
    if (v >= mx - hi.band && v <= mn + lo.band) ++both;  // bands overlapping: counted twice
  const double transition = 1 - (static_cast<double>(hi.count + lo.count) - static_cast<double>(both)) / n;
  if (transition < kMinTransitionShare) return out;
  for (const Extreme* e : {&hi, &lo}) {
    const double share = static_cast<double>(e->count) / n;
    const bool plateau = e->longest >= kMinRun && share > kShareFactor * e->expected && share >= kMinShare;
    const bool at_zero = std::abs(e->level) <= e->band + 1e-3 * range;
    const bool cut = e->excess > kMinExcessBands;
    if (plateau && !at_zero && cut) {
      out.clipped = true;
      out.at_max = e == &hi;
      out.count = e->count;
      out.level = e->level;
      out.share = share;
      out.expected_share = e->expected;
      out.band = e->band;
      out.rail_noise = e->rail_noise;
      out.excess_bands = e->excess;
      return out;
    }
  }
  return out;
}

}  // namespace periodfit::dsp
