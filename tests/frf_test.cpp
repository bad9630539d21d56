// FRF at the excited harmonics: values against circuit-theory closed forms (Fourier-series
// superposition through H), the errors-in-variables variance, Student-t intervals and their
// coverage, and the error messages. Spectra are built here by a direct DFT of synthesised
// periods, so these tests do not depend on the lock stage.
#include <doctest/doctest.h>

#include <cmath>
#include <complex>
#include <functional>
#include <numbers>
#include <random>
#include <vector>

#include "core/error.hpp"
#include "ident/frf.hpp"
#include "support/signals.hpp"
#include "support/code_table.hpp"

using namespace periodfit;
using cd = std::complex<double>;
constexpr double kPi = std::numbers::pi;

namespace {

/// Noise-free synthesis and the DFT agree to rounding: 1e-12 leaves room for M·H sums.
constexpr double kExactTolerance = 1e-12;
/// Noisy points must lie within 3 reported standard uncertainties (common practice: a 3σ
/// check fails a correct implementation with probability 0.3 % per point).
constexpr double kSigmaBound = 3.0;

/// Spectra of P·M samples by direct DFT: per-period phasors X_n = (2/M)·Σ x_k e^{−j2πnk/M}
/// (X_0 the mean), and, for P ≥ 2, noise bins: the mean |X_b|² of the full-record DFT (scaled
/// 2/(PM), so it is the variance of the averaged phasor) over the non-harmonic bins within
/// `half_width` bins of bin n·P.
dsp::PeriodSpectra spectra_of(const std::vector<double>& x, int m, int periods, int h, double f0,
                              int half_width = 6) {
  dsp::PeriodSpectra s;
  s.f0_hz = f0;
  s.periods = periods;
  s.samples_per_period = m;
  s.max_harmonic = h;
  const auto hs = std::size_t(h) + 1;
  s.per_period.assign(std::size_t(periods), std::vector<cd>(hs));
  s.mean.assign(hs, 0.0);
  for (int p = 0; p < periods; ++p)
    for (int n = 0; n <= h; ++n) {
      cd acc = 0;
      for (int k = 0; k < m; ++k)
        acc += x[std::size_t(p * m + k)] * std::polar(1.0, -2 * kPi * n * k / m);
      acc *= (n == 0 ? 1.0 : 2.0) / m;
      s.per_period[std::size_t(p)][std::size_t(n)] = acc;
      s.mean[std::size_t(n)] += acc / double(periods);
    }
  s.noise_bin_variance.assign(hs, 0.0);
  if (periods >= 2) {
    const int total = m * periods;
    int min_count = 1 << 30;
    for (int n = 1; n <= h; ++n) {
      double sum = 0;
      int count = 0;
      for (int b = n * periods - half_width; b <= n * periods + half_width; ++b) {
        if (b < 1 || b % periods == 0 || 2 * b >= total) continue;
        cd acc = 0;
        for (int i = 0; i < total; ++i)
          acc += x[std::size_t(i)] * std::polar(1.0, -2 * kPi * double(b) * i / total);
        sum += std::norm(acc * (2.0 / total));
        ++count;
      }
      s.noise_bin_variance[std::size_t(n)] = sum / count;
      min_count = std::min(min_count, count);
    }
    s.noise_bin_dof = 2 * min_count;
  }
  return s;
}

/// Output phasors Y_n = H(jnω0)·U_n: exact Fourier-series superposition through an LTI DUT.
std::vector<cd> through(const std::vector<cd>& u, double f0, const std::function<cd(double)>& h) {
  std::vector<cd> y(u.size());
  for (std::size_t n = 0; n < u.size(); ++n) y[n] = u[n] * h(2 * kPi * f0 * double(n));
  return y;
}

/// Square wave ±A, odd about t = 0: (4A/π)·Σ_{n odd} sin(nω0t)/n (handbook Fourier-series
/// table, e.g. Abramowitz & Stegun-style tables of standard waveforms). sin x = cos(x − 90°).
std::vector<cd> square_wave(double a, int h) {
  std::vector<cd> u(std::size_t(h) + 1, 0.0);
  for (int n = 1; n <= h; n += 2) u[std::size_t(n)] = std::polar(4 * a / (kPi * n), -kPi / 2);
  return u;
}

/// Half-wave rectified sine A·max(sin ω0t, 0) = A/π + (A/2)·sin ω0t − (2A/π)·Σ_k cos(2kω0t)/(4k²−1)
/// (handbook Fourier-series table of rectified waveforms).
std::vector<cd> half_wave_rectified(double a, int h) {
  std::vector<cd> u(std::size_t(h) + 1, 0.0);
  u[0] = a / kPi;
  u[1] = std::polar(a / 2, -kPi / 2);
  for (int k = 1; 2 * k <= h; ++k) u[std::size_t(2 * k)] = std::polar(2 * a / (kPi * (4.0 * k * k - 1)), kPi);
  return u;
}

constexpr double kF0 = 50;                    // Hz
const double kTau = 1 / (2 * kPi * kF0);      // RC chosen so that ω0·τ = 1
cd rc_lowpass(double w) { return 1.0 / cd(1, w * kTau); }  // standard circuit theory

}  // namespace

