#pragma once
/// CONTRACT HEADER (shared by dsp, ident and batch). Owner: dsp. Fields may be added; the
/// names and meanings below are relied on by the FRF stage.
///
/// Locking a record onto its fundamental: the true f0 is estimated (coarse FFT peak, then the
/// IEEE Std 1057 sine fit extended to H harmonics), the record is resampled band-limited onto
/// M samples per period over P whole periods, and each period is transformed (FFTW r2c) so
/// every harmonic falls exactly on a bin.
///
/// Conventions: a phasor X_n = A_n·e^{jφ_n} means the term A_n·cos(n·ω0·t + φ_n) with A_n the
/// peak amplitude and t = 0 the file's time origin (Capture::t0_s is the time of sample 0).
/// X_0 is the dc value (real).
#include <complex>
#include <span>
#include <string>
#include <vector>

namespace periodfit::dsp {

struct LockOptions {
  double f0_hint_hz = 0;   ///< 0 = estimate from the data; > 0 = search near this value
  double f0_hz = 0;        ///< > 0 = use exactly this fundamental (no estimation)
  int max_harmonic = 0;    ///< highest harmonic H; 0 = all below 0.45·fs, at most 50
  double rel_tolerance = 1e-12;  ///< Gauss–Newton stop on |Δf|/f
  int max_iterations = 50;       ///< Gauss–Newton iteration cap
};

/// The fundamental and how it was found.
struct Fundamental {
  double f0_hz = 0;
  double f0_u_hz = 0;       ///< standard uncertainty from the fit covariance (0 when forced)
  int harmonics_fitted = 0; ///< H used in the multi-harmonic fit
  int dof = 0;              ///< residual degrees of freedom of the fit, N − (2H + 2)
  double residual_rms = 0;  ///< RMS of the fit residual, in the channel's unit
  int iterations = 0;
  bool converged = false;
  std::string method;       ///< "forced", "sine-fit" (estimated), …
};

/// P whole periods of M samples each, sample (p, k) at time start_s + (p·M + k)/(M·f0_hz).
struct PeriodGrid {
  double f0_hz = 0;
  int samples_per_period = 0;  ///< M
  int periods = 0;             ///< P
  double start_s = 0;          ///< time of grid sample 0 relative to the file's origin
  std::vector<double> samples; ///< P·M values, period after period
};

/// Harmonic phasors of a locked record, per period and averaged.
struct PeriodSpectra {
  double f0_hz = 0;
  int periods = 0;                 ///< P
  int samples_per_period = 0;      ///< M
  int max_harmonic = 0;            ///< H; vectors below have H + 1 entries, index n = harmonic
  std::vector<std::complex<double>> mean;  ///< X_n averaged over the P periods
  /// [p][n]: X_n from period p alone (same time origin: periods are whole, so no rotation).
  std::vector<std::vector<std::complex<double>>> per_period;
  /// Per harmonic n: variance E|ΔX_n|² of the *averaged* phasor estimated from the
  /// non-harmonic bins next to it in the full-record spectrum (used when P < 4).
  std::vector<double> noise_bin_variance;
  int noise_bin_dof = 0;           ///< degrees of freedom of noise_bin_variance
};

/// Estimates the fundamental of `x` sampled at `fs_hz` (see the header comment for the method).
Fundamental estimate_fundamental(std::span<const double> x, double fs_hz, const LockOptions& = {});

/// Band-limited resampling of `x` (first sample at t0_s) onto whole periods of f0_hz. Two
/// channels of one capture resampled with the same arguments share the grid exactly.
PeriodGrid resample_to_periods(std::span<const double> x, double fs_hz, double t0_s, double f0_hz,
                               int samples_per_period);

/// Per-period and averaged phasors of harmonics 0…max_harmonic of a locked grid.
PeriodSpectra period_spectra(const PeriodGrid& grid, int max_harmonic);

}  // namespace periodfit::dsp
