// Lines in the residual spectrum above a local noise floor (see residual_lines.hpp).
#include "dsp/residual_lines.hpp"

#include <algorithm>
#include <cmath>
#include <complex>
#include <numbers>

#include "dsp/fft_plan.hpp"

namespace periodfit::dsp {
namespace {

constexpr double kPi = std::numbers::pi;

/// Hann window's amplitude response at `d` bins from a line (1 at d = 0).
double hann_gain(double d) {
  d = std::abs(d);
  if (d < 1e-9) return 1;
  if (std::abs(d - 1) < 1e-9) return 0.5;
  return std::abs(std::sin(kPi * d) / (kPi * d * (1 - d * d)));
}

/// Bins that cannot hold interference: the lowest kLowBins, Nyquist, and the harmonics' guards.
std::vector<char> excluded_bins(std::size_t bins, double bin_hz, double fs, double f0, bool folded,
                                int fitted_harmonics) {
  std::vector<char> excluded(bins, 0);
  for (std::size_t k = 0; k < bins && k < static_cast<std::size_t>(kLowBins); ++k) excluded[k] = 1;
  excluded[bins - 1] = 1;
  // Harmonics above fs/2 fold back to |n·f0 − j·fs| (aliasing, and the harmonics of a
  // quantiser's error): they are the signal's, not interference. Orders up to the point where the
  // guards would cover kFoldedShare of the spectrum are excluded (folded orders land nearly
  // uniformly, so that is also the chance that a given interferer is hidden by one).
  const double guard_share = (2.0 * kHarmonicGuardBins + 1) / static_cast<double>(bins);
  const double in_band = std::floor(0.5 * fs / f0);
  const int max_order = static_cast<int>(folded ? std::clamp(kFoldedShare / guard_share, in_band, 20000.0) : in_band);
  for (int order = 1; order <= max_order; ++order) {
    double f = std::fmod(order * f0, fs);
    if (f > 0.5 * fs) f = fs - f;
    const double c = f / bin_hz;
    // A fitted harmonic is gone from the residual: only its nearest bin ±kFittedGuardBins is
    // guarded, so 3 Hz AM sidebands of a fitted tone in a 1 s record stay visible (issue 12).
    // Not when folded harmonics are expected: orders beyond max_order land anywhere, and the
    // wider guards hide some of them as before.
    const bool fitted = !folded && order <= fitted_harmonics && order * f0 < 0.5 * fs;
    const long lo = fitted ? std::lround(c) - kFittedGuardBins : static_cast<long>(std::floor(c - kHarmonicGuardBins));
    const long hi = fitted ? std::lround(c) + kFittedGuardBins : static_cast<long>(std::ceil(c + kHarmonicGuardBins));
    for (long k = std::max(0L, lo); k <= hi && k < static_cast<long>(bins); ++k) excluded[static_cast<std::size_t>(k)] = 1;
  }
  return excluded;
}

/// Local floor of each block of kFloorBlock bins: the median of its non-excluded bins / ln 2
/// (0 where too few remain).
std::vector<double> block_floors(const std::vector<double>& p, const std::vector<char>& excluded) {
  const std::size_t blocks = (p.size() + kFloorBlock - 1) / kFloorBlock;
  std::vector<double> floor_of(blocks, 0.0);
  std::vector<double> tmp;
  for (std::size_t b = 0; b < blocks; ++b) {
    tmp.clear();
    // Blocks are widened to three so the floor at a block's edge is not a handful of bins.
    const std::size_t lo = b > 0 ? (b - 1) * kFloorBlock : 0;
    const std::size_t hi = std::min(p.size(), (b + 2) * kFloorBlock);
    for (std::size_t k = lo; k < hi; ++k)
      if (!excluded[k]) tmp.push_back(p[k]);
    if (tmp.size() < kFloorBlock / 2) continue;
    std::nth_element(tmp.begin(), tmp.begin() + static_cast<long>(tmp.size() / 2), tmp.end());
    floor_of[b] = tmp[tmp.size() / 2] / std::numbers::ln2;
  }
  return floor_of;
}

}  // namespace

ResidualLines find_residual_lines(std::span<const double> residual, double fs, double f0, bool folded,
                                  int fitted_harmonics) {
  ResidualLines out;
  // A 7-smooth length within 1/8 of the record (FFTW is fastest there); the tail is dropped.
  std::size_t n = residual.size();
  if (n > 16) {
    const auto m = static_cast<std::size_t>(fft_friendly_size(static_cast<int>(n - n / 8)));
    if (m <= n) n = m;
  }
  const std::span<const double> r = residual.first(n);
  if (n < static_cast<std::size_t>(2 * kFloorBlock) || !(fs > 0) || !(f0 > 0)) return out;
  std::vector<double> buf(n);
  double wsum = 0;
  for (std::size_t k = 0; k < n; ++k) {
    const double w = 0.5 - 0.5 * std::cos(2 * kPi * (static_cast<double>(k) + 0.5) / static_cast<double>(n));
    wsum += w;
    buf[k] = w * r[k];
  }
  std::vector<std::complex<double>> spec(n / 2 + 1);
  real_dft(buf, spec);
  std::vector<double> p(spec.size());
  for (std::size_t k = 0; k < p.size(); ++k) p[k] = std::norm(spec[k]);
  const double bin_hz = fs / static_cast<double>(n);
  const std::vector<char> excluded = excluded_bins(p.size(), bin_hz, fs, f0, folded, fitted_harmonics);
  const std::vector<double> floor_of = block_floors(p, excluded);
  int examined = 0;
  for (std::size_t k = 1; k + 1 < p.size(); ++k)
    if (!excluded[k] && floor_of[k / kFloorBlock] > 0) ++examined;
  out.bins_examined = examined;
  if (examined == 0) return out;
  const double t = std::log(static_cast<double>(examined) / kLineFalseAlarm);
  out.threshold_db = 10 * std::log10(t);
  double biggest = 0;
  for (double v : p) biggest = std::max(biggest, v);
  for (std::size_t k = 1; k + 1 < p.size(); ++k) {
    const double fl = floor_of[k / kFloorBlock];
    if (excluded[k] || !(fl > 0) || !(p[k] > t * fl) || p[k] < p[k - 1] || p[k] < p[k + 1]) continue;
    // Rounding-level residuals (a noise-free record) have no lines worth naming.
    if (p[k] < 1e-24 * biggest) continue;
    double d = 0;
    if (p[k - 1] > 0 && p[k + 1] > 0) {
      const double la = std::log(p[k - 1]), lb = std::log(p[k]), lc = std::log(p[k + 1]);
      const double den = la - 2 * lb + lc;
      if (den < 0) d = std::clamp(0.5 * (la - lc) / den, -0.5, 0.5);
    }
    ResidualLine line;
    line.freq_hz = (static_cast<double>(k) + d) * bin_hz;
    line.amplitude = 2 * std::sqrt(p[k]) / wsum / hann_gain(d);
    line.over_floor_db = 10 * std::log10(p[k] / fl);
    out.lines.push_back(line);
  }
  std::sort(out.lines.begin(), out.lines.end(),
            [](const ResidualLine& a, const ResidualLine& b) { return a.amplitude > b.amplitude; });
  for (const auto& l : out.lines) out.power += 0.5 * l.amplitude * l.amplitude;
  return out;
}

}  // namespace periodfit::dsp
