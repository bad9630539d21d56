// Superposition: steady-state predictions against scipy.signal.lsim, the common-practice RC
// ripple rule, closed forms, and first-order uncertainty against finite differences and Monte
// Carlo.
#include <doctest/doctest.h>

#include <Eigen/Cholesky>
#include <cmath>
#include <numbers>
#include <random>
#include <sstream>

#include "core/error.hpp"
#include "output/predict_output.hpp"
#include "predict/input_series.hpp"
#include "predict/superposition.hpp"
#include "support/python_ref.hpp"
#include "support/code_table.hpp"

using namespace periodfit;
using dsp::WaveKind;

namespace {
constexpr double kPi = std::numbers::pi;
/// The acceptance bound: max abs error over one period < 1e-4 of the peak.
constexpr double kLsimRelTol = 1e-4;
/// lsim grid: 20000 samples per period (step T/20000 = 1 µs at 50 Hz), see predict_lsim.py.
constexpr int kLsimSamplesPerPeriod = 20000;
/// Periods simulated from rest: the slowest mode here decays as e^{−565 t}; 4 periods of 20 ms
/// leave e^{−45} of the transient.
constexpr int kLsimPeriods = 4;

dsp::WaveSpec wave(WaveKind kind, double a, double f0) {
  dsp::WaveSpec w;
  w.kind = kind;
  w.amplitude_v = a;
  w.f0_hz = f0;
  return w;
}

std::string join(const std::vector<double>& v) {
  std::ostringstream s;
  s.precision(17);
  for (std::size_t i = 0; i < v.size(); ++i) s << (i ? "," : "") << v[i];
  return s.str();
}

std::vector<double> lsim_period(const std::vector<double>& num, const std::vector<double>& den,
                                const char* kind, double a, double f0) {
  const auto out = test::run_python("predict_lsim.py", join(num) + " " + join(den) + " " + kind + " " +
                                                           std::to_string(a) + " " + std::to_string(f0) + " " +
                                                           std::to_string(kLsimPeriods) + " " +
                                                           std::to_string(kLsimSamplesPerPeriod));
  REQUIRE(out);
  std::istringstream in(*out);
  std::vector<double> y;
  int k = 0;
  double v = 0;
  while (in >> k >> v) y.push_back(v);
  REQUIRE(y.size() == static_cast<std::size_t>(kLsimSamplesPerPeriod));
  return y;
}

struct Agreement {
  double max_error = 0;
  double peak = 0;
};
Agreement compare(const predict::PredictResult& r, const std::vector<double>& ref) {
  Agreement a;
  REQUIRE(r.value.size() == ref.size());
  for (std::size_t k = 0; k < ref.size(); ++k) {
    a.max_error = std::max(a.max_error, std::abs(r.value[k] - ref[k]));
    a.peak = std::max(a.peak, std::abs(ref[k]));
  }
  return a;
}

predict::PredictOptions lsim_grid(int harmonics) {
  predict::PredictOptions o;
  o.truncation.harmonics = harmonics;
  o.default_samples_per_period = kLsimSamplesPerPeriod;  // samples at t = k/(M·f0), as lsim's grid
  return o;
}
}  // namespace

