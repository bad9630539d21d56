// Waveform library: analytic Fourier series against handbook tables, numpy/scipy waveform
// definitions, the exact time-domain values, and the truncation bound.
#include <doctest/doctest.h>

#include <boost/math/special_functions/trigamma.hpp>
#include <cmath>
#include <complex>
#include <numbers>
#include <sstream>

#include "core/error.hpp"
#include "dsp/waveforms.hpp"
#include "support/python_ref.hpp"
#include "support/code_table.hpp"

using namespace periodfit;
using dsp::WaveKind;
using dsp::WaveSpec;

namespace {
constexpr double kPi = std::numbers::pi;
/// Closed forms evaluated two ways in double: agreement to a few ulps of A.
constexpr double kClosedFormTol = 1e-13;
/// numpy/scipy reference on M = 2^16 points: scipy.signal.square is +1 at a jump instead of the
/// midpoint (moves a coefficient by up to 2A/M per jump), and a jump between grid points (duty
/// 0.3, 0.2) is displaced by up to 1/M of a period (up to 2·2A/M): 6A/M = 9.2e-5·A in all;
/// aliasing of the 1/n tails adds ~n/M² ≈ 5e-9·A. Kinks only (triangle, rectified) alias at
/// ~1/M² ≈ 2e-10·A.
constexpr double kScipyJumpTol = 6.0 / 65536;
constexpr double kScipySmoothTol = 1e-8;
/// Time-domain evaluation of a finite sum vs the closed form: rounding of ~N terms.
constexpr double kSumRoundingTol = 1e-11;
/// Left-out fraction from Parseval subtraction: rounding of the kept sum, ~N·ε of the total,
/// relative to a 1e-6 fraction gives ~1e-4 relative.
constexpr double kParsevalRel = 1e-4;

WaveSpec wave(WaveKind kind, double a = 2.5, double duty = 0.5) {
  WaveSpec w;
  w.kind = kind;
  w.amplitude_v = a;
  w.f0_hz = 50;
  w.duty = duty;
  return w;
}

void check_phasor(std::complex<double> got, std::complex<double> want, double tol, int n) {
  INFO("n = " << n << ": got " << got << ", want " << want);
  CHECK(std::abs(got - want) <= tol);
}
}  // namespace

TEST_CASE("waveforms: sine is A at -90 deg at n = 1 and nothing else") {
  // sin θ = cos(θ − 90°).
  const auto w = wave(WaveKind::sine);
  check_phasor(dsp::wave_harmonic(w, 1), {0, -2.5}, kClosedFormTol, 1);
  for (int n = 2; n < 10; ++n) CHECK(dsp::wave_harmonic(w, n) == 0.0);
  CHECK(dsp::wave_dc(w) == 0);
}

TEST_CASE("waveforms: square wave has odd harmonics 4A/(n pi) (handbook table)") {
  // Handbook: A·sign(sin θ) = (4A/π) Σ_{n odd} sin(nθ)/n, i.e. 4A/(nπ) at −90°.
  const double a = 2.5;
  const auto w = wave(WaveKind::square, a);
  for (int n = 1; n <= 41; ++n) {
    const std::complex<double> want = n % 2 ? std::complex<double>(0, -4 * a / (n * kPi)) : 0.0;
    check_phasor(dsp::wave_harmonic(w, n), want, kClosedFormTol, n);
    if (n % 2 == 0) CHECK(dsp::wave_harmonic(w, n) == 0.0);  // exact zero, not rounding
  }
  CHECK(dsp::wave_dc(w) == 0);
}

TEST_CASE("waveforms: square wave with duty d is a pulse of height 2A minus A") {
  // Handbook rectangular pulse train of height h, width d·T starting at t = 0:
  // dc h·d, harmonics (2h/(nπ))·sin(nπd) with phase −nπd (pulse centred at d·T/2).
  const double a = 1.5, d = 0.3;
  const auto w = wave(WaveKind::square, a, d);
  CHECK(dsp::wave_dc(w) == doctest::Approx(2 * a * d - a).epsilon(1e-15));
  for (int n = 1; n <= 30; ++n) {
    const std::complex<double> want = 2 * (2 * a) / (n * kPi) * std::sin(n * kPi * d) * std::polar(1.0, -n * kPi * d);
    check_phasor(dsp::wave_harmonic(w, n), want, kClosedFormTol, n);
  }
}

