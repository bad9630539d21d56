// Linearity check: output lines at harmonics the input leaves out. An odd multisine with two
// odd harmonics skipped, through a second-order low-pass and then a static nonlinearity,
// separates even-order (x²) from odd-order (x³) distortion. Spectra by direct DFT here, so the
// test does not depend on the lock stage.
#include <doctest/doctest.h>

#include <cmath>
#include <complex>
#include <numbers>
#include <random>
#include <vector>

#include "core/error.hpp"
#include "ident/frf.hpp"
#include "ident/linearity.hpp"
#include "support/signals.hpp"

using namespace periodfit;
using cd = std::complex<double>;
constexpr double kPi = std::numbers::pi;

namespace {

constexpr int kM = 128;   // samples per period: x³ of harmonics ≤ 15 reaches 45 < M/2, no aliasing
constexpr int kP = 8;     // periods
constexpr int kH = 20;    // harmonics examined
constexpr double kF0 = 100;
constexpr double kSigma = 1e-4;  // per-sample noise std on each channel
/// Lines are compared with the closed form within 1 %: noise is 70 dB below the lines.
constexpr double kLineTolerance = 0.01;

dsp::PeriodSpectra spectra_of(const std::vector<double>& x) {
  dsp::PeriodSpectra s;
  s.f0_hz = kF0;
  s.periods = kP;
  s.samples_per_period = kM;
  s.max_harmonic = kH;
  s.per_period.assign(kP, std::vector<cd>(kH + 1));
  s.mean.assign(kH + 1, 0.0);
  for (int p = 0; p < kP; ++p)
    for (int n = 0; n <= kH; ++n) {
      cd acc = 0;
      for (int k = 0; k < kM; ++k) acc += x[std::size_t(p * kM + k)] * std::polar(1.0, -2 * kPi * n * k / kM);
      acc *= (n == 0 ? 1.0 : 2.0) / kM;
      s.per_period[std::size_t(p)][std::size_t(n)] = acc;
      s.mean[std::size_t(n)] += acc / double(kP);
    }
  return s;
}

/// Odd multisine on 1, 3, 7, 9, 13, 15 (5 and 11 skipped as detection lines for odd-order
/// distortion), Schroeder-like phases n(n−1)π/N (common practice), 0.3 peak per harmonic.
std::vector<cd> odd_multisine() {
  std::vector<cd> u(kH + 1, 0.0);
  for (int n : {1, 3, 7, 9, 13, 15}) u[std::size_t(n)] = std::polar(0.3, n * (n - 1) * kPi / 16);
  return u;
}

/// Second-order low-pass ω_n²/(s² + 2ζω_n s + ω_n²), ω_n = 2π·500 Hz, ζ = 0.5 (textbook form).
cd lowpass(double w) {
  const double wn = 2 * kPi * 500, zeta = 0.5;
  const cd s(0, w);
  return wn * wn / (s * s + 2 * zeta * wn * s + wn * wn);
}

/// The phasors on kP periods of kM samples through the static nonlinearity v + a2·v² + a3·v³,
/// plus white noise of std `sigma` (support/signals.hpp).
std::vector<double> waveform(const std::vector<cd>& phasors, std::mt19937_64& rng, double sigma,
                             double a2 = 0, double a3 = 0) {
  return test::harmonic_samples(phasors, {kM, kP}, {sigma, &rng},
                                [a2, a3](double v) { return v + a2 * v * v + a3 * v * v * v; });
}

/// Peak phasor of v² at harmonic k for v = Σ Re(V_n e^{jnθ}): two-sided c_{±n} = V_n/2, V_n*/2,
/// (v²)_k = 2·Σ_m c_m c_{k−m} (the product-to-sum rule cos a·cos b = ½[cos(a−b) + cos(a+b)]).
cd square_line(const std::vector<cd>& v, int k) {
  const auto c = [&](int n) -> cd {
    if (n == 0 || std::abs(n) >= int(v.size())) return 0.0;
    return n > 0 ? v[std::size_t(n)] / 2.0 : std::conj(v[std::size_t(-n)]) / 2.0;
  };
  cd d = 0;
  for (int m = -int(v.size()); m <= int(v.size()); ++m) d += c(m) * c(k - m);
  return 2.0 * d;
}

std::vector<cd> through_lowpass(const std::vector<cd>& u) {
  std::vector<cd> v(u.size());
  for (std::size_t n = 0; n < u.size(); ++n) v[n] = u[n] * lowpass(2 * kPi * kF0 * double(n));
  return v;
}

}  // namespace

TEST_CASE("linearity: a linear DUT is not flagged") {
  std::mt19937_64 rng(11);
  const auto u = odd_multisine();
  const auto su = spectra_of(waveform(u, rng, kSigma));
  const auto sy = spectra_of(waveform(through_lowpass(u), rng, kSigma));
  const auto frf = ident::compute_frf(su, sy);
  const auto lin = ident::check_linearity(frf, sy);
  CHECK(lin.status == LinearityStatus::linear);
  CHECK_FALSE(lin.nonlinear);
  CHECK(lin.tested == kH - 6);
  CHECK(lin.dof == 2 * (kP - 1));
  CHECK(lin.odd.empty());
  CHECK(lin.even.empty());
  CHECK_FALSE(lin.level_db.has_value());
}

