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
///
/// ## Model and method
/// Samples x_k at t_k = t0 + k/fs, k = 0…N−1, are modelled as
///     x_k = a_0 + Σ_{n=1..H} [a_n·cos(n·ω·τ_k) + b_n·sin(n·ω·τ_k)] + e_k,   τ_k = t_k − t_c,
/// with t_c the record's middle (conditioning: cos and sin columns are then exactly
/// orthogonal and the ω column is orthogonal to the cosines' even part). e_k is taken as
/// zero-mean noise; the fit is least squares, which is maximum likelihood for white Gaussian e.
///  1. Coarse ω: Hann-windowed, zero-padded FFT peak with Gaussian (log-parabolic)
///     interpolation; then the largest f/m of which every significant line is a harmonic
///     (harmonic comb: 2nd harmonic stronger than the fundamental, as in a full-wave rectifier
///     with unequal halves; multisines), when the comb has evidence: the lines other than the
///     strongest carry ≥ 1 % of the line power, and a comb of under 5 lines fills ≥ 1/4 of its
///     positions (a tone with hum, or two incommensurate tones, is not read as high harmonics
///     of a common sub-multiple). With f0_hint_hz the peak is searched
///     within ±20 % of the hint only. After the refinement (2.), sub-multiples ν/m the comb
///     cannot judge (records under 24 periods, ν/m with under 8 periods in the record) are
///     tested by an information criterion (period_lock.cpp, sub_multiple_fundamental; not
///     with a hint). Records under 12 periods are then searched on a
///     0.02-bin grid of the 3-harmonic least-squares criterion, because the DC and the
///     negative-frequency image bias the FFT peak at a few periods.
///  2. Refinement: IEEE Std 1057-2017 §4.1.3 four-parameter sine fit, extended to H harmonics
///     (Gauss–Newton on ω with the linear parameters eliminated, i.e. variable projection;
///     Golub & Pereyra 1973), first with min(H, 3) harmonics, then with H.
///     The design matrix is never formed: A^T·A and the ω-column products are closed-form
///     Dirichlet-kernel sums (exact for uniform sampling), A^T·x is one streamed pass over the
///     data per iteration. The normal equations are solved by Cholesky; their condition
///     number is reported (the closed-form Gram matrix is exact, so squaring the condition is
///     the only cost; for ≥ 1.5 periods it stays below ~1e3 — see tests).
///  3. Covariance: σ²·(J^T J)^{-1} with σ² = ‖r‖²/(N − (2H + 2)) (dof N − (2H+2); with a
///     forced f0, N − (2H + 1)).
///  4. Locking: the grid's samples are  model(t) + interpolated residual(t): the fitted model
///     is band-limited and evaluated exactly at the grid times; only the residual (noise,
///     harmonics above H) is interpolated, with a Kaiser-windowed sinc of half-width 16
///     samples (β = 6, passband ripple ≲ 1e-3 below 0.44·fs). A noise-free band-limited
///     record is therefore locked to rounding error, and the interpolation error on noise is
///     ~1e-3 of the noise.
///     The grid starts at the first sample and holds the P = ⌊N·f0/fs⌋ whole periods of the
///     record's N sample intervals; the partial period at the END of the record is dropped
///     (the last grid point may lie up to one sample interval past the last sample).
///
/// Misuse: the model assumes f0 is constant over the record; a drifting f0 is fitted by its
/// average and the residual grows (analyze flags "drift"). Records shorter than ~1.5 periods
/// cannot separate f0 from the harmonics' phases.
///
///   dsp::Fundamental f = dsp::estimate_fundamental(x, fs);
///   dsp::PeriodGrid g = dsp::resample_to_periods(x, fs, t0, f.f0_hz, 256);
///   dsp::PeriodSpectra s = dsp::period_spectra(g, 10);   // s.mean[1] is the fundamental
#include <array>
#include <complex>
#include <functional>
#include <span>
#include <string>
#include <string_view>
#include <vector>

