// The rational FRF fit against outside sources: standard circuit theory (RC low-pass), scipy's
// signal.freqs and numpy.roots (second-order low-pass and band-pass), textbook second-order
// closed forms, and the χ² behaviour of a correctly weighted least-squares cost.
#include <doctest/doctest.h>

#include <boost/math/distributions/chi_squared.hpp>

#include <cmath>
#include <cstdint>
#include <cstdlib>
#include <numbers>
#include <random>
#include <sstream>
#include <string>
#include <vector>

#include "core/error.hpp"
#include "ident/rational_fit.hpp"
#include "core/number_format.hpp"
#include "support/gaussian.hpp"
#include "support/python_ref.hpp"

using namespace periodfit;
using namespace periodfit::ident;
using cplx = std::complex<double>;

namespace {

constexpr double kPi = std::numbers::pi;
// Noise-free data: the fit must reproduce the generating model to near machine precision; 1e-8
// leaves room for the conditioning of the roots (a few hundred) times rounding in the QR/SVD.
constexpr double kExactRel = 1e-8;
// 60 dB SNR: noise standard deviation 1e-3·|H| per point (issue 4, item 7).
constexpr double kSnr60dB = 1e-3;
// Issue 4, item 7: parameters within 3σ of the truth and within 1 %.
constexpr double kSigmas = 3;
constexpr double kRel1Percent = 0.01;
// Values printed to 4 decimals in textbooks (0.7071, −45°).
constexpr double kTextbook4Digits = 5e-5;
// A cost beyond the 99.9 % point of its χ² means a wrong model, not bad luck (1 in 1000).
constexpr double kGrossMisfitQuantile = 0.999;

using test::Gaussian;

/// FRF points of `h` at `omegas`, with circular noise of standard deviation rel·|H| (variance
/// reported accordingly); rel = 0 gives exact values with a nominal variance (1e-6·|H|)².
std::vector<FrfPoint> points_of(const std::vector<double>& omegas, const std::vector<cplx>& h, double rel,
                                std::uint64_t seed = 12345) {
  Gaussian g(seed);
  std::vector<FrfPoint> pts;
  for (std::size_t k = 0; k < omegas.size(); ++k) {
    const double sigma = (rel > 0 ? rel : 1e-6) * std::abs(h[k]);
    cplx v = h[k];
    if (rel > 0) {
      // Drawn in a fixed order (imaginary part first, as gcc evaluated the former
      // cplx(g(), g())): argument evaluation order is unspecified, and clang's differed.
      const double im = g();
      const double re = g();
      v += cplx(re, im) * (sigma / std::sqrt(2.0));
    }
    pts.push_back(FrfPoint::circular(omegas[k], v, sigma * sigma));
  }
  return pts;
}

std::vector<double> harmonics(double f0_hz, int first, int last, int step = 1) {
  std::vector<double> w;
  for (int n = first; n <= last; n += step) w.push_back(2 * kPi * f0_hz * n);
  return w;
}

/// H(jω) of ascending-power coefficients.
std::vector<cplx> response(const std::vector<double>& num, const std::vector<double>& den,
                           const std::vector<double>& omegas, double delay_s = 0) {
  RationalModel m;
  m.num = num;
  m.den = den;
  m.delay_s = delay_s;
  std::vector<cplx> h;
  for (double w : omegas) h.push_back(m.response(w));
  return h;
}

void check_within(double estimate, double u, double truth, const char* what) {
  INFO(what << ": estimate " << estimate << " ± " << u << ", truth " << truth);
  CHECK(std::abs(estimate - truth) <= kSigmas * u);
  if (truth != 0) CHECK(std::abs(estimate - truth) <= kRel1Percent * std::abs(truth));
}

struct PythonRef {
  std::vector<cplx> h;
  std::vector<cplx> poles;
  std::vector<cplx> zeros;
};

std::string join(const std::vector<double>& v, bool reverse) {
  std::string s;
  for (std::size_t i = 0; i < v.size(); ++i) s += format_shortest(v[reverse ? v.size() - 1 - i : i]) + " ";
  return s;
}

/// scipy.signal.freqs(b, a, worN=w) and numpy.roots via tests/python/fit_freqs.py.
std::optional<PythonRef> scipy_freqs(const std::vector<double>& num, const std::vector<double>& den,
                                     const std::vector<double>& omegas) {
  if (!test::python_has("numpy, scipy.signal")) return std::nullopt;
  const auto out = test::run_python("fit_freqs.py", "'" + join(num, true) + "' '" + join(den, true) + "' '" +
                                                        join(omegas, false) + "'");
  if (!out) return std::nullopt;
  PythonRef ref;
  std::istringstream in(*out);
  std::string tag;
  while (in >> tag) {
    double a = 0, b = 0, c = 0;
    if (tag == "h") {
      in >> a >> b >> c;
      ref.h.emplace_back(b, c);
    } else {
      in >> a >> b;
      (tag == "pole" ? ref.poles : ref.zeros).emplace_back(a, b);
    }
  }
  return ref;
}

bool near(cplx a, cplx b, double rel) { return std::abs(a - b) <= rel * std::abs(b); }

}  // namespace

