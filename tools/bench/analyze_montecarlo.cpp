// Statistical efficiency of analyze: Monte Carlo over noisy captures of a sine (3.37 periods,
// 40 dB SNR) against the Cramér–Rao bound, and coverage of the ±1.96·u intervals.
// The bound is computed exactly for the model analyze fits (dc + H harmonics + f0) from its
// Fisher information J^T·J/σ² at the true parameters; for H = 1 it is the single-tone bound
// of Rife & Boorstyn (1974) (their asymptotic forms are printed beside it).
// Usage: analyze_montecarlo TRIALS HARMONICS   (HARMONICS 0 = analyze's default)
#include <Eigen/Dense>
#include <array>
#include <cmath>
#include <cstdio>
#include <cstdlib>
#include <numbers>
#include <random>

#include "dsp/harmonics.hpp"

using std::numbers::pi;

int main(int argc, char** argv) {
  const int trials = argc > 1 ? std::atoi(argv[1]) : 1000;
  const int harmonics = argc > 2 ? std::atoi(argv[2]) : 1;
  const double fs = 1000, f0 = 10.0, periods = 3.37, A = 1.0;
  const auto n = static_cast<std::size_t>(std::llround(periods * fs / f0));  // 337 samples
  const double snr_db = 40, sigma = A / std::sqrt(2 * std::pow(10.0, snr_db / 10));
  std::mt19937_64 rng(20260101);
  std::normal_distribution<double> noise(0.0, 1.0);
  std::uniform_real_distribution<double> uphase(-pi, pi);
  double sf = 0, sff = 0, sa = 0, saa = 0, sp = 0, spp = 0;
  int cover_f = 0, cover_a = 0, cover_p = 0, h_used = 0;
  periodfit::dsp::AnalyzeOptions opt;
  opt.lock.max_harmonic = harmonics;
  std::string method;
  auto bounds = [&](int H, double phi) {
    const double a1 = A * std::cos(phi), b1 = -A * std::sin(phi);
    Eigen::MatrixXd J(static_cast<Eigen::Index>(n), 2 * H + 2);
    for (std::size_t k = 0; k < n; ++k) {
      const double tk = static_cast<double>(k) / fs, w = 2 * pi * f0 * tk;
      const auto r = static_cast<Eigen::Index>(k);
      J(r, 0) = 1;
      for (int m = 1; m <= H; ++m) {
        J(r, m) = std::cos(m * w);
        J(r, H + m) = std::sin(m * w);
      }
      J(r, 2 * H + 1) = 2 * pi * tk * (-a1 * std::sin(w) + b1 * std::cos(w));
    }
    const Eigen::MatrixXd C = sigma * sigma * (J.transpose() * J).inverse();
    // φ = atan2(−b1, a1): ∂φ/∂a1 = b1/A², ∂φ/∂b1 = −a1/A²
    const Eigen::Vector3d gA(a1 / A, b1 / A, 0), gP(b1 / (A * A), -a1 / (A * A), 0);
    Eigen::Matrix3d C3;
    const Eigen::Index ia = 1, ib = H + 1, iff = 2 * H + 1;
    C3 << C(ia, ia), C(ia, ib), C(ia, iff), C(ib, ia), C(ib, ib), C(ib, iff), C(iff, ia),
        C(iff, ib), C(iff, iff);
    return std::array<double, 3>{C(iff, iff), gA.dot(C3 * gA), gP.dot(C3 * gP) * std::pow(180 / pi, 2)};
  };
  std::array<double, 3> bound_sum = {0, 0, 0};
  for (int t = 0; t < trials; ++t) {
    const double phi = uphase(rng);
    periodfit::Channel c;
    c.name = "mc";
    c.samples.resize(n);
    for (std::size_t k = 0; k < n; ++k)
      c.samples[k] = A * std::cos(2 * pi * f0 * static_cast<double>(k) / fs + phi) + sigma * noise(rng);
    const auto a = periodfit::dsp::analyze_channel(c, fs, 0, opt);
    const auto& h1 = a.harmonics[0];
    h_used = a.fundamental.harmonics_fitted;
    method = a.noise_method;
    const double df = a.fundamental.f0_hz - f0, da = h1.amplitude - A;
    double dp = h1.phase_deg - phi * 180 / pi;
    dp = std::remainder(dp, 360.0);
    sf += df; sff += df * df; sa += da; saa += da * da; sp += dp; spp += dp * dp;
    cover_f += std::abs(df) <= 1.96 * a.fundamental.f0_u_hz;
    cover_a += std::abs(da) <= 1.96 * h1.amplitude_u;
    cover_p += std::abs(dp) <= 1.96 * h1.phase_u_deg;
    const auto b = bounds(h_used, phi);
    for (int i = 0; i < 3; ++i) bound_sum[static_cast<std::size_t>(i)] += b[static_cast<std::size_t>(i)];
  }
  const double T = trials;
  auto var = [&](double s, double ss) { return (ss - s * s / T) / (T - 1); };
  // Exact bound: parameters (a_0, a_1..a_H, b_1..b_H, f0) of x_k = a0 + Σ a_n cos(nωt) + b_n
  // sin(nωt) at t = k/fs; truth a_1 = A cos φ, b_1 = −A sin φ, others 0. CRLB = σ²·(J^T J)^{-1};
  // A and φ by the delta method. Over 3.37 periods the bound depends on φ, so it is averaged
  // over the trials' phases (the Monte Carlo variance is an average over them too).
  const int H = h_used;
  const double var_f = bound_sum[0] / T, var_a = bound_sum[1] / T, var_p = bound_sum[2] / T;
  // Rife & Boorstyn (1974) asymptotic single-tone forms for a real tone in real noise,
  // phase at the first sample: var ω = 24σ²/(A²N(N²−1)) (rad/sample)², var A = 2σ²/N,
  // var φ = 4σ²(2N−1)/(A²N(N+1)).
  const double N = static_cast<double>(n);
  const double rb_f = 24 * sigma * sigma / (A * A * N * (N * N - 1)) * std::pow(fs / (2 * pi), 2);
  const double rb_a = 2 * sigma * sigma / N;
  const double rb_p = 4 * sigma * sigma * (2 * N - 1) / (A * A * N * (N + 1)) * std::pow(180 / pi, 2);
  std::printf("trials %d, N %zu (%.2f periods), SNR %.0f dB, H %d, noise method %s\n", trials, n,
              periods, snr_db, H, method.c_str());
  std::printf("%-10s %12s %12s %8s %12s %8s %9s\n", "quantity", "MC variance", "CRLB(model)", "ratio",
              "R&B 1974", "ratio", "coverage");
  auto row = [&](const char* name, double v, double crlb, double rb, int cover) {
    std::printf("%-10s %12.4g %12.4g %8.3f %12.4g %8.3f %8.1f%%\n", name, v, crlb, v / crlb, rb,
                v / rb, 100.0 * cover / T);
  };
  row("f0", var(sf, sff), var_f, rb_f, cover_f);
  row("amplitude", var(sa, saa), var_a, rb_a, cover_a);
  row("phase", var(sp, spp), var_p, rb_p, cover_p);
  std::printf("bias: f0 %.3g Hz, amplitude %.3g, phase %.3g deg\n", sf / T, sa / T, sp / T);
  return 0;
}
