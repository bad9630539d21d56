// Tests of the lock stage: fundamental estimation, band-limited resampling onto whole periods
// and the per-period spectra (the contract the FRF stage relies on).
#include <doctest/doctest.h>

#include <algorithm>
#include <cmath>
#include <complex>
#include <numbers>
#include <random>
#include <vector>

#include "core/error.hpp"
#include "dsp/internal/kernel_override.hpp"
#include "dsp/period_lock.hpp"
#include "support/signals.hpp"
#include "support/code_table.hpp"

using namespace periodfit;
using std::numbers::pi;

namespace {

using test::Tone;

/// x(t) = dc + Σ A_n cos(2π n f0 t + φ_n), t = t0 + k/fs: a band-limited periodic signal
/// evaluated exactly (the reference every lock test compares with; support/signals.hpp), with
/// white noise of std noise_sigma from an rng seeded with `seed`.
std::vector<double> synth(std::size_t count, double fs, double t0, double f0, double dc,
                          const std::vector<Tone>& tones, double noise_sigma = 0,
                          unsigned seed = 1) {
  std::mt19937_64 rng(seed);
  return test::tone_samples(dc, tones, f0, {fs, count, t0},
                            noise_sigma > 0 ? test::WhiteNoise{noise_sigma, &rng} : test::WhiteNoise{});
}

double wrap_deg(double d) {
  while (d > 180) d -= 360;
  while (d <= -180) d += 360;
  return d;
}

// Tolerances of the noise-free checks, from the accuracy targets (3.37 periods,
// band-limited): amplitude relative error < 1e-6, phase < 1e-4 degree, f0 relative < 1e-9.
constexpr double kAmplitudeRelTol = 1e-6;
constexpr double kPhaseTolDeg = 1e-4;
constexpr double kF0RelTol = 1e-9;

const std::vector<Tone> kFiveTones = {
    {1, 1.0, 30.0}, {2, 0.3, -75.0}, {3, 0.1, 140.0}, {5, 0.02, -10.0}, {7, 0.005, 95.0}};

}  // namespace

TEST_CASE("lock: noise-free band-limited signal over 3.37 periods is fitted to the issue's targets") {
  // Exact synthesis of the model (the fit's own model class): the LS optimum is the truth.
  const double fs = 1000, f0 = 13.37;  // 74.79 samples per period
  const std::size_t n = static_cast<std::size_t>(std::round(3.37 * fs / f0));
  const double t0 = 0.123;  // arbitrary start: phases refer to t = 0, not to the first sample
  const auto x = synth(n, fs, t0, f0, 0.25, kFiveTones);
  dsp::LockOptions opt;
  opt.max_harmonic = 8;
  const dsp::HarmonicFit fit = dsp::fit_harmonics(x, fs, t0, opt);
  CHECK(fit.fundamental.method == dsp::F0Method::sine_fit);
  CHECK(fit.fundamental.converged);
  CHECK(std::abs(fit.fundamental.f0_hz / f0 - 1) < kF0RelTol);
  CHECK(std::abs(fit.a[0] - 0.25) < kAmplitudeRelTol * 0.25);
  for (const auto& tone : kFiveTones) {
    const std::complex<double> X = fit.phasor(tone.n);
    INFO("harmonic " << tone.n);
    CHECK(std::abs(std::abs(X) / tone.amplitude - 1) < kAmplitudeRelTol);
    CHECK(std::abs(wrap_deg(std::arg(X) * 180 / pi - tone.phase_deg)) < kPhaseTolDeg);
  }
  for (int n_absent : {4, 6, 8}) CHECK(std::abs(fit.phasor(n_absent)) < 1e-9);
  CHECK(fit.fundamental.condition < 1e3);  // header claim: well conditioned from 1.5 periods
}