TEST_CASE("rational fit: RC low-pass 1/(1 + jωτ) has its pole at -1/τ and -3 dB, -45° at ω = 1/τ") {
  // Standard circuit theory: H = 1/(1 + jωτ), τ = RC, pole −1/τ, |H(j/τ)| = 1/√2 ≈ 0.7071, −45°.
  const double tau = 1e3 * 1e-6;  // R = 1 kΩ, C = 1 µF
  // Square-wave excitation: odd harmonics of 100 Hz (handbook Fourier series of a square wave).
  const std::vector<double> w = harmonics(100, 1, 39, 2);
  const auto pts = points_of(w, response({1 / tau}, {1 / tau, 1}, w), 0);  // monic: (1/τ)/(s + 1/τ)
  RationalFitOptions o;
  o.order = {0, 1};
  const RationalFitResult fit = fit_rational(pts, o);
  REQUIRE(fit.poles.size() == 1);
  CHECK(fit.poles[0].is_real);
  CHECK(fit.poles[0].value.real() == doctest::Approx(-1 / tau).epsilon(kExactRel));
  CHECK(fit.poles[0].time_constant_s == doctest::Approx(tau).epsilon(kExactRel));
  CHECK(fit.dc_gain_defined);
  CHECK(fit.dc_gain == doctest::Approx(1).epsilon(kExactRel));
  const cplx h = fit.model.response(1 / tau);
  CHECK(std::abs(h) == doctest::Approx(0.7071).epsilon(kTextbook4Digits));
  CHECK(std::arg(h) * 180 / kPi == doctest::Approx(-45).epsilon(kTextbook4Digits));
  CHECK(fit.model.den.back() == 1);
  CHECK(!fit.unstable);
  CHECK(fit.order_decided_by == "requested");
  CHECK(fit.dof == 2 * 20 - 2);
  CHECK(fit.converged());
}

TEST_CASE("rational fit: RC low-pass from half-wave rectified sine harmonics (1, 2, 4, 6, …) at 60 dB SNR") {
  // Half-wave rectified sine: fundamental plus even harmonics (handbook Fourier series).
  const double tau = 2.2e-3;
  std::vector<double> w = harmonics(50, 1, 1);
  for (double x : harmonics(50, 2, 30, 2)) w.push_back(x);
  const auto pts = points_of(w, response({1 / tau}, {1 / tau, 1}, w), kSnr60dB);
  RationalFitOptions o;
  o.order = {0, 1};
  const RationalFitResult fit = fit_rational(pts, o);
  REQUIRE(fit.parameter_u.size() == 2);
  check_within(fit.model.num[0], fit.parameter_u[0], 1 / tau, "b0");
  check_within(fit.model.den[0], fit.parameter_u[1], 1 / tau, "a0");
  check_within(fit.poles[0].time_constant_s, fit.poles[0].time_constant_u_s, tau, "tau");
  check_within(fit.dc_gain, fit.dc_gain_u, 1, "dc gain");
  // A correct model falls outside the 95 % band in 5 % of draws, and this draw (seed 12345,
  // cost 47.6 against an upper edge of 47.0 for 30 dof) is one of them: assert only that it is
  // not grossly wrong, below the 99.9 % point of χ²(30) (Boost.Math). The verdict itself is
  // checked statistically in the repeated-noise test below.
  const boost::math::chi_squared chi2(fit.dof);
  CHECK(fit.cost <= boost::math::quantile(chi2, kGrossMisfitQuantile));
}

