// identify end to end on captures synthesised here: both channels locked on the input's
// fundamental, FRF against scipy.signal.freqs and circuit-theory closed forms, model poles
// against numpy.roots, a known delay, the linearity flag, and the whole error messages.
// Outputs are built by exact Fourier-series superposition through the reference H:
// y(t) = Σ |H(jnω0)|·A_n·cos(nω0t + φ_n + ∠H(jnω0)).
#include <doctest/doctest.h>

#include <cmath>
#include <complex>
#include <functional>
#include <map>
#include <numbers>
#include <optional>
#include <random>
#include <sstream>
#include <vector>

#include "core/error.hpp"
#include "ident/identify.hpp"
#include "output/identify_output.hpp"
#include "support/python_ref.hpp"
#include "support/signals.hpp"

using namespace periodfit;
using cd = std::complex<double>;
constexpr double kPi = std::numbers::pi;

namespace {

constexpr double kFs = 20000;   // Hz
constexpr double kF0 = 50;      // Hz: 400 samples per period
constexpr int kPeriods = 24;
/// Model parameters within the reported 3 standard uncertainties (the criterion;
/// common practice: fails a correct estimate with probability 0.3 % per quantity).
constexpr double kSigmaBound = 3.0;
/// FRF points are checked by the dozen and their uncertainties have only P − 1 ≈ 23 dof
/// (Student-t tails): 4.5 u keeps the chance of a false failure per test below 1 %
/// (P(|t_23| > 4.5) ≈ 1.6e-4 per check, 40 checks).
constexpr double kFrfBound = 4.5;
/// The accuracy target at 60 dB SNR: parameters within 1 %.
constexpr double kRelativeAt60dB = 0.01;

/// Harmonic phasors of the excitation, index n (0 = dc).
using Phasors = std::vector<cd>;

/// x(t) = Σ |X_n| cos(nω0t + ∠X_n) sampled at kFs for kPeriods periods, t = k/kFs, plus white
/// noise of std `sigma` (support/signals.hpp; one draw per sample, also at sigma = 0).
std::vector<double> synthesise(const Phasors& x, double sigma, std::mt19937_64& rng, const test::Shape& shape = {}) {
  return test::harmonic_samples(x, kF0, kFs, std::size_t(kFs / kF0 * kPeriods), {sigma, &rng}, shape);
}

double rms(const std::vector<double>& x) {
  double s = 0;
  for (double v : x) s += v * v;
  return std::sqrt(s / double(x.size()));
}

Capture two_channel(std::vector<double> u, std::vector<double> y, std::string name = "synthetic") {
  Capture c;
  c.source = std::move(name);
  c.format = "test";
  c.sample_rate_hz = kFs;
  c.channels = {{"v_in", "V", std::move(u)}, {"v_out", "V", std::move(y)}};
  return c;
}

/// Flat multisine on harmonics 1…h_max with Schroeder phases −n(n−1)π/h_max (common practice
/// for a low crest factor), amplitude `a` each.
Phasors multisine(int h_max, double a) {
  Phasors u(std::size_t(h_max) + 1, 0.0);
  for (int n = 1; n <= h_max; ++n) u[std::size_t(n)] = std::polar(a, -n * (n - 1) * kPi / h_max);
  return u;
}

Phasors times(const Phasors& u, const std::vector<cd>& h) {
  Phasors y(u.size(), 0.0);
  for (std::size_t n = 1; n < u.size(); ++n) y[n] = u[n] * h[n];
  return y;
}

/// scipy.signal.freqs(b, a, worN=w) at the harmonics 1…h_max and numpy.roots(a), through
/// tests/python/fit_freqs.py (b, a in descending powers of s, scipy's order).
struct ScipyRef {
  std::vector<cd> h;  ///< [n], n = 0 unused
  std::vector<cd> poles, zeros;
};
std::optional<ScipyRef> scipy_ref(const std::string& b, const std::string& a, int h_max) {
  std::string w;
  for (int n = 1; n <= h_max; ++n) w += (n > 1 ? " " : "") + std::to_string(2 * kPi * kF0 * n);
  const auto out = test::run_python("fit_freqs.py", "'" + b + "' '" + a + "' '" + w + "'");
  if (!out) return std::nullopt;
  ScipyRef r;
  r.h.push_back(0.0);
  std::istringstream in(*out);
  std::string tag;
  while (in >> tag) {
    double x = 0, y = 0, z = 0;
    if (tag == "h") {
      in >> x >> y >> z;
      r.h.emplace_back(y, z);
    } else {
      in >> x >> y;
      (tag == "pole" ? r.poles : r.zeros).emplace_back(x, y);
    }
  }
  return r;
}

/// Checks every FRF point against the reference within kFrfBound reported uncertainties.
void check_frf(const ident::IdentifyResult& r, const std::vector<cd>& h_ref) {
  for (const auto& p : r.frf.points) {
    const cd h0 = h_ref[std::size_t(p.n)];
    INFO("harmonic ", p.n, ": |H| ", p.mag, " ± ", p.mag_u, " vs ", std::abs(h0));
    CHECK(std::abs(p.mag - std::abs(h0)) <= kFrfBound * p.mag_u);
    // Phase difference wrapped into (−180°, 180°]: the delay takes phases across ±180°.
    const double dphi = std::remainder(p.phase_deg - std::arg(h0) * 180 / kPi, 360.0);
    CHECK(std::abs(dphi) <= kFrfBound * p.phase_u_deg);
  }
}

/// The fitted root nearest to `ref`.
const ident::Root& nearest(const std::vector<ident::Root>& roots, cd ref) {
  REQUIRE(!roots.empty());
  std::size_t best = 0;
  for (std::size_t i = 1; i < roots.size(); ++i)
    if (std::abs(roots[i].value - ref) < std::abs(roots[best].value - ref)) best = i;
  return roots[best];
}

void check_root(const ident::Root& p, cd ref) {
  INFO("root ", p.value.real(), " ± ", p.re_u, " ", p.value.imag(), " ± ", p.im_u, " vs ", ref.real(), " ",
       ref.imag());
  CHECK(std::abs(p.value.real() - ref.real()) <= kSigmaBound * p.re_u);
  CHECK(std::abs(p.value.imag() - ref.imag()) <= kSigmaBound * p.im_u + 1e-9 * std::abs(ref));
  CHECK(std::abs(p.value - ref) <= kRelativeAt60dB * std::abs(ref));
}

/// Options for the v_in → v_out capture. Flat multisines have no dominant line, so the lock
/// stage is given the fundamental's neighbourhood (f0_hint), as a user of --f0-hint would.
ident::IdentifyOptions options(const std::string& order = "", double f0_hint_hz = kF0) {
  ident::IdentifyOptions o;
  o.lock.f0_hint_hz = f0_hint_hz;
  o.input_channel = "v_in";
  o.output_channel = "v_out";
  o.order = order;
  return o;
}

}  // namespace