TEST_CASE("frf: RC low-pass under a square wave gives 0.7071 and -45 deg at w = 1/tau") {
  constexpr int kM = 64, kP = 8, kH = 25;
  std::mt19937_64 rng(1);
  const auto u = square_wave(1.0, kH);
  const auto x = test::harmonic_samples(u, {kM, kP}, {0, &rng});
  const auto y = test::harmonic_samples(through(u, kF0, rc_lowpass), {kM, kP}, {0, &rng});
  const auto frf = ident::compute_frf(spectra_of(x, kM, kP, kH, kF0), spectra_of(y, kM, kP, kH, kF0));
  // Square wave: only odd harmonics carry power (handbook Fourier-series table).
  REQUIRE(frf.points.size() == 13);
  CHECK(frf.unexcited == std::vector<int>{2, 4, 6, 8, 10, 12, 14, 16, 18, 20, 22, 24});
  CHECK(frf.method == ident::FrfNoiseMethod::per_period_covariance);
  CHECK(frf.dof == kP - 1);
  const auto& first = frf.points[0];
  CHECK(first.n == 1);
  CHECK(first.freq_hz == doctest::Approx(kF0));
  // Standard circuit theory: |H(j/τ)| = 1/√2 = 0.70710678, ∠H = −45°.
  CHECK(first.mag == doctest::Approx(0.70710678118654752).epsilon(kExactTolerance));
  CHECK(first.phase_deg == doctest::Approx(-45.0).epsilon(kExactTolerance));
  CHECK(first.mag_db == doctest::Approx(-3.0102999566398).epsilon(kExactTolerance));
  for (const auto& p : frf.points) {
    const cd expected = rc_lowpass(2 * kPi * p.freq_hz);  // 1/(1 + jnω0τ)
    CHECK(std::abs(p.h - expected) < kExactTolerance);
    CHECK(p.n % 2 == 1);
  }
}