TEST_CASE("waveforms: triangle has odd harmonics 8A/(pi^2 n^2) with alternating sign") {
  // Handbook: triangle of peak A rising through 0 at t = 0:
  // (8A/π²) Σ_k (−1)^k sin((2k+1)θ)/(2k+1)².
  const double a = 2.5;
  const auto w = wave(WaveKind::triangle, a);
  for (int n = 1; n <= 41; ++n) {
    std::complex<double> want = 0;
    if (n % 2) {
      const double sign = ((n - 1) / 2) % 2 ? -1 : 1;
      want = sign * 8 * a / (kPi * kPi * n * n) * std::complex<double>(0, -1);  // sin = cos(· − 90°)
    }
    check_phasor(dsp::wave_harmonic(w, n), want, kClosedFormTol, n);
  }
}

TEST_CASE("waveforms: sawtooth has every harmonic 2A/(n pi) with alternating sign") {
  // Handbook: θ/π on (−π, π) = (2/π) Σ (−1)^{n+1} sin(nθ)/n.
  const double a = 2.5;
  const auto w = wave(WaveKind::sawtooth, a);
  for (int n = 1; n <= 40; ++n) {
    const double sign = n % 2 ? 1 : -1;
    check_phasor(dsp::wave_harmonic(w, n), sign * 2 * a / (n * kPi) * std::complex<double>(0, -1),
                 kClosedFormTol, n);
  }
}

TEST_CASE("waveforms: half-wave rectified sine has dc A/pi, fundamental A/2, even 2A/(pi(n^2-1))") {
  // Handbook: A·max(sin θ, 0) = A/π + (A/2) sin θ − (2A/π) Σ_{n even} cos(nθ)/(n² − 1).
  const double a = 2.5;
  const auto w = wave(WaveKind::half_wave, a);
  CHECK(dsp::wave_dc(w) == doctest::Approx(a / kPi).epsilon(1e-15));
  check_phasor(dsp::wave_harmonic(w, 1), {0, -a / 2}, kClosedFormTol, 1);
  for (int n = 2; n <= 40; ++n) {
    const std::complex<double> want = n % 2 ? 0.0 : -2 * a / (kPi * (n * n - 1.0));
    check_phasor(dsp::wave_harmonic(w, n), want, kClosedFormTol, n);
  }
}

TEST_CASE("waveforms: full-wave rectified sine has dc 2A/pi and 4A/(pi(4k^2-1)) at 2k f0") {
  // Handbook: A·|sin θ| = 2A/π − (4A/π) Σ_k cos(2kθ)/(4k² − 1); f0 is the sine's frequency.
  const double a = 2.5;
  const auto w = wave(WaveKind::full_wave, a);
  CHECK(dsp::wave_dc(w) == doctest::Approx(2 * a / kPi).epsilon(1e-15));
  for (int n = 1; n <= 40; ++n) {
    const int k = n / 2;
    const std::complex<double> want = n % 2 ? 0.0 : -4 * a / (kPi * (4.0 * k * k - 1));
    check_phasor(dsp::wave_harmonic(w, n), want, kClosedFormTol, n);
  }
}

TEST_CASE("waveforms: pulse train has dc A d and amplitudes 2 A d |sinc(n d)|") {
  // Handbook rectangular pulse train 0…A, duty d: dc A·d, |X_n| = 2A·d·|sinc(n·d)|,
  // sinc(x) = sin(πx)/(πx); phase −nπd (+180° where sinc < 0).
  const double a = 3, d = 0.2;
  const auto w = wave(WaveKind::pulse, a, d);
  CHECK(dsp::wave_dc(w) == doctest::Approx(a * d).epsilon(1e-15));
  for (int n = 1; n <= 30; ++n) {
    const double sinc = std::sin(kPi * n * d) / (kPi * n * d);
    INFO("n = " << n);
    CHECK(std::abs(dsp::wave_harmonic(w, n)) == doctest::Approx(2 * a * d * std::abs(sinc)).epsilon(1e-12));
    if (n % 5 == 0) CHECK(dsp::wave_harmonic(w, n) == 0.0);  // n·d integer: exact zero
    else check_phasor(dsp::wave_harmonic(w, n), 2 * a * d * sinc * std::polar(1.0, -kPi * n * d), kClosedFormTol, n);
  }
}