TEST_CASE("frf: RC low-pass under a square wave recovers the pole -1/tau (60 dB SNR)") {
  // Standard circuit theory: H = 1/(1 + jωτ), pole at −1/τ; τ chosen so that ω0·τ = 1, where
  // |H| = 0.7071 and ∠H = −45°. Square wave ±1: (4/π)·Σ_{n odd} sin(nω0t)/n (handbook table).
  const double tau = 1 / (2 * kPi * kF0);
  constexpr int kH = 31;
  Phasors u(kH + 1, 0.0);
  std::vector<cd> h(kH + 1, 0.0);
  for (int n = 1; n <= kH; ++n) {
    h[std::size_t(n)] = 1.0 / cd(1, n * 2 * kPi * kF0 * tau);
    if (n % 2) u[std::size_t(n)] = std::polar(4 / (kPi * n), -kPi / 2);
  }
  std::mt19937_64 rng(21);
  const auto x0 = synthesise(u, 0, rng);
  const auto y0 = synthesise(times(u, h), 0, rng);
  const double sigma_u = rms(x0) * 1e-3, sigma_y = rms(y0) * 1e-3;  // 60 dB SNR on each channel
  const auto capture = two_channel(synthesise(u, sigma_u, rng), synthesise(times(u, h), sigma_y, rng));
  auto o = options("0/1", 0);
  o.lock.max_harmonic = kH;
  const auto r = ident::identify(capture, o);
  CHECK(r.fundamental.f0_hz == doctest::Approx(kF0).epsilon(1e-6));
  REQUIRE(r.frf.points.size() == 16);  // odd harmonics 1…31 only
  CHECK(r.frf.points[0].mag == doctest::Approx(0.70710678).epsilon(3 * r.frf.points[0].mag_u));
  CHECK(r.frf.points[0].phase_deg == doctest::Approx(-45.0).epsilon(3 * r.frf.points[0].phase_u_deg / 45));
  check_frf(r, h);
  REQUIRE(r.model.has_value());
  REQUIRE(r.model->poles.size() == 1);
  check_root(r.model->poles[0], cd(-1 / tau, 0));
  CHECK(std::abs(r.model->poles[0].time_constant_s - tau) <= kSigmaBound * r.model->poles[0].time_constant_u_s);
  CHECK(std::abs(r.model->dc_gain - 1) <= kSigmaBound * r.model->dc_gain_u);
  CHECK(r.linearity.status == LinearityStatus::linear);
}