TEST_CASE("superposition: RC and second-order low-pass steady states match scipy.signal.lsim") {
  if (!test::python_has("numpy, scipy")) {
    MESSAGE("SKIPPED: /usr/bin/python3 lacks numpy/scipy; the lsim comparison did not run");
    return;
  }
  const double f0 = 50, a = 10;
  const double tau = 1e-3;  // RC low-pass H = 1/(1 + sτ), τ = 1 ms
  const std::vector<double> rc_num{1 / tau}, rc_den{1 / tau, 1};
  const double wn = 2 * kPi * 300, zeta = 0.3;  // second order, resonance near harmonic 6
  const std::vector<double> lp2_num{wn * wn}, lp2_den{wn * wn, 2 * zeta * wn, 1};
  struct Case {
    const char* name;
    std::vector<double> num, den;
    WaveKind kind;
    const char* kind_name;
    int harmonics;  // 0 = automatic
  };
  // Square: the automatic count (405 285 harmonics, energy bound 1e-6) leaves an output tail of
  // ~2/N of the peak after the 1/n roll-off of a strictly proper H. Half-wave: its automatic
  // count is small (terms ∝ 1/n², energy ∝ 1/N³) and leaves a visible tail, so 4000 harmonics
  // are given (tail ≈ A/(π·ω0τ·N²)).
  const Case cases[] = {
      {"RC, square", rc_num, rc_den, WaveKind::square, "square", 0},
      {"RC, half-wave", rc_num, rc_den, WaveKind::half_wave, "half-wave", 4000},
      {"2nd order, square", lp2_num, lp2_den, WaveKind::square, "square", 0},
      {"2nd order, half-wave", lp2_num, lp2_den, WaveKind::half_wave, "half-wave", 4000},
  };
  for (const auto& c : cases) {
    INFO(std::string(c.name));
    predict::PredictSystem sys;
    sys.model = predict::model_from_coefficients(c.num, c.den);
    const auto r = predict::predict_steady_state(wave(c.kind, a, f0), sys, lsim_grid(c.harmonics));
    const auto ref = lsim_period(c.num, c.den, c.kind_name, a, f0);
    const Agreement g = compare(r, ref);
    INFO("max error " << g.max_error << " of peak " << g.peak << ", harmonics " << r.harmonics);
    MESSAGE(std::string(c.name) << ": N = " << r.harmonics << ", max |error| = " << g.max_error / g.peak << " of the peak");
    CHECK(g.max_error < kLsimRelTol * g.peak);
    // The reported tail covers the truncation error (1.1: extrapolation; 1e-8: lsim's own error).
    CHECK(g.max_error <= 1.1 * r.output_tail_estimate + 1e-8 * g.peak);
    CHECK(r.status == Status::ok);
    CHECK(r.sampling_method == "folded-dft");
    // The extremes agree with the simulation's extremes too.
    const auto lo_hi = std::minmax_element(ref.begin(), ref.end());
    [[maybe_unused]] const auto& lo = std::get<0>(lo_hi);
    [[maybe_unused]] const auto& hi = std::get<1>(lo_hi);
    CHECK(std::abs(r.max - *hi) < kLsimRelTol * g.peak);
    CHECK(std::abs(r.min - *lo) < kLsimRelTol * g.peak);
  }
}

TEST_CASE("superposition: the output tail estimate bounds the error of an automatic count") {
  if (!test::python_has("numpy, scipy")) {
    MESSAGE("SKIPPED: /usr/bin/python3 lacks numpy/scipy; the lsim comparison did not run");
    return;
  }
  // Half-wave into the RC with the automatic count: the tail is visible and must say so. The
  // estimate sums |Y_n| for N < n ≤ 4N; with |Y_n| ∝ 1/n³ the rest adds ≈ (N/4N)² = 1/16 of it,
  // so the true error stays below 1.1 × the estimate (+ the lsim error, 1e-8 of the peak).
  constexpr double kTailEstimateFactor = 1.1;
  const double tau = 1e-3, f0 = 50, a = 10;
  predict::PredictSystem sys;
  sys.model = predict::model_from_coefficients({1 / tau}, {1 / tau, 1});
  const auto r = predict::predict_steady_state(wave(WaveKind::half_wave, a, f0), sys, lsim_grid(0));
  const auto ref = lsim_period({1 / tau}, {1 / tau, 1}, "half-wave", a, f0);
  const Agreement g = compare(r, ref);
  INFO("N = " << r.harmonics << ", error " << g.max_error << ", estimate " << r.output_tail_estimate);
  CHECK(r.status == Status::truncation_visible);
  CHECK(r.output_tail_estimate > predict::kVisibleTailFraction * g.peak);
  CHECK(g.max_error <= kTailEstimateFactor * r.output_tail_estimate + 1e-8 * g.peak);
  CHECK(g.max_error > 0.5 * r.output_tail_estimate);  // the estimate is not wildly pessimistic
  REQUIRE(r.warnings.size() == 1);
  CHECK(r.warnings[0].find("raise the harmonic count") != std::string::npos);
}

TEST_CASE("superposition: a system that passes high frequencies shows Gibbs on a square and says so") {
  // H = (s + 2000)/(s + 1000): |H(j∞)| = 1, so |Y_n| ∝ 1/n like the square's own series and
  // Σ|Y_n| diverges (harmonic series).
  predict::PredictSystem sys;
  sys.model = predict::model_from_coefficients({2000, 1}, {1000, 1});
  predict::PredictOptions o;
  o.truncation.harmonics = 2001;
  const auto r = predict::predict_steady_state(wave(WaveKind::square, 1, 50), sys, o);
  CHECK(r.status == Status::truncation_visible);
  CHECK(r.output_tail_method == predict::TailMethod::summed_diverges);
  CHECK(std::find(r.flags.begin(), r.flags.end(), Flag::gibbs) != r.flags.end());
  REQUIRE(r.warnings.size() == 1);
  CHECK(r.warnings[0].find("does not converge") != std::string::npos);
  // H = 1 + 1000/(s + 1000): the square plus its RC-filtered copy, which reaches tanh(T/4τ) =
  // tanh(5) just before the falling edge (closed form of an RC's square-wave steady state). The
  // output's jump there is 2, and the partial sums overshoot it by the Wilbraham–Gibbs constant
  // Si(π)/π − 1/2 = 0.0894899 (from memory) of the jump.
  constexpr double kGibbs = 0.0894899;
  constexpr double kGibbsTol = 2e-3;  // finite N: the overshoot peak sits T/(2N) from the jump
  CHECK(r.max == doctest::Approx(1 + std::tanh(5.0) + 2 * kGibbs).epsilon(kGibbsTol));
}