TEST_CASE("frf: RC low-pass under a half-wave rectified sine, noise on both channels") {
  constexpr int kM = 64, kP = 16, kH = 20;
  constexpr double kSigma = 1e-4;  // per-sample noise std on each channel
  std::mt19937_64 rng(2);
  const auto u = half_wave_rectified(1.0, kH);
  const auto x = test::harmonic_samples(u, {kM, kP}, {kSigma, &rng});
  const auto y = test::harmonic_samples(through(u, kF0, rc_lowpass), {kM, kP}, {kSigma, &rng});
  const auto frf = ident::compute_frf(spectra_of(x, kM, kP, kH, kF0), spectra_of(y, kM, kP, kH, kF0));
  // Half-wave rectified sine: fundamental and even harmonics only (handbook table).
  std::vector<int> expected_n{1};
  for (int n = 2; n <= kH; n += 2) expected_n.push_back(n);
  REQUIRE(frf.points.size() == expected_n.size());
  double ratio_sum = 0;
  for (std::size_t i = 0; i < frf.points.size(); ++i) {
    const auto& p = frf.points[i];
    CHECK(p.n == expected_n[i]);
    const cd h0 = rc_lowpass(2 * kPi * p.freq_hz);  // standard circuit theory
    CHECK(std::abs(p.mag - std::abs(h0)) <= kSigmaBound * p.mag_u);
    CHECK(std::abs(p.phase_deg - std::arg(h0) * 180 / kPi) <= kSigmaBound * p.phase_u_deg);
    // White noise of std σ per sample gives E|ΔX_n|² = 4σ²/(M·P) for the averaged phasor
    // (Parseval for the 2/M-scaled DFT), so σ²_H = (σ²_Y + |H|²σ²_U)/|U|² with both = 4σ²/(MP).
    const double var_x = 4 * kSigma * kSigma / (kM * kP);
    const double expected_var = (var_x + std::norm(h0) * var_x) / std::norm(u[std::size_t(p.n)]);
    ratio_sum += p.var_h / expected_var;
  }
  // The mean of K variance ratios, each with 2(P−1) dof, has relative std 1/sqrt(K(P−1)).
  const double k = double(frf.points.size());
  const double kRatioTolerance = 4 / std::sqrt(k * (kP - 1));  // 4σ of the sample mean
  CHECK(ratio_sum / k == doctest::Approx(1.0).epsilon(kRatioTolerance));
}

TEST_CASE("frf: variance is the errors-in-variables first-order formula, with the U-Y covariance") {
  // Hand-made per-period phasors at one harmonic: noise on U and independent noise on Y.
  dsp::PeriodSpectra u, y;
  for (auto* s : {&u, &y}) {
    s->f0_hz = 10;
    s->periods = 5;
    s->samples_per_period = 16;
    s->max_harmonic = 1;
    s->per_period.assign(5, std::vector<cd>(2, 0.0));
    s->mean.assign(2, 0.0);
  }
  const cd du[5] = {{0.01, 0}, {-0.02, 0.01}, {0.005, -0.015}, {0.0, 0.02}, {0.005, -0.015}};
  const cd dy[5] = {{0.0, 0.01}, {0.01, 0.0}, {-0.02, 0.005}, {0.015, -0.01}, {-0.005, -0.005}};
  const cd u0(1.0, 0.5), y0(0.3, -0.4);
  for (int p = 0; p < 5; ++p) {
    u.per_period[std::size_t(p)][1] = u0 + du[p];
    y.per_period[std::size_t(p)][1] = y0 + dy[p];
  }
  for (auto* s : {&u, &y})
    for (const auto& p : s->per_period) s->mean[1] += p[1] / 5.0;
  const auto frf = ident::compute_frf(u, y);
  REQUIRE(frf.points.size() == 1);
  // Pintelon & Schoukens (2012) §2.4: σ²_H = |H|²(σ²_Y/|Y|² + σ²_U/|U|² − 2Re(σ²_YU/(Y Ū)))/P.
  const cd um = u.mean[1], ym = y.mean[1], h = ym / um;
  double s_u = 0, s_y = 0;
  cd s_yu = 0;
  for (int p = 0; p < 5; ++p) {
    const cd a = u.per_period[std::size_t(p)][1] - um, b = y.per_period[std::size_t(p)][1] - ym;
    s_u += std::norm(a) / 4;
    s_y += std::norm(b) / 4;
    s_yu += b * std::conj(a) / 4.0;
  }
  const double expected =
      std::norm(h) * (s_y / std::norm(ym) + s_u / std::norm(um) - 2 * (s_yu / (ym * std::conj(um))).real()) / 5;
  CHECK(frf.points[0].var_h == doctest::Approx(expected).epsilon(kExactTolerance));
  CHECK(frf.dof == 4);
  // Student-t table (e.g. NIST/SEMATECH e-Handbook §1.3.6.7.2): t_{0.975, 4} = 2.776.
  CHECK(frf.coverage_factor == doctest::Approx(2.776).epsilon(5e-4));  // table gives 4 digits
  CHECK(frf.quantile == "student-t");
}