TEST_CASE("frf: RC low-pass under a half-wave rectified sine") {
  // Half-wave rectified sine max(sin ω0t, 0) = 1/π + ½ sin ω0t − (2/π)Σ cos(2kω0t)/(4k²−1)
  // (handbook Fourier-series table): fundamental and even harmonics.
  const double tau = 1 / (2 * kPi * 200);
  constexpr int kH = 20;
  Phasors u(kH + 1, 0.0);
  u[0] = 1 / kPi;
  u[1] = std::polar(0.5, -kPi / 2);
  for (int k = 1; 2 * k <= kH; ++k) u[std::size_t(2 * k)] = std::polar(2 / (kPi * (4.0 * k * k - 1)), kPi);
  std::vector<cd> h(kH + 1, 0.0);
  for (int n = 1; n <= kH; ++n) h[std::size_t(n)] = 1.0 / cd(1, n * 2 * kPi * kF0 * tau);
  std::mt19937_64 rng(22);
  const auto capture = two_channel(synthesise(u, 1e-4, rng), synthesise(times(u, h), 1e-4, rng));
  auto o = options("0/1", 0);
  o.lock.max_harmonic = kH;
  const auto r = ident::identify(capture, o);
  std::vector<int> ns;
  for (const auto& p : r.frf.points) ns.push_back(p.n);
  CHECK(ns == std::vector<int>{1, 2, 4, 6, 8, 10, 12, 14, 16, 18, 20});
  check_frf(r, h);
  REQUIRE(r.model.has_value());
  check_root(r.model->poles.at(0), cd(-1 / tau, 0));
}

TEST_CASE("frf: second-order low-pass against scipy.signal.freqs and numpy.roots") {
  if (!test::python_has("numpy, scipy")) {
    MESSAGE("skipped: /usr/bin/python3 lacks numpy/scipy");
    return;
  }
  // ω_n = 2π·300 rad/s, ζ = 0.3: H = ω_n²/(s² + 2ζω_n s + ω_n²) (textbook second-order form).
  const double wn = 2 * kPi * 300, zeta = 0.3;
  constexpr int kH = 15;
  const std::string b = std::to_string(wn * wn);
  const std::string a = "1 " + std::to_string(2 * zeta * wn) + " " + std::to_string(wn * wn);
  const auto ref = scipy_ref(b, a, kH);
  REQUIRE(ref.has_value());
  const Phasors u = multisine(kH, 0.2);
  std::mt19937_64 rng(23);
  const auto x0 = synthesise(u, 0, rng);
  const auto y0 = synthesise(times(u, ref->h), 0, rng);
  const auto capture = two_channel(synthesise(u, rms(x0) * 1e-3, rng), synthesise(times(u, ref->h), rms(y0) * 1e-3, rng));
  auto o = options("0/2");
  o.lock.max_harmonic = kH;
  const auto r = ident::identify(capture, o);
  CHECK(r.frf.points.size() == kH);
  check_frf(r, ref->h);
  REQUIRE(r.model.has_value());
  REQUIRE(r.model->poles.size() == 2);
  for (const cd p : ref->poles) check_root(nearest(r.model->poles, p), p);  // numpy.roots(a)
  const auto& p = nearest(r.model->poles, ref->poles[0]);
  CHECK(std::abs(p.natural_frequency_rad_s - wn) <= kSigmaBound * p.natural_frequency_u_rad_s);
  CHECK(std::abs(p.damping_ratio - zeta) <= kSigmaBound * p.damping_ratio_u);
  CHECK(std::abs(p.damping_ratio - zeta) <= kRelativeAt60dB * zeta);
  CHECK(std::abs(r.model->dc_gain - 1) <= kSigmaBound * r.model->dc_gain_u);
  CHECK(r.model->dof == 2 * kH - 3);  // 2K − n_θ with n_θ = 3 (b0, a0, a1)
}