TEST_CASE("superposition: RC with tau >> T on a full-wave rectified input ripples at 2 f0, ~1/(2 w0 tau)") {
  // Common practice, no source: with τ ≫ T the output ripple is dominated by the 2f0 term,
  // 4A/(3π) (handbook full-wave series) attenuated by |H(j2ω0)| ≈ 1/(2ω0τ).
  const double a = 10, f0 = 50, tau = 0.1;  // 2ω0τ = 62.8
  predict::PredictSystem sys;
  sys.model = predict::model_from_coefficients({1 / tau}, {1 / tau, 1});
  const auto r = predict::predict_steady_state(wave(WaveKind::full_wave, a, f0), sys);
  const double w0 = 2 * kPi * f0;
  const double a2_rule = 4 * a / (3 * kPi) / (2 * w0 * tau);
  // 1/(2ω0τ) vs the exact 1/sqrt(1 + (2ω0τ)²): relative difference 1/(2(2ω0τ)²) = 1.3e-4.
  constexpr double kRuleApproximation = 2e-4;
  REQUIRE(r.harmonics_out.size() >= 2);
  CHECK(r.harmonics_out[0].n == 2);  // odd harmonics are absent from |sin|
  CHECK(r.harmonics_out[0].amplitude == doctest::Approx(a2_rule).epsilon(kRuleApproximation));
  CHECK(r.dc == doctest::Approx(2 * a / kPi).epsilon(1e-12));  // H(0) = 1, dc 2A/π
  // Dominated: input terms 1/3 and 1/15 (×4A/π) at 2f0 and 4f0, attenuated 1/2 and 1/4 (×1/(ω0τ)),
  // so the 4f0 term has 1/10 of the 2f0 amplitude, 1/100 of its energy: the 2f0 term carries
  // 1/(1 + 0.01 + 0.0008 + …) ≈ 0.989 of the ripple energy.
  double ac = 0;
  for (const auto& h : r.harmonics_out) ac += h.amplitude * h.amplitude / 2;
  const double a2 = r.harmonics_out[0].amplitude;
  CHECK(a2 * a2 / 2 / ac > 0.985);
  // Peak-to-peak ripple ≈ 2·A_2: higher terms add at most 2·Σ_{k≥2} A_2k ≈ 15 % of it.
  CHECK(r.ripple_pp == doctest::Approx(2 * a2).epsilon(0.16));
  CHECK_FALSE(r.thd_defined);  // no fundamental at f0
  CHECK(std::find(r.flags.begin(), r.flags.end(), Flag::no_fundamental) != r.flags.end());
}