TEST_CASE("lock: estimate works from 1.5 periods") {
  const double fs = 2000, f0 = 37.1;
  const auto n = static_cast<std::size_t>(std::round(1.5 * fs / f0));
  const auto x = synth(n, fs, 0, f0, -0.1, {{1, 2.0, -120}, {2, 0.4, 60}, {3, 0.2, 10}});
  dsp::LockOptions opt;
  opt.max_harmonic = 5;
  const dsp::Fundamental f = dsp::estimate_fundamental(x, fs, opt);
  CHECK(std::abs(f.f0_hz / f0 - 1) < kF0RelTol);
  CHECK(f.harmonics_fitted == 5);
  CHECK(f.dof == static_cast<int>(n) - 12);
}

TEST_CASE("lock: full-wave rectifier with unequal halves locks onto the weak line frequency") {
  // |sin(ωt)| has only even harmonics of the line (4/π·1/(n²−1) for even n: handbook Fourier
  // series of the full-wave rectified sine); a 5 % unbalance adds the line frequency itself,
  // far weaker than its 2nd harmonic (4/(3π) ≈ 0.42 vs 0.05). The true period is the line's.
  const double fs = 10000, f_line = 50.3;
  const std::size_t n = 4000;  // 20.1 line periods
  std::vector<double> x(n);
  for (std::size_t k = 0; k < n; ++k) {
    const double t = static_cast<double>(k) / fs;
    x[k] = std::abs(std::sin(2 * pi * f_line * t)) + 0.05 * std::sin(2 * pi * f_line * t);
  }
  const dsp::Fundamental f = dsp::estimate_fundamental(x, fs);
  // |sin| is not band-limited, so the fit sees aliased harmonics: relative 1e-6 is ample.
  CHECK(std::abs(f.f0_hz / f_line - 1) < 1e-6);
  // A hint near 2·f_line selects that reading on purpose (search within ±20 % of the hint).
  dsp::LockOptions hint;
  hint.f0_hint_hz = 100;
  CHECK(std::abs(dsp::estimate_fundamental(x, fs, hint).f0_hz / (2 * f_line) - 1) < 1e-4);
}

TEST_CASE("lock: forced f0 is used as given") {
  const double fs = 1000, f0 = 10;
  const auto x = synth(1000, fs, 0, f0, 0, {{1, 1, 0}}, 0.01);
  dsp::LockOptions opt;
  opt.f0_hz = 10.001;
  const dsp::Fundamental f = dsp::estimate_fundamental(x, fs, opt);
  CHECK(f.f0_hz == 10.001);
  CHECK(f.f0_u_hz == 0);
  CHECK(f.method == dsp::F0Method::forced);
}

TEST_CASE("lock: a channel with no periodic component is an AnalysisError") {
  std::vector<double> constant(500, 1.5);
  CHECK_THROWS_WITH_AS(dsp::estimate_fundamental(constant, 1000),
                       "no periodic component: every sample equals 1.5 (dc only)", AnalysisError);
  const auto noise = synth(4096, 1000, 0, 1, 0, {}, 1.0, 7);
  CHECK_THROWS_AS(dsp::estimate_fundamental(noise, 1000), AnalysisError);
}

TEST_CASE("lock: invalid options name the field, value and constraint") {
  dsp::LockOptions o;
  CHECK_NOTHROW(dsp::validate(o));  // the defaults are valid
  o.max_harmonic = -1;
  CHECK_THROWS_WITH_AS(dsp::validate(o),
                       "invalid option: max_harmonic = -1 (must be between 0 (automatic) and 2000 (fit time grows as "
                       "H³; dsp/period_lock.hpp))",
                       OptionError);
  o = {};
  o.f0_hz = -2;
  CHECK_THROWS_WITH_AS(dsp::validate(o), "invalid option: f0_hz = -2 (must be >= 0; 0 = estimate)",
                       OptionError);
}