TEST_CASE("frf: second-order band-pass against scipy.signal.freqs and numpy.roots") {
  if (!test::python_has("numpy, scipy")) {
    MESSAGE("skipped: /usr/bin/python3 lacks numpy/scipy");
    return;
  }
  // H = 2ζω_n s/(s² + 2ζω_n s + ω_n²), ω_n = 2π·250, ζ = 0.2 (textbook band-pass, peak 1 at ω_n).
  const double wn = 2 * kPi * 250, zeta = 0.2;
  constexpr int kH = 20;
  const std::string b = std::to_string(2 * zeta * wn) + " 0";
  const std::string a = "1 " + std::to_string(2 * zeta * wn) + " " + std::to_string(wn * wn);
  const auto ref = scipy_ref(b, a, kH);
  REQUIRE(ref.has_value());
  const Phasors u = multisine(kH, 0.2);
  std::mt19937_64 rng(24);
  const auto x0 = synthesise(u, 0, rng);
  const auto y0 = synthesise(times(u, ref->h), 0, rng);
  const auto capture = two_channel(synthesise(u, rms(x0) * 1e-3, rng), synthesise(times(u, ref->h), rms(y0) * 1e-3, rng));
  auto o = options("1/2");
  o.lock.max_harmonic = kH;
  const auto r = ident::identify(capture, o);
  check_frf(r, ref->h);
  REQUIRE(r.model.has_value());
  for (const cd p : ref->poles) check_root(nearest(r.model->poles, p), p);  // numpy.roots(a)
  REQUIRE(r.model->zeros.size() == 1);
  // The zero at s = 0 (numpy.roots of [2ζω_n, 0]) cannot be checked relatively: within 3σ.
  CHECK(std::abs(r.model->zeros[0].value.real()) <= kSigmaBound * r.model->zeros[0].re_u);
  CHECK(std::abs(r.model->model.num[1] - 2 * zeta * wn) <= kRelativeAt60dB * 2 * zeta * wn);
}

TEST_CASE("frf: a known delay is recovered with --delay") {
  // H = e^{−sT}/(1 + sτ): RC low-pass (standard circuit theory) behind a pure delay T.
  const double tau = 1 / (2 * kPi * 150), delay = 4e-4;
  constexpr int kH = 12;
  std::vector<cd> h(kH + 1, 0.0);
  for (int n = 1; n <= kH; ++n) {
    const double w = 2 * kPi * kF0 * n;
    h[std::size_t(n)] = std::polar(1.0, -w * delay) / cd(1, w * tau);
  }
  const Phasors u = multisine(kH, 0.3);
  std::mt19937_64 rng(25);
  const auto x0 = synthesise(u, 0, rng);
  const auto y0 = synthesise(times(u, h), 0, rng);
  const auto capture = two_channel(synthesise(u, rms(x0) * 1e-3, rng), synthesise(times(u, h), rms(y0) * 1e-3, rng));
  auto o = options("0/1");
  o.lock.max_harmonic = kH;
  o.estimate_delay = true;
  const auto r = ident::identify(capture, o);
  check_frf(r, h);
  REQUIRE(r.model.has_value());
  CHECK(r.model->model.delay_estimated);
  INFO("delay ", r.model->delay_s, " ± ", r.model->delay_u_s);
  CHECK(std::abs(r.model->delay_s - delay) <= kSigmaBound * r.model->delay_u_s);
  CHECK(std::abs(r.model->delay_s - delay) <= kRelativeAt60dB * delay);
  check_root(r.model->poles.at(0), cd(-1 / tau, 0));
  // Without --delay the delay is 0 and reported as such.
  o.estimate_delay = false;
  o.order = "";
  CHECK_FALSE(ident::identify(capture, o).model.has_value());
}