TEST_CASE("superposition: closed forms for a sine through a first-order low-pass") {
  // Sinusoidal steady state (any circuits text): |H| = 1/sqrt(1 + (ωτ)²), ∠H = −atan(ωτ).
  const double a = 2, f0 = 200, tau = 1e-3;
  predict::PredictSystem sys;
  sys.model = predict::model_from_coefficients({1 / tau}, {1 / tau, 1});
  auto w = wave(WaveKind::sine, a, f0);
  w.offset_v = 0.5;
  const auto r = predict::predict_steady_state(w, sys);
  const double wt = 2 * kPi * f0 * tau;
  REQUIRE(r.harmonics_out.size() == 1);
  CHECK(r.harmonics_out[0].amplitude == doctest::Approx(a / std::sqrt(1 + wt * wt)).epsilon(1e-14));
  CHECK(r.harmonics_out[0].phase_deg == doctest::Approx(-90 - std::atan(wt) * 180 / kPi).epsilon(1e-13));
  CHECK(r.dc == doctest::Approx(0.5).epsilon(1e-15));
  const double amp = a / std::sqrt(1 + wt * wt);
  CHECK(r.rms == doctest::Approx(std::sqrt(0.25 + amp * amp / 2)).epsilon(1e-14));
  CHECK(r.ripple_pp == doctest::Approx(2 * amp).epsilon(1e-12));  // Newton-refined extremes
  CHECK(r.thd == 0);
  CHECK(r.status == Status::ok);
  CHECK(r.output_tail_estimate == 0);
  CHECK_FALSE(r.has_uncertainty);
  CHECK(r.value_u.empty());
  CHECK(r.value.size() == 1000);  // default 1000 samples per period, one period
  CHECK(r.time_s[1] == doctest::Approx(1 / (1000 * f0)));
  // A rate that is not a whole multiple of f0 is evaluated directly, same values.
  predict::PredictOptions o;
  o.rate_hz = 12345;
  o.periods = 2;
  const auto d = predict::predict_steady_state(w, sys, o);
  CHECK(d.sampling_method == "direct");
  CHECK(d.value.size() == static_cast<std::size_t>(std::ceil(2 * 12345 / f0)));
  for (std::size_t k = 0; k < d.value.size(); k += 17) {
    const double t = d.time_s[k];
    const double want = 0.5 + amp * std::cos(2 * kPi * f0 * t - kPi / 2 - std::atan(wt));
    CHECK(d.value[k] == doctest::Approx(want).epsilon(1e-12));
  }
  // A dead time shifts the phase by −ωT.
  sys.model->delay_s = 1e-4;
  const auto dl = predict::predict_steady_state(w, sys);
  CHECK(dl.harmonics_out[0].phase_deg ==
        doctest::Approx(r.harmonics_out[0].phase_deg - 2 * 180 * f0 * 1e-4).epsilon(1e-12));
}

namespace {
/// RC model b0/(a0 + s) with a correlated covariance of relative size ~1e-3 (small enough for
/// the first-order propagation to hold to ~1e-3).
ident::RationalModel uncertain_rc() {
  auto m = predict::model_from_coefficients({1000}, {1000, 1});
  m.covariance = {{1.0, 0.6}, {0.6, 1.44}};  // σ(b0) = 1, σ(a0) = 1.2, ρ = 0.5
  return m;
}
}  // namespace

TEST_CASE("superposition: propagated uncertainty matches finite differences") {
  // GUM first-order propagation u² = ∇ᵀC∇; the gradient here by central differences.
  constexpr double kStep = 1e-3;      // in parameter units (θ ~ 1000): truncation error ~ step²
  constexpr double kFdRel = 1e-6;
  const auto w = wave(WaveKind::square, 1, 100);
  predict::PredictOptions o;
  o.truncation.harmonics = 51;
  o.default_samples_per_period = 64;
  predict::PredictSystem sys;
  sys.model = uncertain_rc();
  const auto r = predict::predict_steady_state(w, sys, o);
  REQUIRE(r.has_uncertainty);
  const auto perturbed = [&](int p, double h) {
    predict::PredictSystem s;
    s.model = predict::model_from_coefficients({1000 + (p == 0 ? h : 0)}, {1000 + (p == 1 ? h : 0), 1});
    return predict::predict_steady_state(w, s, o);
  };
  const auto p0 = perturbed(0, kStep), m0 = perturbed(0, -kStep), p1 = perturbed(1, kStep), m1 = perturbed(1, -kStep);
  const auto& c = sys.model->covariance;
  const auto fd_u = [&](auto get) {
    const double g0 = (get(p0) - get(m0)) / (2 * kStep), g1 = (get(p1) - get(m1)) / (2 * kStep);
    return std::sqrt(g0 * g0 * c[0][0] + 2 * g0 * g1 * c[0][1] + g1 * g1 * c[1][1]);
  };
  for (std::size_t k = 0; k < r.value.size(); k += 5) {
    INFO("sample " << k);
    CHECK(r.value_u[k] == doctest::Approx(fd_u([&](const auto& x) { return x.value[k]; })).epsilon(kFdRel));
  }
  CHECK(r.rms_u == doctest::Approx(fd_u([](const auto& x) { return x.rms; })).epsilon(kFdRel));
  CHECK(r.thd_u == doctest::Approx(fd_u([](const auto& x) { return x.thd; })).epsilon(kFdRel));
  CHECK(r.ripple_pp_u == doctest::Approx(fd_u([](const auto& x) { return x.ripple_pp; })).epsilon(1e-4));
  for (std::size_t i = 0; i < 5; ++i) {
    CHECK(r.harmonics_out[i].amplitude_u ==
          doctest::Approx(fd_u([&](const auto& x) { return x.harmonics_out[i].amplitude; })).epsilon(kFdRel));
    CHECK(r.harmonics_out[i].phase_u_deg ==
          doctest::Approx(fd_u([&](const auto& x) { return x.harmonics_out[i].phase_deg; })).epsilon(kFdRel));
  }
  // Square has no dc: its dc uncertainty is exactly 0. A half-wave's dc is b0/a0·A/π.
  CHECK(r.dc_u == 0);
  const auto hw = predict::predict_steady_state(wave(WaveKind::half_wave, 1, 100), sys, o);
  const double ddc_b0 = 1 / kPi / 1000, ddc_a0 = -1 / kPi / 1000;  // ∂(b0/a0·A/π)
  CHECK(hw.dc_u == doctest::Approx(std::sqrt(ddc_b0 * ddc_b0 * 1 + 2 * ddc_b0 * ddc_a0 * 0.6 + ddc_a0 * ddc_a0 * 1.44))
                       .epsilon(1e-12));
}

