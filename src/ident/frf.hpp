#pragma once
/// Frequency response H(jnω0) = Y_n/U_n of a DUT at the harmonics its periodic input excites,
/// with the uncertainty of each point.
///
/// Model. Input and output are locked on the same fundamental and the same period grid
/// (dsp/period_lock.hpp), so the harmonic phasors U_n, Y_n of P whole periods are available per
/// period and averaged. Noise is on both channels (errors-in-variables), stationary over the
/// record, zero mean, independent between periods; it may be correlated between U and Y (a
/// feedback loop, a shared reference). H is the ratio of the averages (not the average of
/// ratios, which is biased at low SNR).
///
/// Variance (first-order linearisation of Y/U; Pintelon & Schoukens, System Identification: A
/// Frequency Domain Approach, 2nd ed., Wiley 2012, §2.4 and §7.2, "nonparametric FRF with
/// noisy input and output"):
///   σ²_H ≈ |H|²·(σ²_Y/|Y|² + σ²_U/|U|² − 2·Re(σ²_YU/(Y·Ū)))/P
/// with σ²_X = Σ_p |X_p − X̄|²/(P−1) and σ²_YU = Σ_p (Y_p − Ȳ)(U_p − Ū)*/(P−1) the sample
/// (co)variances of one period. The 2×2 covariance of (Re H, Im H), which a weighted fit needs,
/// is the sample covariance of the per-period linearised deviations δH_p = ((Y_p − Ȳ) −
/// H·(U_p − Ū))/Ū, divided by P; its trace is σ²_H above. Degrees of freedom: P − 1.
/// When P < min_periods_for_sample_variance the per-period spread says too little; the
/// variances of Ū and Ȳ then come from the non-harmonic bins next to harmonic n in the
/// full-record spectrum (PeriodSpectra::noise_bin_variance, dof noise_bin_dof), the U–Y noise
/// correlation is taken as zero and the noise as circular (cov = σ²_H/2·I).
///
/// Reported per point: re, im, |H|, dB, phase, standard uncertainties of |H| and of the phase
/// (radial and tangential projections of the 2×2 covariance) and 95 % intervals
/// value ± k·u with k the Student-t quantile for the dof (the normal quantile once dof exceeds
/// kNormalQuantileDof, where the two differ by less than 0.1 %). The |H| interval is the Rice
/// inversion at the same level where |H| is within 30 σ of 0 (dsp/magnitude_interval.hpp), so
/// it never leaves [0, ∞); when it reaches 0 the phase is undefined (phase_defined = false).
///
/// Excited harmonics (n ≥ 1): |U_n|² exceeds the input noise floor at n by min_snr_db. The
/// noise floor is the variance of the averaged phasor Ū_n (per-period spread when P ≥
/// min_periods_for_sample_variance, else the neighbouring bins), never below a numerical floor
/// of (kNumericalFloorRelative·max_n|U_n|)² (n = 0…H), so noise-free synthetic records do not "excite"
/// harmonics that carry only rounding.
///
/// A point's (Re, Im) variances are never below ½·max((ε·|H|)², ((ε·max|Y|)² + |H|²·(ε·max|U|)²)/|U_n|²)
/// with ε = kNumericalFloorRelative and the maxima over n = 0…H (flag "numerical-floor"): a
/// noise-free record gets the computation's precision, not zero, and a line where the output
/// is only rounding (|H| ≈ 1e-17) gets the spread of that rounding.
///
/// An output that rises above its noise (or rounding) floor by 3σ at no excited line carries no
/// response: AnalysisError, since |H| would be a ratio of noise (issue 11, class 8).
///
/// Misuse: the first-order formula holds when the input SNR at each point is high (≳ 20 dB,
/// hence the default); below that H = Y/U is biased and the intervals are too narrow. The
/// phasors must come from the same grid (same f0, start and samples per period).
///
/// Usage:
///   const auto u = dsp::period_spectra(dsp::resample_to_periods(x, fs, t0, f0, m), h);
///   const auto y = dsp::period_spectra(dsp::resample_to_periods(z, fs, t0, f0, m), h);
///   const FrfResult frf = compute_frf(u, y);   // frf.points: excited harmonics only
#include <complex>
#include <string>
#include <string_view>
#include <vector>

#include "dsp/period_lock.hpp"
#include "ident/rational_fit.hpp"
#include "core/flags.hpp"

namespace periodfit::ident {

/// dof above which the normal quantile replaces Student-t (t_{0.975,1000} = 1.9623 vs 1.9600).
inline constexpr int kNormalQuantileDof = 1000;
/// Numerical noise floor relative to the largest input harmonic (double rounding ~1e-16, FFT
/// and resampling errors ~1e-13 of full scale).
inline constexpr double kNumericalFloorRelative = 1e-12;

struct FrfOptions {
  double min_snr_db = 20;  ///< input harmonic power above the input noise floor to count as excited
  double confidence = 0.95;  ///< level of the reported intervals, in (0, 1)
  /// Periods needed to use the per-period (co)variances; fewer: neighbouring noise bins. ≥ 3
  /// (two periods give a singular 2×2 covariance).
  int min_periods_for_sample_variance = 4;
  /// Output phasor correction e^{+j·n·ω0·skew_s}: the output acquisition path lags the input's
  /// by skew_s seconds (probe, cable, ADC pipeline); 0 = none.
  double skew_s = 0;