namespace periodfit::dsp {

/// Highest harmonic count the sine fit accepts. The fit solves the normal equations of the cosine
/// and sine parts by Cholesky on their (H+1)×(H+1) and H×H Gram matrices (Toeplitz-plus-Hankel;
/// see period_lock.cpp): memory 4·8·H² bytes with the factors, time O(H³) per Gauss–Newton
/// step. Measured on a 100 000-sample record (issue 11, class 5): H = 2000 takes 1.2 s and
/// 140 MB, H = 4000 15 s and 520 MB, H = 20000 would take ~30 min and 13 GB. 2000 harmonics
/// already need 4000+ samples per period and a noise floor no capture has.
inline constexpr int kMaxHarmonic = 2000;

/// The band limit: harmonics are examined up to this fraction of fs (room for the
/// anti-aliasing filter's transition band of a real acquisition; common practice). The one
/// definition every stage (lock, analyze, frf, batch) uses.
inline constexpr double kBandFraction = 0.45;

/// Highest harmonic below kBandFraction·fs for the fundamental f0_hz (0 when f0 is above it).
int band_limit_harmonics(double fs_hz, double f0_hz);

struct LockOptions {
  double f0_hint_hz = 0;   ///< 0 = estimate from the data; > 0 = search near this value
  double f0_hz = 0;        ///< > 0 = use exactly this fundamental (no estimation)
  /// Highest harmonic H. 0 = automatic where the caller locks through lock_channel (every
  /// harmonic up to the band limit that is significant against its local noise; see
  /// select_harmonics); for fit_harmonics alone, 0 = all below 0.45·fs, at most 50.
  int max_harmonic = 0;
  double rel_tolerance = 1e-12;  ///< Gauss–Newton stop on |Δf|/f
  int max_iterations = 50;       ///< Gauss–Newton iteration cap
  /// > 0: skip the coarse search and start Gauss–Newton here (a value known to be within a
  /// fraction of a bin, e.g. f0 of the whole record when fitting its halves)
  double f0_start_hz = 0;
};

/// Throws OptionError naming the first invalid field.
void validate(const LockOptions& options);

/// How f0 was found; written as its code ("sine-fit", "forced": the JSON's f0_method, the text
/// reports) through code() only. A forced f0 has no estimation dof and no u of its own.
enum class F0Method { sine_fit, forced };

inline std::string_view code(F0Method method) {
  switch (method) {
    case F0Method::sine_fit: return "sine-fit";
    case F0Method::forced: return "forced";
  }
  return "sine-fit";
}

/// The fundamental and how it was found.
struct Fundamental {
  double f0_hz = 0;
  double f0_u_hz = 0;       ///< standard uncertainty from the fit covariance (0 when forced)
  int harmonics_fitted = 0; ///< H used in the multi-harmonic fit
  int dof = 0;              ///< residual degrees of freedom of the fit, N − (2H + 2)
  double residual_rms = 0;  ///< RMS of the fit residual, in the channel's unit
  int iterations = 0;
  bool converged = false;
  F0Method method = F0Method::sine_fit;  ///< estimated, or forced (the caller's f0)
  double condition = 0;     ///< condition number of the fit's Gram matrix (columns scaled)
};

/// P whole periods of M samples each, sample (p, k) at time start_s + (p·M + k)/(M·f0_hz).
struct PeriodGrid {
  double f0_hz = 0;
  int samples_per_period = 0;  ///< M
  int periods = 0;             ///< P
  double start_s = 0;          ///< time of grid sample 0 relative to the file's origin
  std::vector<double> samples; ///< P·M values, period after period
  double source_rate_hz = 0;   ///< fs of the record it came from (limits the noise bins)
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
  /// With P = 1 there are no non-harmonic bins: every entry is 0 and noise_bin_dof is 0.
  std::vector<double> noise_bin_variance;
  int noise_bin_dof = 0;           ///< degrees of freedom of noise_bin_variance (smallest over n)
};

/// Estimates the fundamental of `x` sampled at `fs_hz` (see the header comment for the method).
/// Throws AnalysisError when no periodic component stands out of the noise, or the record is
/// too short for the harmonics asked for.
Fundamental estimate_fundamental(std::span<const double> x, double fs_hz, const LockOptions& = {});

/// Band-limited resampling of `x` (first sample at t0_s) onto whole periods of f0_hz. Two
/// channels of one capture resampled with the same arguments share the grid exactly.
/// Internally fits the harmonics of f0_hz below min(0.45·fs, M·f0/2) by linear least squares
/// and interpolates only the residual (see the header comment).
PeriodGrid resample_to_periods(std::span<const double> x, double fs_hz, double t0_s, double f0_hz,
                               int samples_per_period);

/// Per-period and averaged phasors of harmonics 0…max_harmonic of a locked grid.
PeriodSpectra period_spectra(const PeriodGrid& grid, int max_harmonic);
/// The same, computing noise_bin_variance (one FFT of the whole grid) only when asked.
PeriodSpectra period_spectra(const PeriodGrid& grid, int max_harmonic, bool with_noise_bins);

// ---- the pieces analyze uses directly ------------------------------------------------------

/// The whole-record multi-harmonic least-squares fit (the refined result of step 2).
struct HarmonicFit {
  Fundamental fundamental;
  double fs_hz = 0;
  double t0_s = 0;
  double tc_s = 0;          ///< t_c: the record's middle, the time reference of a_n, b_n
  std::vector<double> a;    ///< a_0…a_H (a_0 = dc)
  std::vector<double> b;    ///< b_0…b_H (b_0 = 0)
  /// Per n: unit-σ² covariance of (a_n, b_n, ν) as {aa, bb, νν, ab, aν, bν}, where
  /// ν = ω/fs in rad/sample; multiply by sigma2 for the white-noise covariance. νν (and the
  /// cross terms) are 0 when f0 was forced.
  std::vector<std::array<double, 6>> unit_cov;
  double sigma2 = 0;        ///< ‖r‖²/dof, the residual variance
  double residual_ss = 0;   ///< ‖r‖²
  std::size_t samples = 0;  ///< N
  std::vector<double> residual;  ///< x − model at every sample (kept: analyze locks it)
  /// X_n = (a_n − j·b_n)·e^{−j·n·ω·(t_c − 0)}: the phasor referred to t = 0 of the file.
  std::complex<double> phasor(int n) const;
  int harmonics() const { return static_cast<int>(a.size()) - 1; }
};

/// Highest harmonic used when max_harmonic = 0: all below 0.45·fs, at most 50, and at most
/// what leaves half the record's samples as residual degrees of freedom.
int default_harmonic_count(double fs_hz, double f0_hz, std::size_t samples);

/// Fit of the whole record: estimate (or force) f0, then the H-harmonic least squares.
HarmonicFit fit_harmonics(std::span<const double> x, double fs_hz, double t0_s,
                          const LockOptions& options = {});

/// x − model at every sample of the record (fit_harmonics already keeps it in `residual`).
std::vector<double> fit_residual(std::span<const double> x, const HarmonicFit& fit);

/// Samples per period used by default: fs/f0 when that is an integer (coherent capture, so
/// the grid is the samples themselves), else the next FFT-friendly integer above fs/f0, and
/// never fewer than 2H + 2.
int default_samples_per_period(double fs_hz, double f0_hz, int max_harmonic);

/// Locking with a fit already made: grid = fit model at the grid times + interpolated
/// `residual` (from fit_residual).
PeriodGrid resample_fitted(std::span<const double> residual, const HarmonicFit& fit,
                           int samples_per_period);

// ---- the one lock call: f0, the harmonic count, the grid and the period spectra ------------

/// Which rule set the harmonic count: the automatic test, the count given, or the fit's own count
/// when P = 1 leaves no local noise estimate. Written as its code ("holm-f-test", "given",
/// "fallback": the analyze JSON's harmonic_selection.rule) through code() only.
enum class HarmonicRule { holm_f_test, given, fallback };

inline std::string_view code(HarmonicRule rule) {
  switch (rule) {
    case HarmonicRule::holm_f_test: return "holm-f-test";
    case HarmonicRule::given: return "given";
    case HarmonicRule::fallback: return "fallback";
  }
  return "given";
}

/// How the harmonic count H of a locked channel was chosen.
///
/// ## The automatic rule (max_harmonic = 0)
/// Every harmonic n = 1…K up to the band limit K = ⌊0.45·fs/f0⌋ (capped at kMaxHarmonic and by
/// the grid) is tested for a line against its own, local noise:
///   - P ≥ 4 whole periods ("per-period"): with X_{n,p} the phasor of period p and X̄_n their
///     mean, F_n = P·|X̄_n|² / s_n², s_n² = Σ_p |X_{n,p} − X̄_n|²/(P − 1). Under noise alone
///     (circular complex Gaussian per-period errors, independent between periods) F_n follows
///     the F(2, 2P − 2) distribution exactly (ratio of the χ²(2) of the mean to the
///     χ²(2P − 2) of the scatter; the two-dimensional Hotelling T² with circular symmetry,
///     Hotelling 1931), whose tail is closed-form: Pr(F > f) = (1 + f/(P − 1))^{−(P−1)}.
///     The scatter is that of harmonic n itself, so coloured noise (1/f, a low-pass floor)
///     is judged where it is, not by the record's average level.
///   - 2 ≤ P < 4 ("noise-bins"): F_n = |X̄_n|² / v_n with v_n the mean power of the
///     non-harmonic bins next to n (PeriodSpectra::noise_bin_variance), F(2, 2·bins).
///   - P = 1: no local noise estimate; the count stays that of the fit (rule "fallback").
/// The K p-values are judged together by Holm's step-down procedure (Holm 1979, "A simple
/// sequentially rejective multiple test procedure", Scand. J. Statist. 6:65–70): sorted
/// ascending, p_(i) is significant while p_(j) ≤ α/(K − j + 1) for every j ≤ i. It holds the
/// family-wise error rate — the probability that a record with no line at all above n = 0
/// gets one or more false detections — at α = family_alpha under any dependence between
/// the lines, and is uniformly more powerful than Bonferroni's α/K.
/// H is then the highest significant harmonic (at least 1), so the f0 fit and every reported
/// table include every significant line; harmonics below H that are not significant stay in
/// the linear model (it is contiguous) and are reported with their uncertainties.
struct HarmonicSelection {
  bool automatic = false;     ///< true: H chosen by the rule; false: max_harmonic given
  HarmonicRule rule = HarmonicRule::given;  ///< see HarmonicRule
  std::string noise_basis;    ///< "per-period", "noise-bins" or "none"
  double family_alpha = 0;    ///< α of the rule (0 when no test ran)
  int count = 0;              ///< H: harmonics in the fit and the reported tables
  int highest_examined = 0;   ///< K: highest harmonic tested
  int significant = 0;        ///< significant lines among 1…K
  int highest_significant = 0;  ///< 0 when none
  /// With a given max_harmonic: the significant lines above it, and their total power
  /// relative to the fundamental (dBc; −inf-free: 0 lines → 0 and no flag).
  int truncated_lines = 0;
  double truncated_dbc = 0;
  std::vector<int> significant_harmonics;  ///< ascending
};

/// Options of the rule (defaults documented in HarmonicSelection).
struct SelectionOptions {
  double family_alpha = 0.01;  ///< family-wise false-detection probability per record
  /// With a given max_harmonic: still examine the band above it (for harmonics-truncated).
  /// false = spectra of harmonics 0…H only (a second channel locked onto the first's grid).
  bool examine_band = true;
};

/// Applies the rule to `spectra` (harmonics 1…spectra.max_harmonic are the candidates). The
/// returned count is the highest significant harmonic (≥ 1); automatic is left false and the
/// caller decides. Needs per_period (P ≥ 4) or noise_bin_variance (P ≥ 2); P = 1 gives rule
/// "fallback" with no line tested.
HarmonicSelection select_harmonics(const PeriodSpectra& spectra, const SelectionOptions& options = {});

/// One channel locked onto whole periods: the whole-record fit that gave f0, the grid, the
/// per-period spectra of harmonics 0…H and how H was chosen.
struct LockedChannel {
  HarmonicFit fit;
  PeriodGrid grid;
  PeriodSpectra spectra;          ///< max_harmonic = selection.count
  HarmonicSelection selection;
  /// u(f0) from the harmonics in the model with their local noise levels: the white-noise
  /// u(f0) of the fit scaled by √(Σ w_n / Σ w_n/r_n), w_n = n²·A_n² (each harmonic's share of
  /// the information on f0) and r_n its per-period noise power over the white-noise value
  /// (first order, harmonics independent; equals the fit's u for white noise). fit.unit_cov's
  /// f0 terms are scaled to match. 1 when P < 4.
  double f0_u_noise_factor = 1;
};

/// The lock every command uses (analyze, frf, batch): fit_harmonics (f0 estimated, or forced),
/// then the grid with `samples_per_period` (0 = default_samples_per_period; a given M is raised
/// to 2H + 2), the spectra up to the band limit, the harmonic selection, and — when H changed —
/// the fit again with H harmonics (from the f0 found) and the grid again when f0 moved by more
/// than 0.1 u or H grew. PeriodSpectra::noise_bin_variance is computed when P < 4 only.
/// A forced f0 (options.f0_hz) with a given H is the way to lock a second channel of the
/// same capture onto the first one's grid (frf's output).
/// `first_grid`, when given, is called with the first fit and its grid, before the selection:
/// a caller can start locking a second channel with that f0 and H (frf does, on a second
/// thread); the result's grid keeps that f0 unless it was relocked (grid.f0_hz tells).
LockedChannel lock_channel(std::span<const double> x, double fs_hz, double t0_s, const LockOptions& options,
                           int samples_per_period = 0, const SelectionOptions& selection = {},
                           const std::function<void(const HarmonicFit&, const PeriodGrid&)>& first_grid = {});

/// Drops the harmonics above max_harmonic from `spectra` (no-op when it holds fewer).
void truncate_spectra(PeriodSpectra& spectra, int max_harmonic);

}  // namespace periodfit::dsp