TEST_CASE("superposition: per-harmonic uncertainties of a 400 000-harmonic square take linear time") {
  // A square wave's automatic count (energy bound 1e-6, 1/n² tail) is ~4.05e5 harmonics. Each
  // harmonic's u(|Y_n|) and u(∠Y_n) depends on Y_n alone; propagating it through the whole
  // sensitivity vector made the table O(N²): this very problem ran for more than 10 minutes at
  // 100 % CPU, beyond the 300 s ctest timeout of this file, and now takes well under a second.
  // The guard is that bound, not a clock. The values are checked against the closed form of
  // the RC gain H = b0/(a0 + jω): |Y_n| = b0·|X_n|/sqrt(a0² + ω²), so
  // ∂|Y_n|/∂b0 = |Y_n|/b0 and ∂|Y_n|/∂a0 = −|Y_n|·a0/(a0² + ω²) (GUM JCGM 100 §5.1.2).
  constexpr double kClosedFormRel = 1e-12;  // a few roundings in H, ∂H/∂θ and the quadratic form
  const auto w = wave(WaveKind::square, 1, 500);
  predict::PredictOptions o;
  o.default_samples_per_period = 16;  // the samples are not what is timed here
  const dsp::SeriesTruncation input = dsp::truncate_series(w, o.truncation);
  REQUIRE(input.harmonics > 400000);  // the automatic count of the report (405285)
  predict::PredictSystem sys;
  sys.model = uncertain_rc();
  const auto r = predict::predict_steady_state(input, sys, o, {});
  REQUIRE(r.has_uncertainty);
  REQUIRE(r.harmonics_out.size() == static_cast<std::size_t>((input.harmonics + 1) / 2));  // odd n only
  const auto& c = sys.model->covariance;
  for (const std::size_t i : {std::size_t{0}, std::size_t{7}, r.harmonics_out.size() - 1}) {
    const auto& h = r.harmonics_out[i];
    INFO("harmonic " << h.n);
    const double omega = 2 * kPi * h.freq_hz, a0 = 1000, b0 = 1000;
    const double g_b0 = h.amplitude / b0, g_a0 = -h.amplitude * a0 / (a0 * a0 + omega * omega);
    const double want = std::sqrt(g_b0 * g_b0 * c[0][0] + 2 * g_b0 * g_a0 * c[0][1] + g_a0 * g_a0 * c[1][1]);
    CHECK(h.amplitude_u == doctest::Approx(want).epsilon(kClosedFormRel));
  }
}