TEST_CASE("frf: generator noise that passes through the DUT cancels in Y/U (correlated U-Y)") {
  // Y_p = H0·U_p exactly: the input noise is real excitation, not measurement noise, so the
  // ratio of averages has no error; a formula without the −2Re(σ²_YU…) term would report
  // 2|H|²σ²_U/|U|² (Pintelon & Schoukens 2012, §2.4, the role of the cross-covariance).
  constexpr int kM = 32, kP = 8, kH = 5;
  std::mt19937_64 rng(3);
  std::vector<cd> u(kH + 1, 0.0);
  u[1] = 1.0;
  u[3] = cd(0, 0.5);
  const auto x = test::harmonic_samples(u, {kM, kP}, {0.05, &rng});
  std::vector<double> y(x.size());
  for (std::size_t i = 0; i < x.size(); ++i) y[i] = -2 * x[i];  // H0 = −2 at every frequency
  const auto frf = ident::compute_frf(spectra_of(x, kM, kP, kH, kF0), spectra_of(y, kM, kP, kH, kF0));
  REQUIRE(frf.points.size() == 2);
  // The largest phasors (the excited lines here) set each record's rounding level.
  double max_u = 0, max_y = 0;
  for (const auto& p : frf.points) {
    max_u = std::max(max_u, std::abs(p.u));
    max_y = std::max(max_y, std::abs(p.y));
  }
  for (const auto& p : frf.points) {
    CHECK(std::abs(p.h - cd(-2, 0)) < kExactTolerance);
    // Rounding only: the variance sits at the numerical floor, the larger of
    // (kNumericalFloorRelative·|H|)² and both records' rounding carried into Y/U (frf.hpp).
    const double k2 = std::pow(ident::kNumericalFloorRelative, 2);
    const double floor = std::max(k2 * p.mag * p.mag,
                                  k2 * (max_y * max_y + p.mag * p.mag * max_u * max_u) / std::norm(p.u));
    CHECK(p.var_h <= floor * (1 + 1e-9));
  }
  CHECK(frf.flags == std::vector<Flag>{Flag::numerical_floor});
}

TEST_CASE("frf: 95 % intervals of |H| and phase cover with Student-t at P = 5") {
  // Monte Carlo: 300 records × 4 harmonics. Each interval must hold the true H(jω) (standard
  // circuit theory RC) 95 % of the time; with the normal quantile 1.96 instead of t_{0.975,4}
  // = 2.776 the coverage would be about 88 %, so this check tells the two apart.
  constexpr int kM = 32, kP = 5, kH = 7, kRuns = 300;
  constexpr double kSigma = 0.02;
  std::mt19937_64 rng(4);
  std::vector<cd> u(kH + 1, 0.0);
  for (int n : {1, 3, 5, 7}) u[std::size_t(n)] = std::polar(1.0, 0.3 * n);
  const auto y0 = through(u, kF0, rc_lowpass);
  int trials = 0, mag_in = 0, phase_in = 0;
  for (int run = 0; run < kRuns; ++run) {
    const auto x = test::harmonic_samples(u, {kM, kP}, {kSigma, &rng});
    const auto y = test::harmonic_samples(y0, {kM, kP}, {kSigma, &rng});
    const auto frf = ident::compute_frf(spectra_of(x, kM, kP, kH, kF0, 0), spectra_of(y, kM, kP, kH, kF0, 0));
    for (const auto& p : frf.points) {
      const cd h0 = rc_lowpass(2 * kPi * p.freq_hz);
      ++trials;
      mag_in += std::abs(h0) >= p.mag_lo && std::abs(h0) <= p.mag_hi;
      const double ph = std::arg(h0) * 180 / kPi;
      phase_in += ph >= p.phase_lo_deg && ph <= p.phase_hi_deg;
    }
  }
  REQUIRE(trials == 4 * kRuns);
  // Binomial std of a 95 % proportion over 1200 trials is 0.63 %; ±2.5 % is 4σ.
  constexpr double kCoverageTolerance = 0.025;
  CHECK(double(mag_in) / trials == doctest::Approx(0.95).epsilon(kCoverageTolerance / 0.95));
  CHECK(double(phase_in) / trials == doctest::Approx(0.95).epsilon(kCoverageTolerance / 0.95));
}