TEST_CASE("frf: skew of the output path is removed as a phase correction") {
  const double tau = 1 / (2 * kPi * 100), skew = 2.5e-4;
  constexpr int kH = 10;
  std::vector<cd> h(kH + 1, 0.0), h_rec(kH + 1, 0.0);
  for (int n = 1; n <= kH; ++n) {
    const double w = 2 * kPi * kF0 * n;
    h[std::size_t(n)] = 1.0 / cd(1, w * tau);
    h_rec[std::size_t(n)] = h[std::size_t(n)] * std::polar(1.0, -w * skew);  // recorded y(t − skew)
  }
  const Phasors u = multisine(kH, 0.3);
  std::mt19937_64 rng(26);
  const auto capture = two_channel(synthesise(u, 1e-4, rng), synthesise(times(u, h_rec), 1e-4, rng));
  auto o = options();
  o.lock.max_harmonic = kH;
  o.frf.skew_s = skew;
  const auto r = ident::identify(capture, o);
  check_frf(r, h);
  CHECK(r.skew_s == skew);
}

TEST_CASE("frf: y = v + 0.05 v^2 behind a low-pass is flagged nonlinear, the linear DUT is not") {
  // Odd multisine on 1, 3, 5, 7, 9, 13 (11 skipped): x² puts lines on even harmonics only.
  const double tau = 1 / (2 * kPi * 200);
  constexpr int kH = 20;
  Phasors u(kH + 1, 0.0);
  for (int n : {1, 3, 5, 7, 9, 13}) u[std::size_t(n)] = std::polar(0.3, -n * (n - 1) * kPi / 13);
  std::vector<cd> h(kH + 1, 0.0);
  for (int n = 1; n <= kH; ++n) h[std::size_t(n)] = 1.0 / cd(1, n * 2 * kPi * kF0 * tau);
  std::mt19937_64 rng(27);
  auto o = options();
  o.lock.max_harmonic = kH;
  const auto x = synthesise(u, 1e-4, rng);
  const auto linear = ident::identify(two_channel(x, synthesise(times(u, h), 1e-4, rng)), o);
  CHECK(linear.linearity.status == LinearityStatus::linear);
  CHECK(linear.flags.empty());
  const auto bent = ident::identify(
      two_channel(x, synthesise(times(u, h), 1e-4, rng, [](double v) { return v + 0.05 * v * v; })), o);
  CHECK(bent.linearity.status == LinearityStatus::nonlinear);
  CHECK(bent.flags == std::vector<Flag>{Flag::nonlinear});
  CHECK(bent.linearity.odd.empty());  // product-to-sum rule: x² of odd harmonics is even
  CHECK_FALSE(bent.linearity.even.empty());
  REQUIRE(bent.linearity.even_level_db.has_value());
}