TEST_CASE("superposition: propagated uncertainty matches a Monte Carlo over the model covariance") {
  // Draws θ ~ N(θ̂, C) (Cholesky of C), predicts each, and compares the sample standard
  // deviations with the reported u. 2000 draws: the sd of a sample sd is 1/sqrt(2·2000) = 1.6 %;
  // 8 % is 5 of those.
  constexpr int kDraws = 2000;
  constexpr double kMonteCarloRel = 0.08;
  const auto w = wave(WaveKind::half_wave, 5, 100);
  predict::PredictOptions o;
  o.truncation.harmonics = 40;
  o.default_samples_per_period = 50;
  predict::PredictSystem sys;
  sys.model = uncertain_rc();
  sys.model->covariance = {{400, 240}, {240, 576}};  // σ 20 and 24 on θ ≈ 1000: still ~linear
  const auto r = predict::predict_steady_state(w, sys, o);
  Eigen::Matrix2d c;
  c << 400, 240, 240, 576;
  const Eigen::Matrix2d l = c.llt().matrixL();
  std::mt19937_64 rng(20261202);
  std::normal_distribution<double> normal;
  std::vector<double> sum(r.value.size()), sum2(r.value.size());
  double dc = 0, dc2 = 0, h1 = 0, h12 = 0;
  for (int d = 0; d < kDraws; ++d) {
    const Eigen::Vector2d z(normal(rng), normal(rng));
    const Eigen::Vector2d th = Eigen::Vector2d(1000, 1000) + l * z;
    predict::PredictSystem s;
    s.model = predict::model_from_coefficients({th[0]}, {th[1], 1});
    const auto x = predict::predict_steady_state(w, s, o);
    for (std::size_t k = 0; k < x.value.size(); ++k) sum[k] += x.value[k], sum2[k] += x.value[k] * x.value[k];
    dc += x.dc, dc2 += x.dc * x.dc;
    h1 += x.harmonics_out[0].amplitude, h12 += x.harmonics_out[0].amplitude * x.harmonics_out[0].amplitude;
  }
  const auto sd = [&](double s, double s2) { return std::sqrt((s2 - s * s / kDraws) / (kDraws - 1)); };
  for (std::size_t k = 0; k < r.value.size(); k += 7) {
    INFO("sample " << k);
    CHECK(r.value_u[k] == doctest::Approx(sd(sum[k], sum2[k])).epsilon(kMonteCarloRel));
  }
  CHECK(r.dc_u == doctest::Approx(sd(dc, dc2)).epsilon(kMonteCarloRel));
  CHECK(r.harmonics_out[0].amplitude_u == doctest::Approx(sd(h1, h12)).epsilon(kMonteCarloRel));
}

TEST_CASE("superposition: measured FRF is used only where it holds points") {
  const double f0 = 100;
  const auto rc = predict::model_from_coefficients({1000}, {1000, 1});
  std::vector<ident::FrfPoint> frf;
  for (int n : {1, 3, 5}) {
    const double w = 2 * kPi * f0 * n;
    frf.push_back(ident::FrfPoint::circular(w, rc.response(w) * 1.01, 1e-6));  // 1 % off the model
  }
  auto sq = wave(WaveKind::square, 1, f0);
  predict::PredictOptions o;
  o.truncation.harmonics = 7;
  predict::PredictSystem measured_only;
  measured_only.measured = frf;
  CHECK_THROWS_WITH_AS(predict::predict_steady_state(sq, measured_only, o),
                       "the measured FRF holds no point at 700 Hz (harmonic 7 of the input) and there is no "
                       "model to fill it (it holds 3 points from 100 Hz to 500 Hz); give a model or limit the "
                       "harmonic count",
                       AnalysisError);
  o.truncation.harmonics = 6;  // harmonic 6 of a square is zero: needs no point
  const auto m = predict::predict_steady_state(sq, measured_only, o);
  CHECK(m.method == "superposition (measured FRF)");
  REQUIRE(m.harmonics_out.size() == 3);
  CHECK(m.harmonics_out[1].gain == rc.response(2 * kPi * 300) * 1.01);
  CHECK(m.has_uncertainty);
  // A half-wave's dc needs H(0), which a measured FRF never holds.
  CHECK_THROWS_WITH_AS(predict::predict_steady_state(wave(WaveKind::half_wave, 1, f0), measured_only, o),
                       "the measured FRF holds no point at 0 Hz but the input has a dc of 0.3183098861837907 (it "
                       "holds 3 points from 100 Hz to 500 Hz); give a model or remove the dc",
                       AnalysisError);
  // With a model and prefer_measured: measured where held, the model elsewhere.
  predict::PredictSystem both;
  both.model = rc;
  both.measured = frf;
  both.prefer_measured = true;
  o.truncation.harmonics = 9;
  const auto b = predict::predict_steady_state(sq, both, o);
  CHECK(b.method == "superposition (measured FRF + model)");
  REQUIRE(b.harmonics_out.size() == 5);
  CHECK(b.harmonics_out[2].source == "measured");
  CHECK(b.harmonics_out[3].source == "model");
  CHECK(std::abs(b.harmonics_out[3].gain - rc.response(2 * kPi * 700)) < 1e-15);
  both.prefer_measured = false;
  CHECK(predict::predict_steady_state(sq, both, o).method == "superposition (model)");
  // A sine through a measured point of circular variance σ²: y = Re(H X e^{jθ}) has
  // u = |X|·σ/√2 at every instant (half the variance lies along any direction).
  auto s = wave(WaveKind::sine, 2, f0);
  const auto one = predict::predict_steady_state(s, measured_only);
  for (double u : one.value_u) CHECK(u == doctest::Approx(2 * 1e-3 / std::sqrt(2.0)).epsilon(1e-12));
}