TEST_CASE("frf: few periods use the neighbouring noise bins and their dof") {
  constexpr int kM = 64, kP = 2, kH = 9;
  constexpr double kSigma = 1e-3;
  std::mt19937_64 rng(5);
  const auto u = square_wave(1.0, kH);
  const auto x = test::harmonic_samples(u, {kM, kP}, {kSigma, &rng});
  const auto y = test::harmonic_samples(through(u, kF0, rc_lowpass), {kM, kP}, {kSigma, &rng});
  const auto su = spectra_of(x, kM, kP, kH, kF0), sy = spectra_of(y, kM, kP, kH, kF0);
  const auto frf = ident::compute_frf(su, sy);
  CHECK(frf.method == ident::FrfNoiseMethod::noise_bins);
  CHECK(frf.dof == su.noise_bin_dof);
  CHECK(frf.flags == std::vector<Flag>{Flag::few_periods});
  REQUIRE(frf.points.size() == 5);
  for (const auto& p : frf.points) {
    const auto i = std::size_t(p.n);
    // Uncorrelated noise: σ²_H = (σ²_Y + |H|²σ²_U)/|U|² (Pintelon & Schoukens 2012, §2.4).
    const double expected = (sy.noise_bin_variance[i] + std::norm(p.h) * su.noise_bin_variance[i]) / std::norm(p.u);
    CHECK(p.var_h == doctest::Approx(expected).epsilon(kExactTolerance));
    CHECK(p.var_re == doctest::Approx(p.var_im));
    const cd h0 = rc_lowpass(2 * kPi * p.freq_hz);  // standard circuit theory
    CHECK(std::abs(p.mag - std::abs(h0)) <= kSigmaBound * p.mag_u);
  }
}

TEST_CASE("frf: min_snr_db decides which harmonics count as excited") {
  // One period, hand-set noise bins: harmonic 2 is 15 dB above its floor, harmonic 1 is 40 dB.
  dsp::PeriodSpectra u;
  u.f0_hz = 1;
  u.periods = 1;
  u.samples_per_period = 8;
  u.max_harmonic = 3;
  u.mean = {0.0, 1.0, std::sqrt(std::pow(10.0, 1.5)) * 1e-2, 0.0};
  u.per_period = {u.mean};
  u.noise_bin_variance = {1e-4, 1e-4, 1e-4, 1e-4};
  u.noise_bin_dof = 10;
  dsp::PeriodSpectra y = u;
  const auto strict = ident::compute_frf(u, y);  // default 20 dB
  REQUIRE(strict.points.size() == 1);
  CHECK(strict.points[0].input_snr_db == doctest::Approx(40.0));
  CHECK(strict.unexcited == std::vector<int>{2, 3});
  ident::FrfOptions loose;
  loose.min_snr_db = 10;
  const auto relaxed = ident::compute_frf(u, y, loose);
  REQUIRE(relaxed.points.size() == 2);
  CHECK(relaxed.points[1].input_snr_db == doctest::Approx(15.0));
}