TEST_CASE("frf: bad inputs are errors with whole messages") {
  const Phasors u = multisine(5, 0.3);
  std::mt19937_64 rng(28);
  const auto x = synthesise(u, 1e-4, rng);
  auto o = options();
  SUBCASE("different sample rates") {
    auto a = two_channel(x, x, "in.csv"), b = two_channel(x, x, "out.csv");
    b.sample_rate_hz = 10000;
    CHECK_THROWS_WITH_AS(ident::identify(a, b, o),
                         "input and output captures differ in sample rate: 20000 Hz (in.csv) vs 10000 Hz (out.csv)",
                         AnalysisError);
  }
  SUBCASE("different lengths") {
    auto a = two_channel(x, x, "in.csv");
    auto shorter = x;
    shorter.resize(x.size() - 7);
    const auto b = two_channel(shorter, shorter, "out.csv");
    CHECK_THROWS_WITH_AS(ident::identify(a, b, o),
                         "input and output captures differ in length: 9600 samples (in.csv) vs 9593 samples (out.csv)",
                         AnalysisError);
  }
  SUBCASE("same channel twice") {
    o.output_channel = "v_in";
    CHECK_THROWS_WITH_AS(ident::identify(two_channel(x, x, "a.csv"), o),
                         "a.csv: input and output are the same channel \"v_in\"", AnalysisError);
  }
  SUBCASE("too few excited harmonics for the order") {
    o.order = "2/3";  // 6 parameters: 2K ≥ 7 needs K ≥ 4; a two-tone input excites 2
    Phasors two(6, 0.0);
    two[1] = 0.3;
    two[2] = cd(0, 0.2);
    const auto x2 = synthesise(two, 1e-4, rng);
    CHECK_THROWS_WITH_AS(ident::identify(two_channel(x2, x2, "two.csv"), o),
                         "two.csv: model order 2/3 needs at least 4 excited harmonics; the input excites 2 (n = 1, 2)",
                         AnalysisError);
  }
  SUBCASE("unknown channel") {
    o.output_channel = "v_ot";
    CHECK_THROWS_WITH_AS(ident::identify(two_channel(x, x), o),
                         "unknown channel \"v_ot\" in synthetic (did you mean \"v_out\"? channels: v_in, v_out)",
                         UnknownNameError);
  }
  SUBCASE("input without a periodic component") {
    o.lock.f0_hint_hz = 0;
    CHECK_THROWS_WITH_AS(ident::identify(two_channel(std::vector<double>(x.size(), 0.5), x, "dc.csv"), o),
                         "dc.csv: input channel \"v_in\": no periodic component: every sample equals 0.5 (dc only)",
                         AnalysisError);
    // White noise: the message names the strongest candidate, whose frequency depends on the
    // noise draw, so only its fixed part is compared.
    try {
      ident::identify(two_channel(synthesise(Phasors(1, 0.0), 1.0, rng), x, "noise.csv"), o);
      FAIL("white noise was accepted as periodic");
    } catch (const AnalysisError& e) {
      const std::string prefix = "noise.csv: input channel \"v_in\": no periodic component stands out of the noise";
      CHECK(std::string(e.what()).substr(0, prefix.size()) == prefix);
    }
  }
  SUBCASE("singular fit") {
    // A noise-free pure gain y = 2x fitted with 1/1: B/A = (b0 + b1 s)/(a0 + s) equals 2 for
    // every a0 = b0/2 (pole–zero cancellation), so the coefficients are not determined.
    std::vector<double> y(x);
    for (auto& v : y) v *= 2;
    const auto clean = synthesise(u, 0, rng);
    std::vector<double> y_clean(clean);
    for (auto& v : y_clean) v *= 2;
    o.order = "1/1";
    CHECK_THROWS_WITH_AS(ident::identify(two_channel(clean, y_clean, "gain.csv"), o),
                         "gain.csv: model fit: the rational fit of order 1/1 is singular: the linearised start has rank 2 < 3 (the data "
                         "cannot determine this many coefficients; lower the order)",
                         AnalysisError);
  }
  SUBCASE("invalid order text") {
    o.order = "two";
    CHECK_THROWS_AS(ident::identify(two_channel(x, x), o), OptionError);
  }
}
TEST_CASE("frf: the chi-square verdict accepts the true order and rejects a too-low one") {
  if (!test::python_has("numpy, scipy")) {
    MESSAGE("skipped: /usr/bin/python3 lacks numpy/scipy");
    return;
  }
  // Second-order low-pass (textbook form) measured 8 times. A correct model's cost falls in
  // the central 95 % χ² band with probability 0.95 (Pintelon & Schoukens 2012, §11.3 on the
  // ML cost), so ≥ 6 of 8 pass except with probability 0.6 % (binomial); a first-order model
  // of the same data must fail every time.
  const double wn = 2 * kPi * 300, zeta = 0.3;
  constexpr int kH = 15, kRuns = 8, kMinAdequate = 6;
  const auto ref = scipy_ref(std::to_string(wn * wn), "1 " + std::to_string(2 * zeta * wn) + " " + std::to_string(wn * wn), kH);
  REQUIRE(ref.has_value());
  const Phasors u = multisine(kH, 0.2);
  int adequate = 0;
  for (int run = 0; run < kRuns; ++run) {
    std::mt19937_64 rng(std::uint64_t(100 + run));
    const auto x0 = synthesise(u, 0, rng);
    const auto y0 = synthesise(times(u, ref->h), 0, rng);
    const auto capture =
        two_channel(synthesise(u, rms(x0) * 1e-3, rng), synthesise(times(u, ref->h), rms(y0) * 1e-3, rng));
    auto o = options("0/2");
    o.lock.max_harmonic = kH;
    adequate += ident::identify(capture, o).model->adequate;
    o.order = "0/1";
    const auto low = ident::identify(capture, o);
    CHECK_FALSE(low.model->adequate);
    CHECK(low.status == Status::model_inadequate);
    CHECK(low.flags == std::vector<Flag>{Flag::model_inadequate});
  }
  CHECK(adequate >= kMinAdequate);
}