TEST_CASE("superposition: bad models and options are refused with clear messages") {
  CHECK_THROWS_WITH_AS(predict::model_from_coefficients({1}, {1, 0.001, 0}),
                       "invalid option: den = 1,0.001,0 (the highest-power coefficient a2 must be nonzero; drop "
                       "trailing zeros to lower the order)",
                       OptionError);
  CHECK_THROWS_AS(predict::model_from_coefficients({}, {1, 1}), OptionError);
  CHECK_THROWS_AS(predict::model_from_coefficients({1}, {1, 1}, -1), OptionError);
  const auto m = predict::model_from_coefficients({2}, {4, 2});  // normalised to monic
  CHECK(m.den == std::vector<double>{2, 1});
  CHECK(m.num == std::vector<double>{1});
  predict::PredictSystem unstable;
  unstable.model = predict::model_from_coefficients({1}, {-5, 1});
  CHECK_THROWS_WITH_AS(predict::predict_steady_state(wave(WaveKind::sine, 1, 50), unstable),
                       "the model has a pole at 5+0j rad/s, not in the open left half-plane: it has no periodic "
                       "steady state",
                       AnalysisError);
  predict::PredictSystem integrator;
  integrator.model = predict::model_from_coefficients({1}, {0, 1});
  CHECK_THROWS_AS(predict::predict_steady_state(wave(WaveKind::sine, 1, 50), integrator), AnalysisError);
  predict::PredictSystem overflow;  // |H| overflows a double: an error, never a NaN result
  overflow.model = predict::model_from_coefficients({1e308, 1e308}, {1, 1});
  CHECK_THROWS_WITH_AS(predict::predict_steady_state(wave(WaveKind::sine, 1, 1000), overflow),
                       "the system's response is not finite at 1000 Hz (harmonic 1): check the model's coefficients",
                       AnalysisError);
  predict::PredictOptions o;
  o.periods = 0;
  CHECK_THROWS_WITH_AS(o.validate(), "invalid option: periods = 0 (must be >= 1)", OptionError);
  CHECK_NOTHROW(predict::PredictOptions{}.validate());  // defaults are valid
  predict::PredictSystem none;
  CHECK_THROWS_AS(predict::predict_steady_state(wave(WaveKind::sine, 1, 50), none), AnalysisError);
}

TEST_CASE("superposition: CSV and JSON carry the documented fields") {
  predict::PredictSystem sys;
  sys.model = uncertain_rc();
  predict::PredictOptions o;
  o.default_samples_per_period = 4;
  const auto r = predict::predict_steady_state(wave(WaveKind::sine, 1, 250), sys, o);
  const std::string csv = output::format_predict_csv(r);
  CHECK(csv.rfind("time_s,value,value_u\n0,", 0) == 0);
  CHECK(std::count(csv.begin(), csv.end(), '\n') == 5);
  const auto j = output::predict_json(r);
  std::vector<std::string> keys;
  for (const auto& [k, v] : j.items()) keys.push_back(k);
  CHECK(keys == std::vector<std::string>{"status", "method", "f0_hz", "harmonics_used", "harmonic_count_method",
                                         "input_left_out_fraction", "output_tail_estimate", "tail_checked_to", "output_tail_method",
                                         "has_uncertainty", "uncertainty_sources", "dc", "dc_u", "rms", "rms_u", "min", "max", "ripple_pp",
                                         "ripple_pp_u", "thd", "thd_u", "harmonics_listed", "harmonics", "samples",
                                         "flags", "warnings"});
  CHECK(j["harmonics"][0]["n"] == 1);
  CHECK(j["harmonics"][0]["amplitude"].get<double>() == r.harmonics_out[0].amplitude);
}