TEST_CASE("rational fit: second-order low-pass matches scipy.signal.freqs and numpy.roots") {
  // H = ω_n²/(s² + 2ζω_n s + ω_n²), ω_n = 2π·1 kHz, ζ = 0.2 (textbook second-order section).
  const double wn = 2 * kPi * 1000, zeta = 0.2;
  const std::vector<double> num{wn * wn}, den{wn * wn, 2 * zeta * wn, 1};
  const std::vector<double> w = harmonics(100, 1, 40);
  const auto ref = scipy_freqs(num, den, w);
  if (!ref) {
    MESSAGE("SKIPPED: /usr/bin/python3 with numpy and scipy is not available");
    return;
  }
  REQUIRE(ref->h.size() == w.size());
  // Our model evaluation agrees with scipy.signal.freqs(b, a, worN=w).
  const std::vector<cplx> ours = response(num, den, w);
  for (std::size_t k = 0; k < w.size(); ++k) CHECK(near(ours[k], ref->h[k], 1e-12));

  SUBCASE("noise-free: the fit reproduces numpy.roots(a) and the closed forms") {
    RationalFitOptions o;
    o.order = {0, 2};
    const RationalFitResult fit = fit_rational(points_of(w, ref->h, 0), o);
    REQUIRE(fit.poles.size() == 2);
    REQUIRE(ref->poles.size() == 2);
    // numpy.roots lists +Im first for this pair; ours are sorted by |p| then Im.
    const cplx np_lower = ref->poles[0].imag() < 0 ? ref->poles[0] : ref->poles[1];
    CHECK(near(fit.poles[0].value, np_lower, kExactRel));
    CHECK(near(fit.poles[1].value, std::conj(np_lower), kExactRel));
    CHECK(fit.poles[0].natural_frequency_rad_s == doctest::Approx(wn).epsilon(kExactRel));
    CHECK(fit.poles[0].damping_ratio == doctest::Approx(zeta).epsilon(kExactRel));
    CHECK(fit.poles[0].q_factor == doctest::Approx(1 / (2 * zeta)).epsilon(kExactRel));  // Q = 1/(2ζ)
    CHECK(fit.dc_gain == doctest::Approx(1).epsilon(kExactRel));
  }
  SUBCASE("60 dB SNR: parameters within 3σ and 1 %; root 1σ matches the closed form") {
    RationalFitOptions o;
    o.order = {0, 2};
    const RationalFitResult fit = fit_rational(points_of(w, ref->h, kSnr60dB), o);
    check_within(fit.model.num[0], fit.parameter_u[0], num[0], "b0");
    check_within(fit.model.den[0], fit.parameter_u[1], den[0], "a0");
    check_within(fit.model.den[1], fit.parameter_u[2], den[1], "a1");
    const Root& p = fit.poles[0];
    check_within(p.natural_frequency_rad_s, p.natural_frequency_u_rad_s, wn, "omega_n");
    check_within(p.damping_ratio, p.damping_ratio_u, zeta, "zeta");
    check_within(p.q_factor, p.q_factor_u, 1 / (2 * zeta), "Q");
    // Closed form for s² + a1 s + a0: ω_n = √a0, ζ = a1/(2√a0). First-order propagation:
    // u(ω_n) = u(a0)/(2√a0); ζ's variance from its gradient (∂ζ/∂a0, ∂ζ/∂a1) and Cov(a0, a1).
    const double a0 = fit.model.den[0], a1 = fit.model.den[1];
    const auto& c = fit.model.covariance;  // order b0, a0, a1
    CHECK(p.natural_frequency_u_rad_s == doctest::Approx(std::sqrt(c[1][1]) / (2 * std::sqrt(a0))).epsilon(1e-6));
    const double gz0 = -a1 / (4 * a0 * std::sqrt(a0)), gz1 = 1 / (2 * std::sqrt(a0));
    const double var_z = gz0 * gz0 * c[1][1] + 2 * gz0 * gz1 * c[1][2] + gz1 * gz1 * c[2][2];
    CHECK(p.damping_ratio_u == doctest::Approx(std::sqrt(var_z)).epsilon(1e-6));
    CHECK(fit.adequate);
  }
}