TEST_CASE("frf: --order auto picks the second-order model for a second-order DUT by chi-square") {
  // Textbook second-order low-pass (ω_n = 2π·300, ζ = 0.3) at 60 dB SNR: first-order models
  // cannot fit it, 0/2 does (Pintelon & Schoukens 2012, §11.3: the lowest order whose cost is
  // consistent with χ²). The true order passes its χ² test with probability ≈ 0.95 (a bit less:
  // the weights are variances estimated from 24 periods), so 5 captures are identified and ≥ 3
  // must choose 0/2 (fails a correct implementation with probability < 1 %, binomial).
  const double wn = 2 * kPi * 300, zeta = 0.3;
  constexpr int kH = 15, kRuns = 5, kMinRight = 3;
  std::vector<cd> h(kH + 1, 0.0);
  for (int n = 1; n <= kH; ++n) {
    const cd s(0, 2 * kPi * kF0 * n);
    h[std::size_t(n)] = wn * wn / (s * s + 2 * zeta * wn * s + wn * wn);
  }
  const Phasors u = multisine(kH, 0.2);
  int right = 0;
  for (int run = 0; run < kRuns; ++run) {
    std::mt19937_64 rng(std::uint64_t(30 + run));
    const auto x0 = synthesise(u, 0, rng);
    const auto y0 = synthesise(times(u, h), 0, rng);
    const auto capture =
        two_channel(synthesise(u, rms(x0) * 1e-3, rng), synthesise(times(u, h), rms(y0) * 1e-3, rng));
    auto o = options("auto");
    o.lock.max_harmonic = kH;
    const auto r = ident::identify(capture, o);
    REQUIRE(r.model.has_value());
    REQUIRE(r.model->order_trials.size() >= 3);
    CHECK_FALSE(r.model->order_trials[0].passed);  // 0/1 never fits a second-order DUT
    const auto j = output::identify_json(r);
    CHECK(j["model"]["den"].back() == 1.0);  // monic, ascending powers
    CHECK(j["model"]["order_trials"].size() == r.model->order_trials.size());
    if (r.model->order.num == 0 && r.model->order.den == 2) {
      ++right;
      CHECK(r.model->order_decided_by == "chi2");
      CHECK(j["model"]["order"] == "0/2");
      CHECK(j["model"]["den"].size() == 3);
    }
  }
  CHECK(right >= kMinRight);
}

TEST_CASE("frf: default options are valid; invalid ones name field, value and constraint") {
  CHECK_NOTHROW(ident::IdentifyOptions{}.validate());
  ident::IdentifyOptions o;
  o.lock.max_harmonic = -1;
  // The fundamental's options are dsp::LockOptions, checked by dsp::validate (period_lock_test).
  CHECK_THROWS_WITH_AS(o.validate(),
                       "invalid option: max_harmonic = -1 (must be between 0 (automatic) and 2000 (fit time grows as "
                       "H³; dsp/period_lock.hpp))",
                       OptionError);
  o = {};
  o.lock.f0_hz = -5;
  CHECK_THROWS_WITH_AS(o.validate(), "invalid option: f0_hz = -5 (must be >= 0; 0 = estimate)", OptionError);
}