TEST_CASE("lock: resampling a band-limited record reproduces it on whole periods") {
  const double fs = 1000, f0 = 13.37, t0 = -0.05;
  const std::size_t n = 252;  // 3.37 periods; the partial period at the end is dropped
  const auto x = synth(n, fs, t0, f0, 0.25, kFiveTones);
  const int m = 64;
  const dsp::PeriodGrid g = dsp::resample_to_periods(x, fs, t0, f0, m);
  CHECK(g.periods == 3);
  CHECK(g.samples_per_period == m);
  CHECK(g.start_s == t0);  // the grid starts at the first sample
  REQUIRE(g.samples.size() == 3u * 64u);
  double worst = 0;
  for (std::size_t i = 0; i < g.samples.size(); ++i) {
    const double t = g.start_s + static_cast<double>(i) / (m * f0);
    worst = std::max(worst, std::abs(g.samples[i] - synth(1, 1, t, f0, 0.25, kFiveTones)[0]));
  }
  // Model part exact, residual ~1e-15: agreement to rounding (1e-12 of a unit amplitude).
  CHECK(worst < 1e-12);
}

TEST_CASE("lock: per-period spectra give each harmonic's phasor at the file's origin") {
  const double fs = 1000, f0 = 13.37, t0 = 2.5;
  const auto x = synth(2000, fs, t0, f0, 0.25, kFiveTones);
  const dsp::PeriodGrid g = dsp::resample_to_periods(x, fs, t0, f0, 80);
  const dsp::PeriodSpectra s = dsp::period_spectra(g, 10);
  CHECK(s.periods == 26);  // ⌊2000·13.37/1000⌋ = 26
  REQUIRE(s.per_period.size() == 26u);
  CHECK(std::abs(s.mean[0] - 0.25) < 1e-12);
  for (const auto& tone : kFiveTones) {
    const auto expected = std::polar(tone.amplitude, tone.phase_deg * pi / 180);
    CHECK(std::abs(s.mean[static_cast<std::size_t>(tone.n)] - expected) < 1e-11);
    CHECK(std::abs(s.per_period[25][static_cast<std::size_t>(tone.n)] - expected) < 1e-11);
  }
  CHECK(std::abs(s.mean[4]) < 1e-11);
}

TEST_CASE("lock: per-period and noise-bin variances match white noise of known level") {
  // White noise σ² on fs/f0 samples per period: per-period phasor variance E|ΔX|² = 4σ²f0/fs;
  // averaged over P periods, 4σ²f0/(P·fs) (textbook DFT of white noise: var = Nσ² per bin,
  // scaled by (2/N)²).
  const double fs = 1000, f0 = 10.3, sigma = 0.1;
  const auto x = synth(40000, fs, 0, f0, 0, {{1, 1.0, 20}, {3, 0.2, 0}}, sigma, 42);
  const dsp::PeriodGrid g = dsp::resample_to_periods(x, fs, 0, f0, 128);
  const dsp::PeriodSpectra s = dsp::period_spectra(g, 10);
  const int p = s.periods;
  const double expected_avg = 4 * sigma * sigma * f0 / (p * fs);
  // Pooled per-period variance over harmonics 1…10 (2·10·(P−1) ≈ 8000 dof: ±5 % is 3σ).
  double pooled = 0;
  for (int k = 1; k <= 10; ++k) {
    double v = 0;
    for (int q = 0; q < p; ++q)
      v += std::norm(s.per_period[static_cast<std::size_t>(q)][static_cast<std::size_t>(k)] -
                     s.mean[static_cast<std::size_t>(k)]);
    pooled += v / (p - 1) / 10;
  }
  constexpr double kPooledTol = 0.05;
  CHECK(std::abs(pooled / (expected_avg * p) - 1) < kPooledTol);
  // Noise bins: ≥ 32 complex bins per harmonic (≥ 64 dof); the mean over 10 harmonics.
  double nb = 0;
  for (int k = 1; k <= 10; ++k) nb += s.noise_bin_variance[static_cast<std::size_t>(k)] / 10;
  CHECK(s.noise_bin_dof >= 64);
  constexpr double kNoiseBinTol = 0.1;  // the 10 windows overlap: ≳ 300 distinct bins, 3σ ≈ 0.1
  CHECK(std::abs(nb / expected_avg - 1) < kNoiseBinTol);
}