TEST_CASE("linearity: a noise-free linear DUT is not flagged (rounding is not distortion)") {
  std::mt19937_64 rng(12);
  const auto u = odd_multisine();
  const auto su = spectra_of(waveform(u, rng, 0));
  const auto sy = spectra_of(waveform(through_lowpass(u), rng, 0));
  const auto lin = ident::check_linearity(ident::compute_frf(su, sy), sy);
  CHECK(lin.status == LinearityStatus::linear);
}

TEST_CASE("linearity: an input exciting every harmonic leaves the test untested, and says why") {
  std::mt19937_64 rng(13);
  std::vector<cd> u(kH + 1, 0.0);
  for (int n = 1; n <= kH; ++n) u[std::size_t(n)] = std::polar(0.3, n * (n - 1) * kPi / kH);
  const auto su = spectra_of(waveform(u, rng, kSigma));
  const auto sy = spectra_of(waveform(through_lowpass(u), rng, kSigma));
  const auto frf = ident::compute_frf(su, sy);
  REQUIRE(frf.unexcited.empty());
  const auto lin = ident::check_linearity(frf, sy);
  CHECK(lin.status == LinearityStatus::untested);
  CHECK(lin.reason ==
        "the input excites every harmonic up to 20, so none is left free to show distortion; an input with "
        "unexcited harmonics (e.g. a multisine with gaps from periodfit excite) allows the test");
}

TEST_CASE("linearity: y = v + 0.05 v^2 behind a low-pass raises nonlinear, even lines only") {
  std::mt19937_64 rng(13);
  const auto u = odd_multisine();
  const auto v = through_lowpass(u);
  const auto su = spectra_of(waveform(u, rng, kSigma));
  const auto sy = spectra_of(waveform(v, rng, kSigma, 0.05));
  const auto frf = ident::compute_frf(su, sy);
  const auto lin = ident::check_linearity(frf, sy);
  CHECK(lin.status == LinearityStatus::nonlinear);
  CHECK(lin.nonlinear);
  // x² of an odd multisine lands on even harmonics only (product-to-sum rule): the skipped odd
  // harmonics 5 and 11 stay clean.
  CHECK(lin.odd.empty());
  REQUIRE(!lin.even.empty());
  double power = 0;
  for (const auto& line : lin.even) {
    CHECK(line.n % 2 == 0);
    const double expected = 0.05 * std::abs(square_line(v, line.n));  // closed form above
    CHECK(line.amplitude == doctest::Approx(expected).epsilon(kLineTolerance));
    CHECK(line.freq_hz == doctest::Approx(kF0 * line.n));
    power += line.amplitude * line.amplitude;
  }
  // Every even harmonic ≤ 20 with a closed-form line well above the noise is detected.
  for (int k = 2; k <= kH; k += 2) {
    const double expected = 0.05 * std::abs(square_line(v, k));
    if (expected < 1e-4) continue;  // within ~20 dB of the noise floor: detection not guaranteed
    bool found = false;
    for (const auto& line : lin.even) found |= line.n == k;
    CHECK_MESSAGE(found, "even harmonic ", k, " not detected");
  }
  double excited = 0;
  for (const auto& p : frf.points) excited += std::norm(p.y);
  REQUIRE(lin.level_db.has_value());
  CHECK(*lin.level_db == doctest::Approx(10 * std::log10(power / excited)));
  CHECK(lin.even_level_db == lin.level_db);
  CHECK_FALSE(lin.odd_level_db.has_value());
}

TEST_CASE("linearity: y = v + 0.05 v^3 shows at the skipped odd harmonics 5 and 11") {
  std::mt19937_64 rng(14);
  const auto u = odd_multisine();
  const auto su = spectra_of(waveform(u, rng, kSigma));
  const auto sy = spectra_of(waveform(through_lowpass(u), rng, kSigma, 0, 0.05));
  const auto lin = ident::check_linearity(ident::compute_frf(su, sy), sy);
  CHECK(lin.nonlinear);
  // x³ of an odd multisine has only odd harmonics (a sum of three odd numbers is odd).
  CHECK(lin.even.empty());
  std::vector<int> odd_n;
  for (const auto& line : lin.odd) odd_n.push_back(line.n);
  // Unexcited odd harmonics ≤ 20: 5, 11, 17, 19; the cubic products reach all of them.
  CHECK(odd_n == std::vector<int>{5, 11, 17, 19});
  REQUIRE(lin.odd_level_db.has_value());
  CHECK(lin.level_db == lin.odd_level_db);
}

TEST_CASE("linearity: options are validated") {
  CHECK_NOTHROW(ident::LinearityOptions{}.validate());
  ident::LinearityOptions o;
  o.false_alarm = 0;
  CHECK_THROWS_WITH_AS(o.validate(), "invalid option: false_alarm = 0 (must be in (0, 1))", OptionError);
  o = {};
  o.min_level_dbc = 3;
  CHECK_THROWS_WITH_AS(o.validate(), "invalid option: min_level_dbc = 3 (must be finite and <= 0)",
                       OptionError);
}