  /// Throws OptionError naming the field, value and constraint.
  void validate() const;
};

/// One excited harmonic.
struct FrfHarmonic {
  int n = 0;                    ///< harmonic number
  double freq_hz = 0;           ///< n·f0
  std::complex<double> u;       ///< averaged input phasor Ū_n
  std::complex<double> y;       ///< averaged (deskewed) output phasor Ȳ_n
  std::complex<double> h;       ///< Ȳ_n/Ū_n
  double re = 0, im = 0;        ///< Re H, Im H
  double mag = 0, mag_db = 0;   ///< |H|, 20·log10|H|
  double phase_deg = 0;         ///< ∠H in (−180, 180]
  double var_h = 0;             ///< σ²_H = E|δH|² (total, both components)
  double var_re = 0, var_im = 0, cov_re_im = 0;  ///< 2×2 covariance of (Re H, Im H)
  double mag_u = 0;             ///< standard uncertainty of |H|
  double mag_db_u = 0;          ///< standard uncertainty of |H| in dB (first order)
  double phase_u_deg = 0;       ///< standard uncertainty of the phase
  /// interval of |H| at `confidence`, never below 0: Rice inversion below r/σ = 30
  /// (dsp/magnitude_interval.hpp, σ² = var_h/2), |H| ± k·u above
  double mag_lo = 0, mag_hi = 0;
  /// interval of the phase at `confidence`; NaN (JSON null) when phase_defined is false
  double phase_lo_deg = 0, phase_hi_deg = 0;
  /// false when |H| is consistent with 0 at `confidence` (mag_lo = 0): every phase is then
  /// consistent with the data
  bool phase_defined = true;
  double input_snr_db = 0;      ///< 10·log10(|Ū_n|²/input noise floor)
  bool at_numerical_floor = false;  ///< the variances were raised to the numerical floor
};

/// Where the FRF's variances come from: the per-period covariance (P ≥ 4), or the noise bins
/// between the harmonics (fewer periods; flag few-periods). Its code ("per-period-covariance",
/// "noise-bins": the JSON's frf_method) through code() only.
enum class FrfNoiseMethod { per_period_covariance, noise_bins };

inline std::string_view code(FrfNoiseMethod method) {
  switch (method) {
    case FrfNoiseMethod::per_period_covariance: return "per-period-covariance";
    case FrfNoiseMethod::noise_bins: return "noise-bins";
  }
  return "noise-bins";
}

struct FrfResult {
  Status status = Status::ok;  ///< always ok (what the data cannot answer throws AnalysisError)
  FrfNoiseMethod method = FrfNoiseMethod::noise_bins;
  double f0_hz = 0;
  int periods = 0;             ///< P
  int max_harmonic = 0;        ///< highest harmonic examined
  int dof = 0;                 ///< degrees of freedom of the variances
  double confidence = 0.95;
  double coverage_factor = 0;  ///< k: Student-t (or normal) quantile used for the intervals
  std::string quantile;        ///< "student-t" or "normal"
  std::vector<FrfHarmonic> points;      ///< excited harmonics, ascending n
  std::vector<int> unexcited;        ///< harmonics 1…max_harmonic not excited
  std::vector<double> input_noise_floor;   ///< [n]: variance of Ū_n used as the floor
  std::vector<double> output_noise_floor;  ///< [n]: variance of Ȳ_n (same method)
  int output_noise_dof = 0;          ///< dof of output_noise_floor
  /// "few-periods" (noise-bin method), "numerical-floor" (some point's variance was below
  /// (kNumericalFloorRelative·|H|)², i.e. a noise-free record, and was raised to it)
  std::vector<Flag> flags;
};

/// FRF at the excited harmonics of `input`. Throws AnalysisError when the two spectra are not
/// on the same grid, when no harmonic is excited, or when no noise estimate exists (P = 1 and
/// no noise bins). Throws OptionError for invalid options.
FrfResult compute_frf(const dsp::PeriodSpectra& input, const dsp::PeriodSpectra& output,
                      const FrfOptions& options = {});

/// The excited points as input for the rational fit (ω = 2π·freq_hz, H, 2×2 covariance and
/// how it was estimated: dof, per-period 2×2 or circular noise-bin; points at the numerical
/// floor count as known).
std::vector<FrfPoint> fit_points(const FrfResult& frf);

/// Two-sided Student-t quantile k with P(|t_dof| ≤ k) = confidence (normal when dof exceeds
/// kNormalQuantileDof or is 0 = "infinite").
double coverage_factor(double confidence, int dof);

}  // namespace periodfit::ident