TEST_CASE("lock: two channels of one capture share the grid exactly") {
  const double fs = 5000, f0 = 49.7;
  const auto a = synth(3000, fs, 0, f0, 0, {{1, 1, 0}}, 0.01, 1);
  const auto b = synth(3000, fs, 0, f0, 0, {{1, 0.5, 45}}, 0.01, 2);
  const auto ga = dsp::resample_to_periods(a, fs, 0, f0, 128);
  const auto gb = dsp::resample_to_periods(b, fs, 0, f0, 128);
  CHECK(ga.periods == gb.periods);
  CHECK(ga.start_s == gb.start_s);
  CHECK(ga.f0_hz == gb.f0_hz);
  CHECK(ga.samples.size() == gb.samples.size());
}

TEST_CASE("lock: a coherent capture is resampled onto its own samples") {
  const double fs = 6400, f0 = 100;  // exactly 64 samples per period
  CHECK(dsp::default_samples_per_period(fs, f0, 10) == 64);
  const auto x = synth(640, fs, 0, f0, 0, {{1, 1, 10}, {2, 0.1, 0}}, 0.05, 3);
  const auto g = dsp::resample_to_periods(x, fs, 0, f0, 64);
  REQUIRE(g.periods == 10);
  double worst = 0;
  for (std::size_t i = 0; i < x.size(); ++i) worst = std::max(worst, std::abs(g.samples[i] - x[i]));
  CHECK(worst < 1e-12);
}

TEST_CASE("lock: a multisine whose strongest line is a high harmonic locks onto its period") {
  // Lines 3…20 of 25 Hz with equal amplitudes and Schroeder phases φ_k = −π·k(k−1)/K (Schroeder
  // 1970, low crest factor); no line at 25 Hz itself. The period is 1/25 s: the comb of the
  // spectrum's lines (all multiples of 25 Hz) gives it, whichever line is strongest.
  const double fs = 2000, f0 = 25.0;
  std::vector<Tone> tones;
  for (int k = 3; k <= 20; ++k) tones.push_back({k, 0.1, -180.0 * k * (k - 1) / 18.0});
  const auto x = synth(1600, fs, 0, f0, 0, tones, 1e-4, 21);  // 20 periods
  const dsp::Fundamental f = dsp::estimate_fundamental(x, fs);
  CHECK(std::abs(f.f0_hz / f0 - 1) < 1e-6);
}

TEST_CASE("lock: a flat multisine over a few periods locks onto its period, not its strongest line") {
  // Harmonics 1…12 of 100 Hz, equal amplitudes, Schroeder phases (Schroeder 1970), 40 dB SNR
  // per line. Below 24 periods the spectral comb does not apply (coarse_frequency) and the
  // strongest leaking line used to win (200 or 300 Hz at 2.3 and 3.7 periods); the BIC test
  // of sub-multiples (sub_multiple_fundamental) must restore 100 Hz at every length.
  const double fs = 10000, f0 = 100;
  std::vector<Tone> tones;
  for (int k = 1; k <= 12; ++k) tones.push_back({k, 0.1, -180.0 * k * (k - 1) / 12.0});
  for (double periods : {2.3, 3.7, 6.4, 10.3, 16.6, 23.5}) {
    CAPTURE(periods);
    const auto n = static_cast<std::size_t>(periods * fs / f0);
    const auto x = synth(n, fs, 0.37e-3, f0, 0.01, tones, 1e-3, 5);
    const dsp::Fundamental f = dsp::estimate_fundamental(x, fs);
    CHECK(std::abs(f.f0_hz - f0) < 5 * f.f0_u_hz + 1e-9);
    CHECK(std::abs(f.f0_hz / f0 - 1) < 1e-4);
  }
}