TEST_CASE("waveforms: series agree with numpy FFTs of scipy.signal waveform definitions") {
  if (!test::python_has("numpy, scipy")) {
    MESSAGE("SKIPPED: /usr/bin/python3 lacks numpy/scipy; the scipy cross-check did not run");
    return;
  }
  struct Case {
    WaveKind kind;
    const char* name;
    double duty;
    double tol;
  };
  const Case cases[] = {
      {WaveKind::sine, "sine", 0.5, kScipySmoothTol},       {WaveKind::square, "square", 0.5, kScipyJumpTol},
      {WaveKind::square, "square", 0.3, kScipyJumpTol},     {WaveKind::triangle, "triangle", 0.5, kScipySmoothTol},
      {WaveKind::sawtooth, "sawtooth", 0.5, kScipyJumpTol}, {WaveKind::half_wave, "half-wave", 0.5, kScipySmoothTol},
      {WaveKind::full_wave, "full-wave", 0.5, kScipySmoothTol}, {WaveKind::pulse, "pulse", 0.2, kScipyJumpTol},
  };
  const double a = 2.5;
  for (const auto& c : cases) {
    const auto out = test::run_python("predict_waveform_ref.py",
                                      std::string(c.name) + " 2.5 " + std::to_string(c.duty) + " 25");
    REQUIRE(out);
    std::istringstream in(*out);
    int n = 0;
    double re = 0, im = 0;
    int lines = 0;
    const auto w = wave(c.kind, a, c.duty);
    while (in >> n >> re >> im) {
      INFO(c.name << " duty " << c.duty);
      check_phasor(n == 0 ? std::complex<double>(dsp::wave_dc(w)) : dsp::wave_harmonic(w, n), {re, im}, c.tol * a, n);
      ++lines;
    }
    CHECK(lines == 26);
  }
}

TEST_CASE("waveforms: exact values follow the definitions from the sine's upward zero crossing") {
  const double a = 2;
  // Values at chosen positions u, from the definitions in dsp/waveforms.hpp.
  CHECK(dsp::wave_value_at_phase(wave(WaveKind::square, a), 0) == 0);      // jump: midpoint
  CHECK(dsp::wave_value_at_phase(wave(WaveKind::square, a), 0.25) == a);
  CHECK(dsp::wave_value_at_phase(wave(WaveKind::square, a), 0.75) == -a);
  CHECK(dsp::wave_value_at_phase(wave(WaveKind::square, a, 0.2), 0.3) == -a);
  CHECK(dsp::wave_value_at_phase(wave(WaveKind::triangle, a), 0.25) == a);
  CHECK(dsp::wave_value_at_phase(wave(WaveKind::triangle, a), 0.75) == -a);
  CHECK(dsp::wave_value_at_phase(wave(WaveKind::triangle, a), 0.125) == a / 2);
  CHECK(dsp::wave_value_at_phase(wave(WaveKind::sawtooth, a), 0.25) == a / 2);
  CHECK(dsp::wave_value_at_phase(wave(WaveKind::sawtooth, a), 0.5) == 0);  // jump: midpoint
  CHECK(dsp::wave_value_at_phase(wave(WaveKind::sawtooth, a), 0.75) == -a / 2);
  CHECK(dsp::wave_value_at_phase(wave(WaveKind::half_wave, a), 0.75) == 0);
  CHECK(dsp::wave_value_at_phase(wave(WaveKind::full_wave, a), 0.75) == doctest::Approx(a));
  CHECK(dsp::wave_value_at_phase(wave(WaveKind::pulse, a, 0.2), 0.1) == a);
  CHECK(dsp::wave_value_at_phase(wave(WaveKind::pulse, a, 0.2), 0.5) == 0);
  CHECK(dsp::wave_value_at_phase(wave(WaveKind::pulse, a, 0.2), 0.2) == a / 2);
  auto off = wave(WaveKind::sine, a);
  off.offset_v = 0.5;
  CHECK(dsp::wave_value(off, 1 / (4 * off.f0_hz)) == doctest::Approx(a + 0.5));
  CHECK(dsp::wave_dc(off) == 0.5);
}