TEST_CASE("superposition: a measured input's covariance is propagated, and adds to the model's") {
  // JCGM 100:2008 §5.1.2: u² = ∇ᵀC∇ over the input's (X_0, Re X_n, Im X_n), C block-diagonal
  // with each harmonic's 2×2 (not circular: the phase-direction noise of jitter); the gradient
  // here by central differences. With a model covariance too, the two are independent:
  // u² = u²(model) + u²(input).
  constexpr double kStep = 1e-6;   // input units (|X| ≤ 1): truncation error ~ step²
  constexpr double kFdRel = 1e-6;
  const double f0 = 100;
  const std::vector<std::complex<double>> x = {std::polar(1.0, 0.3), std::polar(0.2, -1.0), std::polar(0.05, 2.0)};
  const double dc = 0.5, dc_var = 4e-6;
  predict::InputUncertainty in;
  in.dc_var = dc_var;
  in.phasor_cov = {{0, 0, 0}, {1e-6, 3e-6, 1e-6}, {2e-6, 1e-6, -0.5e-6}, {1e-6, 1e-6, 0}};
  predict::PredictOptions o;
  o.default_samples_per_period = 64;
  predict::PredictSystem sys;
  sys.model = predict::model_from_coefficients({1000}, {1000, 1});  // exact: input u only
  const auto r = predict::predict_steady_state(predict::series_from_measurement(f0, dc, x), sys, o, in);
  REQUIRE(r.has_uncertainty);
  CHECK(r.uncertainty_sources == std::vector<std::string>{"input harmonics"});
  // Parameter i: 0 = dc, 1 + 2(n−1) = Re X_n, 2 + 2(n−1) = Im X_n.
  const auto perturbed = [&](std::size_t i, double h) {
    double d = dc;
    auto xs = x;
    if (i == 0) d += h;
    else if (i % 2 == 1) xs[(i - 1) / 2] += h;
    else xs[(i - 2) / 2] += std::complex<double>(0, h);
    return predict::predict_steady_state(predict::series_from_measurement(f0, d, xs), sys, o);
  };
  std::vector<predict::PredictResult> plus, minus;
  for (std::size_t i = 0; i < 7; ++i) {
    plus.push_back(perturbed(i, kStep));
    minus.push_back(perturbed(i, -kStep));
  }
  const auto fd_u = [&](auto get) {
    std::vector<double> g(7);
    for (std::size_t i = 0; i < 7; ++i) g[i] = (get(plus[i]) - get(minus[i])) / (2 * kStep);
    double var = g[0] * g[0] * dc_var;
    for (std::size_t n = 1; n <= 3; ++n) {
      const auto& c = in.phasor_cov[n];
      const double gr = g[2 * n - 1], gi = g[2 * n];
      var += gr * gr * c[0] + gi * gi * c[1] + 2 * gr * gi * c[2];
    }
    return std::sqrt(var);
  };
  CHECK(r.dc_u == doctest::Approx(fd_u([](const auto& y) { return y.dc; })).epsilon(kFdRel));
  CHECK(r.rms_u == doctest::Approx(fd_u([](const auto& y) { return y.rms; })).epsilon(kFdRel));
  CHECK(r.thd_u == doctest::Approx(fd_u([](const auto& y) { return y.thd; })).epsilon(kFdRel));
  CHECK(r.ripple_pp_u == doctest::Approx(fd_u([](const auto& y) { return y.ripple_pp; })).epsilon(1e-4));
  for (std::size_t k = 0; k < r.value.size(); k += 7) {
    INFO("sample " << k);
    CHECK(r.value_u[k] == doctest::Approx(fd_u([&](const auto& y) { return y.value[k]; })).epsilon(kFdRel));
  }
  for (std::size_t i = 0; i < 3; ++i) {
    CHECK(r.harmonics_out[i].amplitude_u ==
          doctest::Approx(fd_u([&](const auto& y) { return y.harmonics_out[i].amplitude; })).epsilon(kFdRel));
    CHECK(r.harmonics_out[i].phase_u_deg ==
          doctest::Approx(fd_u([&](const auto& y) { return y.harmonics_out[i].phase_deg; })).epsilon(kFdRel));
  }
  // Model covariance as well: the variances add.
  predict::PredictSystem both;
  both.model = uncertain_rc();
  const auto model_only = predict::predict_steady_state(predict::series_from_measurement(f0, dc, x), both, o);
  const auto combined = predict::predict_steady_state(predict::series_from_measurement(f0, dc, x), both, o, in);
  CHECK(combined.uncertainty_sources == std::vector<std::string>{"model covariance", "input harmonics"});
  CHECK(combined.rms_u == doctest::Approx(std::hypot(model_only.rms_u, r.rms_u)).epsilon(1e-12));
  CHECK(combined.value_u[3] == doctest::Approx(std::hypot(model_only.value_u[3], r.value_u[3])).epsilon(1e-12));
}

TEST_CASE("superposition: the output-tail methods have distinct codes, those docs/steady-state-json.md lists") {
  const auto c = test::codes_of(predict::TailMethod::summed_diverges, [](predict::TailMethod m) { return code(m); });
  CHECK(test::distinct(c));
  test::check_documented(c, "steady-state-json.md", "| `output_tail_method` |", "\"", "\"");
}
