// Per-period and averaged harmonic phasors of a locked grid (FFTW r2c per period) and the
// noise-bin variances of the full-grid spectrum. Method: period_lock.hpp.
#include <cassert>
#include <cmath>
#include <complex>
#include <limits>
#include <numbers>
#include <string>
#include <vector>

#include "core/error.hpp"
#include "dsp/fft_plan.hpp"
#include "dsp/period_lock.hpp"

namespace periodfit::dsp {
namespace {
constexpr double kTwoPi = 2 * std::numbers::pi;
}  // namespace

PeriodSpectra period_spectra(const PeriodGrid& grid, int max_harmonic) {
  return period_spectra(grid, max_harmonic, true);
}

PeriodSpectra period_spectra(const PeriodGrid& grid, int max_harmonic, bool with_noise_bins) {
  const int m = grid.samples_per_period, p = grid.periods;
  assert(grid.samples.size() == static_cast<std::size_t>(m) * static_cast<std::size_t>(p));
  if (max_harmonic < 0 || max_harmonic > m / 2)
    throw OptionError("max_harmonic", std::to_string(max_harmonic),
                      "must be between 0 and samples_per_period/2 = " + std::to_string(m / 2));
  const auto M = static_cast<std::size_t>(m), P = static_cast<std::size_t>(p);
  const auto H = static_cast<std::size_t>(max_harmonic);
  PeriodSpectra s;
  s.f0_hz = grid.f0_hz;
  s.periods = p;
  s.samples_per_period = m;
  s.max_harmonic = max_harmonic;
  // Rotation from the grid's start to the file's time origin: X_n·e^{−j·n·ω0·start}.
  std::vector<std::complex<double>> rot(H + 1);
  for (std::size_t k = 0; k <= H; ++k) {
    const double cycles = static_cast<double>(k) * grid.f0_hz * grid.start_s;
    rot[k] = std::polar(1.0, -kTwoPi * (cycles - std::floor(cycles)));
  }
  // Peak-amplitude scaling: 2/M for a cosine pair, 1/M for dc and the Nyquist bin.
  auto scale = [](std::size_t k, std::size_t len) {
    return (k == 0 || 2 * k == len) ? 1.0 / static_cast<double>(len) : 2.0 / static_cast<double>(len);
  };
  std::vector<std::complex<double>> spec(M / 2 + 1);
  s.per_period.assign(P, std::vector<std::complex<double>>(H + 1));
  s.mean.assign(H + 1, {0, 0});
  for (std::size_t q = 0; q < P; ++q) {
    real_dft(std::span<const double>(grid.samples.data() + q * M, M), spec);
    for (std::size_t k = 0; k <= H; ++k) {
      std::complex<double> v = spec[k] * scale(k, M) * rot[k];
      if (k == 0 || 2 * k == M) v = {v.real(), 0.0};  // dc (and Nyquist) are real cosines
      s.per_period[q][k] = v;
      s.mean[k] += v / static_cast<double>(P);
    }
  }
  // Noise bins: the full-record spectrum's bins between harmonics (not multiples of P), below
  // 0.45 of the source's rate (above it the interpolation kernel has filtered the noise out).
  s.noise_bin_variance.assign(H + 1, 0.0);
  s.noise_bin_dof = 0;
  if (p >= 2 && with_noise_bins) {
    const std::size_t total = M * P;
    std::vector<std::complex<double>> full(total / 2 + 1);
    real_dft(grid.samples, full);
    const double limit_hz = grid.source_rate_hz > 0 ? kBandFraction * grid.source_rate_hz
                                                    : 0.5 * m * grid.f0_hz;
    const auto kmax = std::min<std::size_t>(total / 2 - 1,
        static_cast<std::size_t>(std::floor(limit_hz / grid.f0_hz * static_cast<double>(P))));
    constexpr std::size_t kWantBins = 32;  // ≥ 64 real dof: coverage of ±1.96u within ~0.5 %
    int min_dof = std::numeric_limits<int>::max();
    for (std::size_t k = 0; k <= H; ++k) {
      const std::size_t centre = k * P;
      double sum = 0;
      std::size_t count = 0;
      for (std::size_t w = 1; count < kWantBins && w <= total / 2; ++w) {
        bool any = false;
        for (long sign : {-1L, 1L}) {
          const long bin = static_cast<long>(centre) + sign * static_cast<long>(w);
          if (bin < 1 || static_cast<std::size_t>(bin) > kmax) continue;
          any = true;
          if (static_cast<std::size_t>(bin) % P == 0) continue;
          sum += std::norm(full[static_cast<std::size_t>(bin)]);
          ++count;
        }
        if (!any && w > centre + kmax) break;
      }
      if (count == 0) {
        min_dof = 0;
        continue;
      }
      const double sc = (k == 0 ? 1.0 : 2.0) / static_cast<double>(total);
      s.noise_bin_variance[k] = sc * sc * sum / static_cast<double>(count);
      min_dof = std::min(min_dof, static_cast<int>(2 * count));
    }
    s.noise_bin_dof = min_dof == std::numeric_limits<int>::max() ? 0 : min_dof;
    if (s.noise_bin_dof == 0) std::fill(s.noise_bin_variance.begin(), s.noise_bin_variance.end(), 0.0);
  }
  return s;
}


}  // namespace periodfit::dsp
