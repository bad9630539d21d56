#pragma once
// The tests' one generator of periodic signals: a sum of harmonics, optionally through a static
// nonlinearity, plus optional white Gaussian noise,
//
//   x_k = g( X_0 + Σ_{n≥1} |X_n|·cos(n·θ_k + ∠X_n) ) + σ·w_k,      w_k ~ N(0, 1) i.i.d.,
//
// with amplitudes as peak values and phases in the cos convention (DEVELOPERS.md, "Units and
// conventions"). Three samplings, each evaluated exactly as written, since tests compare with
// closed forms and some with the exact noise draw:
//   harmonic_samples(X, PeriodGrid{M, P})     θ_i = 2π·(i mod M)/M: M points per period, P periods
//                                             (the lock's grid: every period the same numbers);
//   harmonic_samples(X, f0, fs, count)         θ_k = 2π·f0·k/fs, t = k/fs (a record from t = 0);
//   tone_samples(dc, tones, f0, clock)         dc + Σ A·cos(2π·n·f0·t_k + φ_deg·π/180),
//                                             t_k = t0 + k/fs (tones given as n, A, φ in degrees).
//
// Noise: with an rng, one draw per sample from a fresh std::normal_distribution(0, 1), in sample
// order, also when σ = 0, so the state a caller's shared rng is left in does not depend on σ
// (tests draw the input and output of one DUT from one rng). With `draws` instead, the standard
// normal values are given, one per sample (interleaved_draws: channels drawn in turn). Neither:
// no noise. The nonlinearity g acts on the noise-free sum (a DUT's curvature, not the ADC's).
//
// Usage:
//   std::mt19937_64 rng(1);
//   const Phasors u = {0.0, std::polar(1.0, 0.3)};                  // 1 V peak at f0, 0.3 rad
//   const auto x = harmonic_samples(u, PeriodGrid{64, 8}, {1e-3, &rng});
#include <complex>
#include <cstddef>
#include <functional>
#include <numbers>
#include <random>
#include <vector>

namespace periodfit::test {

/// Harmonic phasors X_n = A_n·e^{jφ_n}, index n (0 = dc, whose real part is the level).
using Phasors = std::vector<std::complex<double>>;

/// One harmonic given by its order, peak amplitude and phase in degrees.
struct Tone {
  int n;
  double amplitude;
  double phase_deg;
};

/// M samples per period over P whole periods.
struct PeriodGrid {
  int samples_per_period;
  int periods;
};

/// `count` samples at fs_hz from t0_s.
struct SampleClock {
  double fs_hz;
  std::size_t count;
  double t0_s = 0;
};

/// Additive white Gaussian noise of standard deviation sigma (see the header comment).
struct WhiteNoise {
  double sigma = 0;
  std::mt19937_64* rng = nullptr;
  const std::vector<double>* draws = nullptr;  ///< standard normal values, one per sample
};

/// A static nonlinearity g applied to the noise-free sum; empty = none.
using Shape = std::function<double(double)>;

namespace signal_detail {

/// x_k = g(sum(k)) + σ·w_k for k < count.
template <class Sum>
std::vector<double> generate(std::size_t count, const Sum& sum, const WhiteNoise& noise, const Shape& shape) {
  std::normal_distribution<double> w(0.0, 1.0);
  std::vector<double> x(count);
  for (std::size_t k = 0; k < count; ++k) {
    double v = sum(k);
    if (shape) v = shape(v);
    if (noise.draws) v = v + noise.sigma * (*noise.draws)[k];
    else if (noise.rng) v = v + noise.sigma * w(*noise.rng);
    x[k] = v;
  }
  return x;
}

/// X_0 + Σ |X_n|·cos(n·θ + ∠X_n), terms with X_n = 0 left out.
inline double phasor_sum(const Phasors& x, double theta) {
  double v = x.empty() ? 0.0 : x[0].real();
  for (std::size_t n = 1; n < x.size(); ++n)
    if (x[n] != 0.0) v += std::abs(x[n]) * std::cos(double(n) * theta + std::arg(x[n]));
  return v;
}

}  // namespace signal_detail

/// On whole periods: θ_i = 2π·(i mod M)/M, i < M·P.
inline std::vector<double> harmonic_samples(const Phasors& x, PeriodGrid grid, const WhiteNoise& noise = {},
                                            const Shape& shape = {}) {
  const int m = grid.samples_per_period;
  return signal_detail::generate(
      std::size_t(m) * std::size_t(grid.periods),
      [&x, m](std::size_t i) {
        return signal_detail::phasor_sum(x, 2 * std::numbers::pi * double(i % std::size_t(m)) / m);
      },
      noise, shape);
}

/// A record from t = 0: θ_k = 2π·f0·k/fs, k < count.
inline std::vector<double> harmonic_samples(const Phasors& x, double f0_hz, double fs_hz, std::size_t count,
                                            const WhiteNoise& noise = {}, const Shape& shape = {}) {
  return signal_detail::generate(
      count,
      [&x, f0_hz, fs_hz](std::size_t k) {
        return signal_detail::phasor_sum(x, 2 * std::numbers::pi * f0_hz * double(k) / fs_hz);
      },
      noise, shape);
}

/// dc + Σ A·cos(2π·n·f0·t_k + φ_deg·π/180), t_k = t0 + k/fs.
inline std::vector<double> tone_samples(double dc, const std::vector<Tone>& tones, double f0_hz,
                                        const SampleClock& clock, const WhiteNoise& noise = {}) {
  constexpr double pi = std::numbers::pi;
  return signal_detail::generate(
      clock.count,
      [&](std::size_t k) {
        const double t = clock.t0_s + static_cast<double>(k) / clock.fs_hz;
        double v = dc;
        for (const auto& tone : tones) v += tone.amplitude * std::cos(2 * pi * tone.n * f0_hz * t + tone.phase_deg * pi / 180);
        return v;
      },
      noise, {});
}

/// Standard normal draws for `channels` channels of `count` samples from one rng, alternating
/// between the channels sample by sample (channel c gets draws c, c + channels, …), for
/// WhiteNoise::draws: captures whose channels were drawn that way keep their exact noise.
inline std::vector<std::vector<double>> interleaved_draws(std::mt19937_64& rng, std::size_t channels,
                                                          std::size_t count) {
  std::normal_distribution<double> w(0.0, 1.0);
  std::vector<std::vector<double>> draws(channels, std::vector<double>(count));
  for (std::size_t k = 0; k < count; ++k)
    for (auto& channel : draws) channel[k] = w(rng);
  return draws;
}

}  // namespace periodfit::test