TEST_CASE("waveforms: partial sums approach the exact values within the closed-form tail sums") {
  const double a = 2.5;
  const int n_cut = 200;
  // Full-wave: tail Σ_{k>K} 4A/(π(4k²−1)) telescopes to 2A/(π(2K+1)) (K = N/2). At θ = 0 every
  // cosine is 1, so the partial sum misses x(0) = 0 by exactly the tail.
  {
    const auto w = wave(WaveKind::full_wave, a);
    const auto s = dsp::truncate_series(w, {.harmonics = n_cut});
    const double tail = 2 * a / (kPi * (n_cut + 1));
    CHECK(std::abs(s.series.value(0) - 0) == doctest::Approx(tail).epsilon(1e-9));
    for (int k = 0; k < 400; ++k) {
      const double t = k / (400 * w.f0_hz);
      CHECK(std::abs(s.series.value(t) - dsp::wave_value(w, t)) <= tail * (1 + 1e-9) + kSumRoundingTol);
    }
  }
  // Half-wave: tail Σ_{n even > N} 2A/(π(n²−1)) telescopes to A/(π(N+1)) for even N; again
  // attained at θ = 0.
  {
    const auto w = wave(WaveKind::half_wave, a);
    const auto s = dsp::truncate_series(w, {.harmonics = n_cut});
    const double tail = a / (kPi * (n_cut + 1));
    CHECK(std::abs(s.series.value(0)) == doctest::Approx(tail).epsilon(1e-9));
    for (int k = 0; k < 400; ++k) {
      const double t = k / (400 * w.f0_hz);
      CHECK(std::abs(s.series.value(t) - dsp::wave_value(w, t)) <= tail * (1 + 1e-9) + kSumRoundingTol);
    }
  }
  // Triangle: at the peak u = 1/4 every term adds 8A/(π²n²), and Σ_{odd} 1/n² = π²/8
  // (handbook), so the series reaches A; the tail is (8A/π²)·ψ₁(K + 1/2)/4, K = (N+1)/2.
  {
    const auto w = wave(WaveKind::triangle, a);
    const int n_odd = n_cut + 1;
    const auto s = dsp::truncate_series(w, {.harmonics = n_odd});
    const double tail = 8 * a / (kPi * kPi) * boost::math::trigamma((n_odd + 1) / 2.0 + 0.5) / 4;
    CHECK(a - s.series.value(0.25 / w.f0_hz) == doctest::Approx(tail).epsilon(1e-8));
  }
  // Square (jumps): away from the jumps, Abel summation bounds the tail of (4A/π)Σ_{odd} sin(nθ)/n
  // by 8A/(π(N+1)|sin θ|) (the odd-sine partial sums are bounded by 1/|sin θ|).
  {
    const auto w = wave(WaveKind::square, a);
    const auto s = dsp::truncate_series(w, {.harmonics = n_cut});
    for (int k = 1; k < 100; ++k) {
      const double u = 0.05 + 0.4 * k / 100.0;
      const double bound = 8 * a / (kPi * (n_cut + 1) * std::abs(std::sin(2 * kPi * u)));
      CHECK(std::abs(s.series.value(u / w.f0_hz) - dsp::wave_value_at_phase(w, u)) <= bound);
    }
    CHECK(s.series.value(0) == doctest::Approx(0).epsilon(1e-12));  // midpoint at the jump
  }
  // A user harmonic list is its own series: time values agree to rounding.
  {
    WaveSpec w;
    w.kind = WaveKind::harmonics;
    w.f0_hz = 60;
    w.offset_v = 0.1;
    w.terms = {{1, 1.0, 30}, {3, 0.2, -45}, {7, 0.05, 170}};
    const auto s = dsp::truncate_series(w);
    CHECK(s.method == dsp::SeriesCount::complete);
    CHECK(s.harmonics == 7);
    CHECK(s.left_out_fraction == 0);
    for (int k = 0; k < 50; ++k) {
      const double t = k / (50 * 60.0) + 0.37;
      CHECK(s.series.value(t) == doctest::Approx(dsp::wave_value(w, t)).epsilon(kSumRoundingTol));
    }
  }
}