TEST_CASE("rational fit: band-pass matches scipy.signal.freqs, its zero sits at s = 0 within 3σ") {
  // H = (ω_n/Q)s/(s² + (ω_n/Q)s + ω_n²), ω_n = 2π·2 kHz, Q = 5 (textbook band-pass section).
  const double wn = 2 * kPi * 2000, q = 5;
  const std::vector<double> num{0, wn / q}, den{wn * wn, wn / q, 1};
  const std::vector<double> w = harmonics(200, 1, 30);
  const auto ref = scipy_freqs(num, den, w);
  if (!ref) {
    MESSAGE("SKIPPED: /usr/bin/python3 with numpy and scipy is not available");
    return;
  }
  RationalFitOptions o;
  o.order = {1, 2};
  const RationalFitResult fit = fit_rational(points_of(w, ref->h, kSnr60dB), o);
  REQUIRE(fit.zeros.size() == 1);
  REQUIRE(ref->zeros.size() == 1);
  CHECK(ref->zeros[0] == cplx(0, 0));  // numpy.roots([wn/q, 0])
  CHECK(std::abs(fit.zeros[0].value.real()) <= kSigmas * fit.zeros[0].re_u);
  check_within(fit.model.num[1], fit.parameter_u[1], num[1], "b1");
  CHECK(std::abs(fit.model.num[0]) <= kSigmas * fit.parameter_u[0]);  // b0 = 0
  check_within(fit.poles[0].natural_frequency_rad_s, fit.poles[0].natural_frequency_u_rad_s, wn, "omega_n");
  check_within(fit.poles[0].q_factor, fit.poles[0].q_factor_u, q, "Q");
  const cplx np_lower = ref->poles[0].imag() < 0 ? ref->poles[0] : ref->poles[1];
  CHECK(near(fit.poles[0].value, np_lower, kRel1Percent));
  CHECK(fit.adequate);
}

TEST_CASE("rational fit: the model covariance is in RationalModel::response_gradient order (steady-state relies on it)") {
  // Near ω = 0, H → b0/a0 and the gradient-propagated variance of Re H must equal the reported
  // dc-gain variance (first-order propagation, same covariance): a check of the parameter order.
  const double tau = 1e-3;
  const std::vector<double> w = harmonics(100, 1, 20);
  RationalFitOptions o;
  o.order = {1, 2};
  o.estimate_delay = true;
  const RationalFitResult fit =
      fit_rational(points_of(w, response({2 / tau, 0.5}, {1 / (tau * tau), 3 / tau, 1}, w, 1e-4), kSnr60dB), o);
  const auto g = fit.model.response_gradient(1e-9 / tau);
  REQUIRE(g.size() == fit.model.covariance.size());
  double var = 0;
  for (std::size_t i = 0; i < g.size(); ++i)
    for (std::size_t j = 0; j < g.size(); ++j) var += g[i].real() * fit.model.covariance[i][j] * g[j].real();
  // Relative agreement limited by the O(ωτ) terms left at ω = 1e-9/τ.
  CHECK(std::sqrt(var) == doctest::Approx(fit.dc_gain_u).epsilon(1e-6));
}

TEST_CASE("rational fit: a known delay is recovered within 3σ and 1 %, or can be held fixed") {
  // H = e^{−sT}/(1 + sτ): first-order lag with dead time (standard process model).
  const double tau = 1e-3, delay = 0.35e-3;
  const std::vector<double> w = harmonics(50, 1, 40);
  const auto pts = points_of(w, response({1 / tau}, {1 / tau, 1}, w, delay), kSnr60dB);
  RationalFitOptions o;
  o.order = {0, 1};
  o.estimate_delay = true;
  const RationalFitResult fit = fit_rational(pts, o);
  REQUIRE(fit.parameter_names == std::vector<std::string>{"b0", "a0", "T"});
  check_within(fit.delay_s, fit.delay_u_s, delay, "T");
  check_within(fit.poles[0].time_constant_s, fit.poles[0].time_constant_u_s, tau, "tau");
  CHECK(fit.model.delay_estimated);
  CHECK(fit.adequate);

  // Odd harmonics 3…31 of 50 Hz: a 7 ms delay is longer than one turn of the lowest line
  // (150 Hz: 6.67 ms) but shorter than the 10 ms after which odd lines only flip sign, so it is
  // identifiable and must be found.
  const double long_delay = 7e-3;
  const std::vector<double> w_odd = harmonics(50, 3, 31, 2);
  RationalFitResult odd =
      fit_rational(points_of(w_odd, response({1 / tau}, {1 / tau, 1}, w_odd, long_delay), kSnr60dB), o);
  check_within(odd.delay_s, odd.delay_u_s, long_delay, "T (odd lines)");
  check_within(odd.dc_gain, odd.dc_gain_u, 1, "dc gain (odd lines)");

  RationalFitOptions fixed;
  fixed.order = {0, 1};
  fixed.delay_s = delay;
  const RationalFitResult held = fit_rational(pts, fixed);
  CHECK(held.delay_s == delay);
  CHECK(held.delay_u_s == 0);
  CHECK(held.model.covariance.size() == 2);
  check_within(held.poles[0].time_constant_s, held.poles[0].time_constant_u_s, tau, "tau (fixed T)");
  // Without the delay the same data is not a first-order lag: the χ² verdict must fail.
  RationalFitOptions none;
  none.order = {0, 1};
  CHECK(!fit_rational(pts, none).adequate);
}

