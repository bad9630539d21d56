#pragma once
/// The exact Cramér–Rao bound of the multi-harmonic model that analyze fits (period_lock.hpp),
/// for a known truth: what no unbiased estimator can beat, the yardstick of the Monte Carlo
/// bench (tools/bench/coverage_montecarlo.cpp) and of tests/coverage_test.cpp.
///
/// ## Model and formulas
/// x_k = a_0 + Σ_{n=1..H} [a_n·cos(n·ω·t_k) + b_n·sin(n·ω·t_k)] + e_k,  t_k = t0 + k/fs,
/// e_k white Gaussian with variance σ². The parameters θ = (a_0, a_1…a_H, b_1…b_H, ω) (ω
/// dropped when f0 is known) have the Fisher information I(θ) = JᵀJ/σ², J_kj = ∂x_k/∂θ_j
/// (Slepian–Bangs formula for a Gaussian with parameter-free covariance; Stoica & Moses,
/// Spectral Analysis of Signals, 2005, App. B.3, and §4.3 for sinusoids — from memory), with
///   ∂x_k/∂ω = Σ_n n·t_k·(−a_n·sin(n·ω·t_k) + b_n·cos(n·ω·t_k)).
/// CRB(θ) = I⁻¹ = σ²·(JᵀJ)⁻¹, from the QR factors of the column-scaled J (no normal equations).
/// The phasor X_n = A_n·e^{jφ_n} of A_n·cos(n·ω·t + φ_n) has a_n = A_n·cos φ_n,
/// b_n = −A_n·sin φ_n; A_n and φ_n take the bound through their gradients (exact for the bound
/// of a function of θ: CRB(g(θ)) = ∇gᵀ·CRB(θ)·∇g):
///   ∂A/∂a = a/A, ∂A/∂b = b/A,  ∂φ/∂a = b/A², ∂φ/∂b = −a/A².
/// For H = 1 and many samples this is Rife & Boorstyn's single-tone bound (IEEE Trans. Inf.
/// Theory 20(5), 1974): var A = 2σ²/N, var ω = 24σ²/(A²·N·(N² − 1)) rad²/sample² (real tone);
/// Händel (IEEE Trans. Instrum. Meas. 49(6), 2000) gives it for the IEEE Std 1057 fit.
///
/// Misuse: the bound is for white Gaussian noise and an unbiased estimator; jitter, quantisation
/// and coloured noise have other bounds (the bench reports the ratio to this one as a reference).
///
///   dsp::HarmonicTruth t{.fs_hz = 1000, .f0_hz = 10, .samples = 500, .dc = 0,
///                        .phasors = {std::polar(1.0, 0.3)}, .noise_sigma = 0.01};
///   dsp::HarmonicBound b = dsp::multi_harmonic_crb(t);   // b.amplitude_var[0] ≈ 2σ²/N
#include <complex>
#include <cstddef>
#include <vector>

namespace periodfit::dsp {

struct HarmonicTruth {
  double fs_hz = 0;
  double f0_hz = 0;
  double t0_s = 0;              ///< time of sample 0 (phases refer to t = 0)
  std::size_t samples = 0;      ///< N
  double dc = 0;
  std::vector<std::complex<double>> phasors;  ///< X_1…X_H (index 0 is harmonic 1)
  double noise_sigma = 0;       ///< σ of the white Gaussian noise
  bool f0_known = false;        ///< true: f0 is not estimated (a forced f0)
};

struct HarmonicBound {
  double f0_var_hz2 = 0;        ///< 0 when f0 is known
  double dc_var = 0;
  std::vector<double> amplitude_var;   ///< per harmonic 1…H
  std::vector<double> phase_var_rad2;  ///< per harmonic 1…H
};

/// Throws AnalysisError when the model is not identifiable (fewer samples than parameters, a
/// zero fundamental with f0 unknown).
HarmonicBound multi_harmonic_crb(const HarmonicTruth& truth);

}  // namespace periodfit::dsp