TEST_CASE("waveforms: automatic truncation leaves out less than 1e-6 of the ac energy, minimally") {
  // Square: left-out fraction after odd N is (8/π²)·Σ_{k≥K} 1/(2k+1)² = (2/π²)·ψ₁(K + 1/2),
  // K = (N+1)/2 (first omitted harmonic 2K+1 = N+2); trigamma from Boost.Math.
  const auto square = wave(WaveKind::square);
  const auto s = dsp::truncate_series(square);
  CHECK(s.method == dsp::SeriesCount::automatic);
  CHECK(s.left_out_fraction < 1e-6);
  const int n = s.harmonics;
  const double k_first = (n % 2 ? (n + 1) / 2.0 : n / 2.0);
  const double closed = 2 / (kPi * kPi) * boost::math::trigamma(k_first + 0.5);
  CHECK(s.left_out_fraction == doctest::Approx(closed).epsilon(kParsevalRel));
  // Minimal: one odd harmonic fewer would leave out more than 1e-6.
  CHECK(2 / (kPi * kPi) * boost::math::trigamma(k_first - 1 + 0.5) > 1e-6);
  // Asymptotically 4/(π²N) = 1e-6 gives N ≈ 405 285 (common practice: 1/n² tail ~ 1/N).
  CHECK(std::abs(n - 405285) < 10);

  // Sawtooth: Σ_{n>N} 2A²/(π²n²) over A²/3 = (6/π²)·ψ₁(N+1).
  const auto saw = dsp::truncate_series(wave(WaveKind::sawtooth));
  CHECK(saw.left_out_fraction < 1e-6);
  CHECK(saw.left_out_fraction == doctest::Approx(6 / (kPi * kPi) * boost::math::trigamma(saw.harmonics + 1.0)).epsilon(kParsevalRel));
  CHECK(6 / (kPi * kPi) * boost::math::trigamma(static_cast<double>(saw.harmonics)) > 1e-6);

  // Smooth shapes need few harmonics; the sine is complete at N = 1.
  const auto full = dsp::truncate_series(wave(WaveKind::full_wave));
  CHECK(full.left_out_fraction < 1e-6);
  CHECK(full.harmonics < 200);  // terms ∝ 1/n²: energy tail ∝ 1/N³
  const auto sine = dsp::truncate_series(wave(WaveKind::sine));
  CHECK(sine.harmonics == 1);
  CHECK(sine.method == dsp::SeriesCount::complete);

  // A given count is honoured and its bound reported.
  const auto given = dsp::truncate_series(square, {.harmonics = 99});
  CHECK(given.method == dsp::SeriesCount::given);
  CHECK(given.harmonics == 99);
  CHECK(given.left_out_fraction == doctest::Approx(2 / (kPi * kPi) * boost::math::trigamma(50.5)).epsilon(1e-9));

  CHECK_THROWS_WITH_AS(dsp::truncate_series(square, {.max_harmonics = 1000}),
                       "the square wave needs more than 1000 harmonics to leave out less than 1e-06 of its "
                       "energy; give the harmonic count",
                       AnalysisError);
}

TEST_CASE("waveforms: names parse with a did-you-mean, options are validated") {
  CHECK(dsp::parse_wave_kind("half-wave") == WaveKind::half_wave);
  CHECK_THROWS_WITH_AS(dsp::parse_wave_kind("sqare"),
                       "unknown wave kind \"sqare\" (did you mean \"square\"? wave kinds: sine, square, "
                       "triangle, sawtooth, half-wave, full-wave, pulse, harmonics)",
                       UnknownNameError);
  WaveSpec w = wave(WaveKind::square, 1, 1.0);
  CHECK_THROWS_WITH_AS(w.validate(), "invalid option: duty = 1 (must be in (0, 1))", OptionError);
  w.duty = 0;
  CHECK_THROWS_AS(w.validate(), OptionError);
  w = wave(WaveKind::sine);
  w.f0_hz = 0;
  CHECK_THROWS_WITH_AS(w.validate(), "invalid option: f0_hz = 0 (must be > 0)", OptionError);
  w = wave(WaveKind::sine, -1);
  CHECK_THROWS_WITH_AS(w.validate(), "invalid option: amplitude_v = -1 (must be > 0)", OptionError);
  w.kind = WaveKind::harmonics;
  w.terms = {{2, 1, 0}, {2, 0.5, 0}};
  CHECK_THROWS_WITH_AS(w.validate(), "invalid option: harmonic n = 2 (each harmonic may be given once)", OptionError);
  w.terms = {{0, 1, 0}};
  CHECK_THROWS_AS(w.validate(), OptionError);
  CHECK_NOTHROW(WaveSpec{}.validate());          // defaults are valid
  CHECK_NOTHROW(dsp::TruncationOptions{}.validate());
}

TEST_CASE("waveforms: the harmonic-count rules have distinct codes, those docs/steady-state-json.md lists") {
  const auto c = test::codes_of(dsp::SeriesCount::measured, [](dsp::SeriesCount s) { return code(s); });
  CHECK(test::distinct(c));
  test::check_documented(c, "steady-state-json.md", "| `harmonic_count_method` |", "\"", "\"");
}