TEST_CASE("rational fit: auto order picks the true order by the χ² test; too low an order is inadequate") {
  const double wn = 2 * kPi * 1000, zeta = 0.3;
  const std::vector<double> w = harmonics(100, 1, 30);
  const auto pts = points_of(w, response({wn * wn}, {wn * wn, 2 * zeta * wn, 1}, w), kSnr60dB, 777);
  RationalFitOptions o;
  o.auto_order = true;
  const RationalFitResult fit = fit_rational(pts, o);
  CHECK(fit.order.num == 0);
  CHECK(fit.order.den == 2);
  CHECK(fit.order_decided_by == "chi2");
  REQUIRE(fit.order_trials.size() >= 2);
  CHECK(!fit.order_trials.front().passed);  // 0/1 tried first and rejected
  CHECK(fit.order_trials.back().passed);

  RationalFitOptions low;
  low.order = {0, 1};
  const RationalFitResult under = fit_rational(pts, low);
  CHECK(!under.adequate);
  CHECK(under.cost > under.chi2_upper);
  // χ²(dof) 95 % band edges (Boost.Math) bracket the expectation dof.
  CHECK(under.chi2_lower < under.dof);
  CHECK(under.chi2_upper > under.dof);
}

TEST_CASE("rational fit: when no order passes χ², the information criterion decides and says so") {
  // Second-order data, but auto may only try N ≤ 1: neither 0/1 nor 1/1 can pass at 60 dB SNR.
  const double wn = 2 * kPi * 800, zeta = 0.25;
  const std::vector<double> w = harmonics(100, 1, 25);
  const auto pts = points_of(w, response({wn * wn}, {wn * wn, 2 * zeta * wn, 1}, w), kSnr60dB, 99);
  for (const InformationCriterion ic : {InformationCriterion::mdl, InformationCriterion::aic}) {
    RationalFitOptions o;
    o.auto_order = true;
    o.auto_max_den_order = 1;
    o.fallback_criterion = ic;
    const RationalFitResult fit = fit_rational(pts, o);
    CHECK(fit.order_decided_by == (ic == InformationCriterion::mdl ? "mdl" : "aic"));
    REQUIRE(fit.order_trials.size() == 2);
    CHECK(!fit.adequate);
    // The chosen order has the lowest criterion of the tried ones (AIC: V + 2n, MDL: V + n ln 2K).
    auto score = [ic](const OrderTrial& t) { return ic == InformationCriterion::mdl ? t.mdl : t.aic; };
    const OrderTrial* chosen = nullptr;
    for (const OrderTrial& t : fit.order_trials) {
      CHECK(!t.passed);
      if (t.order.num == fit.order.num && t.order.den == fit.order.den) chosen = &t;
    }
    REQUIRE(chosen != nullptr);
    CHECK(chosen->cost == fit.cost);
    for (const OrderTrial& t : fit.order_trials) CHECK(score(*chosen) <= score(t));
    const OrderTrial& t0 = fit.order_trials[0];
    CHECK(t0.aic == doctest::Approx(t0.cost + 2 * t0.parameters));
    CHECK(t0.mdl == doctest::Approx(t0.cost + t0.parameters * std::log(2.0 * 25)));
  }
}