TEST_CASE("frf: deskew rotates the output phasors by e^{+j n w0 skew}") {
  // The output path lags by d: the recorded output is y(t − d), Y_rec = Y·e^{−jnω0d}.
  constexpr int kM = 64, kP = 4, kH = 9;
  constexpr double kSkew = 1.3e-4;  // s
  std::mt19937_64 rng(6);
  const auto u = square_wave(1.0, kH);
  const auto y_true = through(u, kF0, rc_lowpass);
  const auto y_rec = through(y_true, kF0, [](double w) { return std::polar(1.0, -w * kSkew); });
  const auto su = spectra_of(test::harmonic_samples(u, {kM, kP}, {0, &rng}), kM, kP, kH, kF0);
  const auto sy = spectra_of(test::harmonic_samples(y_rec, {kM, kP}, {0, &rng}), kM, kP, kH, kF0);
  ident::FrfOptions o;
  o.skew_s = kSkew;
  const auto frf = ident::compute_frf(su, sy, o);
  for (const auto& p : frf.points) CHECK(std::abs(p.h - rc_lowpass(2 * kPi * p.freq_hz)) < 1e-10);
  const auto raw = ident::compute_frf(su, sy);
  CHECK(std::abs(raw.points[0].h - rc_lowpass(2 * kPi * kF0)) > 1e-3);
}

TEST_CASE("frf: options are validated and bad spectra are errors with whole messages") {
  CHECK_NOTHROW(ident::FrfOptions{}.validate());
  ident::FrfOptions bad;
  bad.min_snr_db = -1;
  CHECK_THROWS_WITH_AS(bad.validate(), "invalid option: min_snr_db = -1 (must be finite and >= 0)",
                       OptionError);
  bad = {};
  bad.confidence = 1;
  CHECK_THROWS_WITH_AS(bad.validate(), "invalid option: confidence = 1 (must be in (0, 1))", OptionError);

  std::mt19937_64 rng(7);
  const auto u = square_wave(1.0, 5);
  const auto su = spectra_of(test::harmonic_samples(u, {16, 4}, {0, &rng}), 16, 4, 5, kF0);
  auto other = spectra_of(test::harmonic_samples(u, {16, 5}, {0, &rng}), 16, 5, 5, kF0);
  CHECK_THROWS_WITH_AS(ident::compute_frf(su, other),
                       "FRF: input and output are not on the same period grid (f0 50 vs 50 Hz, 4 vs "
                       "5 periods, 5 vs 5 harmonics)",
                       AnalysisError);
  const auto flat = spectra_of(std::vector<double>(64, 0.25), 16, 4, 5, kF0);
  CHECK_THROWS_WITH_AS(ident::compute_frf(flat, su),
                       "FRF: no excited harmonic: no input harmonic 1…5 exceeds the input noise "
                       "floor by 20 dB",
                       AnalysisError);
  const auto one = spectra_of(test::harmonic_samples(u, {16, 1}, {0, &rng}), 16, 1, 5, kF0);
  CHECK_THROWS_WITH_AS(ident::compute_frf(one, one),
                       "FRF: no noise estimate: 1 period(s) and no noise bins between the "
                       "harmonics; at least 4 whole periods are needed",
                       AnalysisError);
}

TEST_CASE("frf: coverage factor is Student-t for few dof and normal for many") {
  // Student-t table (NIST/SEMATECH e-Handbook §1.3.6.7.2): t_{0.975,1} = 12.706, t_{0.975,10} = 2.228.
  CHECK(ident::coverage_factor(0.95, 1) == doctest::Approx(12.706).epsilon(1e-4));
  CHECK(ident::coverage_factor(0.95, 10) == doctest::Approx(2.228).epsilon(2e-4));
  // Normal table: z_{0.975} = 1.959964.
  CHECK(ident::coverage_factor(0.95, 100000) == doctest::Approx(1.959964).epsilon(1e-6));
}

TEST_CASE("frf: the noise methods have distinct codes, those docs/frf-json.md lists") {
  const auto c = test::codes_of(ident::FrfNoiseMethod::noise_bins, [](ident::FrfNoiseMethod m) { return code(m); });
  CHECK(test::distinct(c));
  test::check_documented(c, "frf-json.md", "| `frf_method` |", "\"", "\"");
}