TEST_CASE("lock: the sub-multiple test keeps the true period when no sub-harmonic is there") {
  // Controls for the sub-multiple test: a distorted sine with a slow drift (unmodelled, 1e-3 of the
  // amplitude per period) over 3.1 periods at 80 dB SNR, and a balanced full-wave rectified sine
  // |sin ωt| over 3.3 line periods, whose period is half the line's (handbook series: even
  // harmonics of the line only). Neither may be read as a longer period.
  const double fs = 20000, f0 = 230;
  const auto n = static_cast<std::size_t>(3.1 * fs / f0);
  auto x = synth(n, fs, 0, f0, 0, {{1, 1.0, 20}, {2, 0.05, 0}, {3, 0.02, 90}}, 1e-4, 9);
  for (std::size_t k = 0; k < n; ++k) x[k] += 1e-3 * f0 * static_cast<double>(k) / fs;
  CHECK(std::abs(dsp::estimate_fundamental(x, fs).f0_hz / f0 - 1) < 1e-3);
  // A chirp, f0 rising 0.5 % over 20 periods at 60 dB SNR: its smeared line is not a longer period.
  const auto nc = static_cast<std::size_t>(20 * fs / f0);
  const double len = static_cast<double>(nc) / fs;
  std::vector<double> c(nc);
  std::mt19937_64 rng(4);
  std::normal_distribution<double> noise(0.0, 1e-3);
  for (std::size_t k = 0; k < nc; ++k) {
    const double t = static_cast<double>(k) / fs;
    c[k] = std::cos(2 * pi * f0 * (t + 0.005 * t * t / (2 * len))) + noise(rng);
  }
  CHECK(std::abs(dsp::estimate_fundamental(c, fs).f0_hz / f0 - 1) < 5e-3);

  const double f_line = 50.3;
  const auto m = static_cast<std::size_t>(3.3 * fs / f_line);
  std::vector<double> r(m);
  for (std::size_t k = 0; k < m; ++k) r[k] = std::abs(std::sin(2 * pi * f_line * static_cast<double>(k) / fs));
  CHECK(std::abs(dsp::estimate_fundamental(r, fs).f0_hz / (2 * f_line) - 1) < 1e-4);
  // With a 5 % unbalance the line frequency is there, and short records find it too now.
  for (std::size_t k = 0; k < m; ++k) r[k] += 0.05 * std::sin(2 * pi * f_line * static_cast<double>(k) / fs);
  CHECK(std::abs(dsp::estimate_fundamental(r, fs).f0_hz / f_line - 1) < 1e-4);
}

TEST_CASE("lock: every instruction-set kernel gives the same fit") {
  // The streamed sums exist for AVX-512, AVX2+FMA and the x86-64 baseline; each must meet the
  // noise-free targets (FMA contraction changes rounding only).
  const double fs = 1000, f0 = 13.37, t0 = 0.123;
  const auto x = synth(252, fs, t0, f0, 0.25, kFiveTones);
  dsp::LockOptions opt;
  opt.max_harmonic = 8;
  int tried = 0;
  for (const char* isa : {"base", "avx2", "avx512"}) {
    if (!dsp::internal::force_kernel_for_testing(isa)) {
      MESSAGE("kernel " << isa << " not supported by this CPU: skipped");
      continue;
    }
    ++tried;
    const dsp::HarmonicFit fit = dsp::fit_harmonics(x, fs, t0, opt);
    INFO("kernel " << isa);
    CHECK(std::abs(fit.fundamental.f0_hz / f0 - 1) < kF0RelTol);
    for (const auto& tone : kFiveTones)
      CHECK(std::abs(std::abs(fit.phasor(tone.n)) / tone.amplitude - 1) < kAmplitudeRelTol);
    const auto r = dsp::fit_residual(x, fit);
    double worst = 0;
    for (double v : r) worst = std::max(worst, std::abs(v));
    CHECK(worst < 1e-12);
  }
  dsp::internal::force_kernel_for_testing("");
  CHECK(tried >= 1);
}

TEST_CASE("period lock: the f0 methods and harmonic rules have distinct codes, those docs/analyze-json.md lists") {
  const auto f0 = test::codes_of(dsp::F0Method::forced, [](dsp::F0Method m) { return code(m); });
  CHECK(f0 == std::vector<std::string>{"sine-fit", "forced"});
  CHECK(test::distinct(f0));
  test::check_documented(f0, "analyze-json.md", "| `f0_method` |", "\"", "\"");
  const auto rules = test::codes_of(dsp::HarmonicRule::fallback, [](dsp::HarmonicRule r) { return code(r); });
  CHECK(test::distinct(rules));
  test::check_documented(rules, "analyze-json.md", "| `harmonic_selection` |", "\"", "\"");
}