TEST_CASE("rational fit: a right-half-plane pole is flagged unstable with a negative time constant") {
  // H = 1/(1 − sτ): pole at +1/τ (standard circuit theory sign convention), |H| as the RC case.
  const double tau = 1e-3;
  const std::vector<double> w = harmonics(100, 1, 20);
  const auto pts = points_of(w, response({-1 / tau}, {-1 / tau, 1}, w), kSnr60dB);
  RationalFitOptions o;
  o.order = {0, 1};
  const RationalFitResult fit = fit_rational(pts, o);
  CHECK(fit.unstable);
  check_within(fit.poles[0].value.real(), fit.poles[0].re_u, 1 / tau, "pole");
  check_within(fit.poles[0].time_constant_s, fit.poles[0].time_constant_u_s, -tau, "tau");
}

TEST_CASE("rational fit: the cost of a correct model follows χ²(2K − n) over repeated noise") {
  // A correctly weighted least-squares cost at the optimum of a linear-in-the-limit model has
  // mean dof (common practice; Pintelon & Schoukens ch. 9). 200 draws: the sample mean of χ²(58)
  // has a standard deviation √(2·58/200) ≈ 0.76, so ±4 (> 5σ) cannot fail by chance.
  const double tau = 1e-3;
  const std::vector<double> w = harmonics(40, 1, 30);
  const auto h = response({1 / tau}, {1 / tau, 1}, w);
  RationalFitOptions o;
  o.order = {0, 1};
  double sum = 0;
  int covered = 0;
  int adequate = 0;
  constexpr int kDraws = 200;
  for (int i = 0; i < kDraws; ++i) {
    const RationalFitResult fit = fit_rational(points_of(w, h, kSnr60dB, 1000 + static_cast<std::uint64_t>(i)), o);
    sum += fit.cost;
    if (fit.adequate) ++adequate;
    if (std::abs(fit.model.den[0] - 1 / tau) <= 1.96 * fit.parameter_u[1]) ++covered;
  }
  CHECK(sum / kDraws == doctest::Approx(2.0 * 30 - 2).epsilon(4.0 / 58));
  // 95 % coverage of a0: binomial(200, 0.95) has σ ≈ 3.1 draws; accept 181…199 (> 3σ).
  CHECK(covered >= 181);
  // The verdict uses the same 95 % band, so the correct model is called adequate in 181…199.
  CHECK(adequate >= 181);
  CHECK(adequate <= 199);
}

TEST_CASE("rational fit: 95 % intervals of every parameter and derived quantity cover the truth") {
  // Monte Carlo coverage (issue 4, item 8, at the fit level): 1000 noisy FRFs of a band-pass
  // (order 1/2) at 60 dB SNR. For a calibrated first-order covariance each ±1.96σ interval holds
  // the truth in 95 % of draws; binomial(1000, 0.95) has σ = 0.69 %, so the 95 ± 2.5 %
  // band is 3.6σ wide and cannot fail by chance. The same band applies to the χ² verdict of the
  // true model. Figures are printed (docs/performance.md records them).
  // tools/bench/rational_fit_coverage.sh raises the draw count through PERIODFIT_FIT_DRAWS.
  const char* env = std::getenv("PERIODFIT_FIT_DRAWS");
  const int kDraws = env ? std::max(1000, std::atoi(env)) : 1000;
  constexpr double kCoverageTolerance = 0.025;
  const double wn = 2 * kPi * 1500, q = 4;
  const std::vector<double> num{0, wn / q}, den{wn * wn, wn / q, 1};
  const std::vector<double> w = harmonics(100, 1, 30);
  const auto h = response(num, den, w);
  RationalFitOptions o;
  o.order = {1, 2};
  const std::vector<std::string> names{"b0", "b1", "a0", "a1", "omega_n", "zeta", "Q", "chi2 band"};
  const std::vector<double> truth{0, wn / q, wn * wn, wn / q, wn, 1 / (2 * q), q};
  std::vector<int> hits(names.size(), 0);
  for (int i = 0; i < kDraws; ++i) {
    const RationalFitResult fit = fit_rational(points_of(w, h, kSnr60dB, 5000 + static_cast<std::uint64_t>(i)), o);
    const Root& p = fit.poles[0];
    const std::vector<double> est{fit.model.num[0], fit.model.num[1], fit.model.den[0], fit.model.den[1],
                                  p.natural_frequency_rad_s, p.damping_ratio, p.q_factor};
    const std::vector<double> u{fit.parameter_u[0], fit.parameter_u[1], fit.parameter_u[2], fit.parameter_u[3],
                                p.natural_frequency_u_rad_s, p.damping_ratio_u, p.q_factor_u};
    for (std::size_t j = 0; j < est.size(); ++j)
      if (std::abs(est[j] - truth[j]) <= 1.96 * u[j]) ++hits[j];
    if (fit.adequate) ++hits.back();
  }
  for (std::size_t j = 0; j < names.size(); ++j) {
    const double coverage = static_cast<double>(hits[j]) / kDraws;
    MESSAGE(names[j] << ": 95 % coverage " << coverage * 100 << " % over " << kDraws << " draws");
    CHECK(std::abs(coverage - 0.95) <= kCoverageTolerance);
  }
}