// Issue 11, class 8: an output without a response at the excited lines is refused in plain
// words; before, a constant output gave |H| ≈ 1e-17 with an interval excluding 0 and an
// "adequate" model, and a zero output a covariance error.
TEST_CASE("frf: a constant, zero or noise-only output is refused as carrying no response") {
  Phasors u(6, 0.0);
  for (int n = 1; n <= 5; ++n) u[std::size_t(n)] = std::polar(0.3, -n * (n - 1) * kPi / 5);
  std::mt19937_64 rng(1101);
  auto o = options();
  o.order = "0/3";
  const auto x = synthesise(u, 1e-4, rng);
  const std::vector<double> constant(x.size(), 0.75);
  const std::vector<double> zero(x.size(), 0.0);
  std::normal_distribution<double> noise(0.0, 1e-3);
  std::vector<double> noisy(x.size());
  const std::vector<const std::vector<double>*> outputs = {&constant, &zero, &noisy};
  for (double& v : noisy) v = 0.5 + noise(rng);
  for (const auto* y : outputs) {
    CAPTURE((*y)[0]);
    try {
      const auto r = ident::identify(two_channel(x, *y, "dead.csv"), o);
      FAIL("frf returned a result (status " << code(r.status) << ") for an output without response");
    } catch (const AnalysisError& e) {
      const std::string what = e.what();
      CHECK_MESSAGE(what.find("dead.csv: ") == 0, what);
      CHECK_MESSAGE(what.find("output channel \"v_out\"") != std::string::npos, what);
      CHECK_MESSAGE(what.find("the output carries no response at the excited harmonics (n = 1, 2, 3, 4, 5)") !=
                        std::string::npos,
                    what);
    }
  }
}

TEST_CASE("frf: poles and zeros print frequency first in Hz, each value with u=") {
  // Hand-made roots; the Hz figures are |p|/2π and Q = 1/(2ζ), u(Q) = u(ζ)/(2ζ²) (closed forms,
  // ident/rational_fit.hpp), printed with GUM digits (u to 2 significant digits, the value to
  // the same decimal place; JCGM 100:2008 §7.2.6); 6 digits where u is undefined.
  const double two_pi = 2 * std::numbers::pi;
  ident::Root pair;
  pair.is_real = false;
  pair.value = cd(-0.35 * two_pi * 1200, two_pi * 1200 * std::sqrt(1 - 0.35 * 0.35));
  pair.natural_frequency_rad_s = two_pi * 1200;  // 1200 Hz
  pair.natural_frequency_u_rad_s = two_pi * 3;   // 3 Hz
  pair.damping_ratio = 0.35;
  pair.damping_ratio_u = 0.002;
  pair.q_factor = 1 / 0.7;                        // 1.42857
  pair.q_factor_u = 0.002 / (2 * 0.35 * 0.35);    // 0.0081633
  ident::Root conjugate = pair;
  conjugate.value = std::conj(pair.value);
  ident::Root real;
  real.value = cd(-1000, 0);  // 1000/2π = 159.155 Hz
  real.re_u = 10;             // 1.5915 Hz
  real.time_constant_s = 1e-3;
  real.time_constant_u_s = 1e-5;  // u(τ) = u(p)/p²
  ident::Root origin;             // a zero at s = 0: no corner, no time constant
  ident::Root repeated = real;
  repeated.uncertainty_defined = false;
  CHECK(output::format_roots_table({real, pair, conjugate, origin, repeated}) ==
        "  root            freq_Hz               damping_ratio       Q                   time_constant_s\n"
        "  --------------  --------------------  ------------------  ------------------  ---------------------\n"
        "  real            159.2, u = 1.6        -                   -                   0.001000, u = 1.0e-05\n"
        "  complex pair    1200.0, u = 3.0       0.3500, u = 0.0020  1.4286, u = 0.0082  -\n"
        "  real, at s = 0  0, u = 0              -                   -                   -\n"
        "  real            159.155, u undefined  -                   -                   0.001, u undefined\n");
  CHECK(output::root_summary(pair) ==
        "complex pair: natural frequency 1200.0 Hz, u = 3.0 Hz, damping ratio 0.3500, u = 0.0020, Q 1.4286, "
        "u = 0.0082");
  CHECK(output::root_summary(real) ==
        "real: corner frequency 159.2 Hz, u = 1.6 Hz, time constant 0.001000 s, u = 1.0e-05 s");
}
