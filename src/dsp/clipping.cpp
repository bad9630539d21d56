// Plateau-at-the-extremes clipping check (see clipping.hpp).
#include "dsp/clipping.hpp"

#include <algorithm>
#include <cmath>
#include <numbers>
#include <vector>

namespace periodfit::dsp {
namespace {

struct Extreme {
  double level = 0;
  double band = 0;
  double rail_noise = 0;
  std::size_t count = 0;
  std::size_t longest = 0;
  double expected = 0;
};

Extreme examine(std::span<const double> x, bool top, double mn, double mx) {
  Extreme e;
  const double range = mx - mn;
  e.level = top ? mx : mn;
  const auto inside = [&](double v, double width) { return top ? v >= mx - width : v <= mn + width; };
  std::vector<double> diffs;
  double next = top ? mn : mx;  // the nearest value other than the extreme: the resolution
  for (std::size_t k = 0; k < x.size(); ++k) {
    if (x[k] != e.level) next = top ? std::max(next, x[k]) : std::min(next, x[k]);
    if (k + 1 < x.size() && inside(x[k], kCoarseBand * range) && inside(x[k + 1], kCoarseBand * range))
      diffs.push_back(std::abs(x[k + 1] - x[k]));
  }
  if (!diffs.empty()) {
    std::nth_element(diffs.begin(), diffs.begin() + static_cast<long>(diffs.size() / 2), diffs.end());
    e.rail_noise = diffs[diffs.size() / 2] / (0.6745 * std::sqrt(2.0));
  }
  const double q = std::abs(e.level - next);
  e.band = std::max(kBandSigmas * e.rail_noise, q);
  std::size_t run = 0;
  for (double v : x) {
    if (inside(v, e.band)) {
      ++e.count;
      e.longest = std::max(e.longest, ++run);
    } else {
      run = 0;
    }
  }
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
  const Extreme hi = examine(x, true, mn, mx);
  const Extreme lo = examine(x, false, mn, mx);
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
    if (plateau && !at_zero) {
      out.clipped = true;
      out.at_max = e == &hi;
      out.count = e->count;
      out.level = e->level;
      out.share = share;
      out.expected_share = e->expected;
      out.band = e->band;
      out.rail_noise = e->rail_noise;
      return out;
    }
  }
  return out;
}

}  // namespace periodfit::dsp