TEST_CASE("rational fit: too few points for the order say how many are needed") {
  const std::vector<double> w = harmonics(100, 1, 2);
  const auto pts = points_of(w, response({1}, {1, 1}, w), 0);
  RationalFitOptions o;
  o.order = {1, 2};
  CHECK_THROWS_WITH_AS(fit_rational(pts, o),
                       "a rational model of order 1/2 has 4 parameters and needs at least 3 FRF points "
                       "(2 equations each, one degree of freedom left for the chi-squared test); got 2",
                       AnalysisError);
  o.order = {0, 1};
  o.estimate_delay = true;
  CHECK_THROWS_WITH_AS(fit_rational(points_of(harmonics(100, 1, 1), {cplx(0.5, -0.5)}, 0), o),
                       "a rational model of order 0/1 with delay has 3 parameters and needs at least 2 FRF points "
                       "(2 equations each, one degree of freedom left for the chi-squared test); got 1",
                       AnalysisError);
  CHECK(required_points({0, 1}, false) == 2);
  CHECK(required_points({2, 3}, true) == 4);
}

TEST_CASE("rational fit: an over-parameterised exact fit is singular (pole-zero cancellation)") {
  // Exact first-order data fitted with 1/2: B/A = (s + c)/((s + c)(s + 1/τ)) for any c, so the
  // linearised equations have a one-dimensional null space (linear algebra).
  const std::vector<double> w = harmonics(100, 1, 20);
  std::vector<FrfPoint> pts;
  for (cplx h : response({1000}, {1000, 1}, w)) pts.push_back(FrfPoint::circular(w[pts.size()], h, 1e-20));
  RationalFitOptions o;
  o.order = {1, 2};
  CHECK_THROWS_WITH_AS(fit_rational(pts, o),
                       "the rational fit of order 1/2 is singular: the linearised start has rank 3 < 4 (the data "
                       "cannot determine this many coefficients; lower the order)",
                       AnalysisError);
}

TEST_CASE("rational fit: invalid points and options are named") {
  RationalFitOptions o;
  CHECK_NOTHROW(o.validate());
  std::vector<FrfPoint> pts{FrfPoint::circular(10, 1, 1e-6), FrfPoint::circular(20, 1, 1e-6),
                            {30, 1, 1e-6, 1e-6, 2e-6}};
  CHECK_THROWS_WITH_AS(fit_rational(pts, o),
                       "FRF point 3 (omega = 30 rad/s): the covariance of (Re, Im) is not positive definite "
                       "(var_re = 1e-06, var_im = 1e-06, cov = 2e-06)",
                       AnalysisError);
  pts[2] = FrfPoint::circular(-1, 1, 1e-6);
  CHECK_THROWS_WITH_AS(fit_rational(pts, o), "FRF point 3 (omega = -1 rad/s): the frequency must be finite and > 0",
                       AnalysisError);
  o.confidence = 1;
  CHECK_THROWS_WITH_AS(o.validate(), "invalid option: confidence = 1 (must be in (0, 1))", OptionError);
  o = {};
  o.order = {0, 0};
  CHECK_THROWS_WITH_AS(o.validate(), "invalid option: order = 0/0 (denominator degree N must be >= 1)", OptionError);
  CHECK(parse_model_order("2/3").num == 2);
  CHECK(parse_model_order("2/3").den == 3);
  CHECK_THROWS_WITH_AS(parse_model_order("2-3"),
                       "invalid option: order = 2-3 (must be M/N with M >= 0 and N >= 1, e.g. 1/2)", OptionError);
  CHECK_THROWS_AS(parse_model_order("1/0"), OptionError);
  CHECK_THROWS_AS(parse_model_order("1/2x"), OptionError);
}
