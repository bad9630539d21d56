#pragma once
/// Analysis of one channel: the fundamental, every harmonic's amplitude and phase with its
/// standard uncertainty, the distortion figures and the plain-language flags.
///
/// ## What is reported, and how the uncertainties are made
/// Amplitudes and phases are those of the whole-record least-squares fit (period_lock.hpp):
/// it uses every sample, including the partial period, so it is statistically efficient.
/// Their covariance is the fit's σ²·(J^T J)^{-1}, with the noise at each harmonic estimated from
/// the data in one of three ways (noise_method; docs/methods.md gives the rules and figures):
///   - "per-period" (P ≥ 4 whole periods): the 2×2 sample covariance S_n of harmonic n's
///     per-period phasors (Re, Im) over the P periods of the locked grid, P − 1 degrees of
///     freedom, divided by the record's effective number of periods, replaces its (a_n, b_n)
///     block: noise that is not circular (sampling jitter, along the phase) is covered. The
///     phase direction gets back the part of a dof the fit's ω ramp took; at ≥ 0.4·fs (the
///     interpolation kernel's band edge) σ² is a floor. The f0 part is scaled by the noise along
///     the harmonics' phases (weights n²·A_n²);
///   - "noise-bins" (P < 4): the mean power of the full-grid spectrum's non-harmonic bins next
///     to harmonic n (≥ 32 bins where the record allows), 2·bins degrees of freedom, circular;
///   - "fit-residual" (one whole period: no non-harmonic bins): the residual variance alone,
///     N − (2H + 2) degrees of freedom, assuming white noise.
/// When the periods repeat exactly (a coherent capture; pooled period-to-period scatter below
/// half the residual variance), flag "identical-periods": each phasor component gets the floor
/// 2·max(σ², Δ²/12)/M over one period (M = fs/f0, Δ the quantisation step found in the samples;
/// IEEE Std 1241 / Widrow), noise_dof 0 (normal coverage). Amplitude and phase uncertainties
/// follow from the phasor's 2×2 covariance (kept per line for steady-state) to first order
/// (JCGM 100 §5.1.2); the phase uncertainty of a harmonic that is not resolved (amplitude below
/// its uncertainty) is large and capped at 180°. With a forced f0 a free fit is made too, and a
/// disagreement beyond 4 u is flagged "forced-f0-off".
///
///   ChannelAnalysis a = dsp::analyze_channel(capture.channels[0], capture.sample_rate_hz,
///                                            capture.t0_s, {});
///   a.harmonics[0].amplitude;   // fundamental, peak, channel unit
#include <complex>
#include <span>
#include <string>
#include <vector>

#include "core/capture.hpp"
#include "core/flags.hpp"
#include "dsp/baseline.hpp"
#include "dsp/metrics.hpp"
#include "dsp/period_lock.hpp"
#include "dsp/residual_lines.hpp"

namespace periodfit::dsp {

struct AnalyzeOptions {
  LockOptions lock;            ///< f0 search, forced f0, number of harmonics
  int samples_per_period = 0;  ///< M of the locked grid; 0 = default_samples_per_period
  double drift_sigmas = 5;     ///< "drift" when the halves' f0 differ by more than this many u
  double significance = 3;     ///< a harmonic is "significant" when amplitude ≥ this × its u
  /// Full-scale range FSR of the converter in the channel's unit (max − min), for ENOB
  /// (IEEE Std 1241 §9.3); 0 = unknown: 2 for audio channels (unit "FS", ±1 full scale),
  /// otherwise ENOB is not reported.
  double full_scale_range = 0;
  /// Model a significant Legendre baseline trend (degree ≤ 2) and keep it out of the noise
  /// figures (dsp/baseline.hpp); false = leave it in the residual (still flagged).
  bool model_baseline = true;
};

/// Throws OptionError naming the first invalid field.
void validate(const AnalyzeOptions& options);

struct HarmonicLine {
  int n = 0;
  double freq_hz = 0;
  double amplitude = 0;     ///< peak, channel unit
  double amplitude_u = 0;   ///< standard uncertainty
  double phase_deg = 0;     ///< of cos(n·ω0·t + φ), t = 0 at the file's origin, in (−180, 180]
  double phase_u_deg = 0;   ///< standard uncertainty, capped at 180
  bool significant = false; ///< amplitude ≥ significance × amplitude_u
  std::complex<double> phasor;  ///< A·e^{jφ}
  /// 95 % interval of the amplitude, never below 0 (Rice inversion, dsp/magnitude_interval.hpp)
  double amplitude_lo = 0, amplitude_hi = 0;
  /// false when the amplitude is consistent with 0 at 95 %: any phase is then consistent
  bool phase_defined = true;
  /// Covariance of (Re X, Im X) behind amplitude_u and phase_u_deg (channel unit²): what
  /// steady-state propagates from a capture's harmonics
  double cov_re_re = 0, cov_im_im = 0, cov_re_im = 0;
};

struct AnalysisFlag {
  /// clipped, aliasing_risk, few_periods, drift, dc_only, not_converged, baseline_drift,
  /// interference, not_periodic, identical_periods, forced_f0_off, harmonics_truncated; written
  /// as its code ("clipped") through the flag table, core/flags.hpp
  Flag flag = Flag::clipped;
  std::string message;  ///< plain-language warning, levels in the channel's unit
};

struct ChannelAnalysis {
  std::string name;
  std::string unit;
  Status status = Status::ok;   ///< ok, or not_converged (the f0 fit hit its iteration cap)
  Fundamental fundamental;      ///< f0, f0_u, method, dof, iterations, condition
  HarmonicSelection selection;  ///< how the harmonic count was chosen (period_lock.hpp)
  double f0_u_noise_factor = 1; ///< u(f0) over its white-noise value (local noise per harmonic)
  double periods = 0;           ///< the record's length in periods, N·f0/fs (fractional)
  int whole_periods = 0;        ///< P: periods on the locked grid
  int samples_per_period = 0;   ///< M of the locked grid
  double dc = 0;
  double dc_u = 0;
  double rms = 0;               ///< of the locked grid (whole periods), dc included
  double peak_abs = 0;          ///< max |x| over the record
  double crest_factor = 0;      ///< peak_abs / rms
  std::vector<HarmonicLine> harmonics;  ///< n = 1…H, every one listed
  DistortionFigures distortion;
  double noise_rms = 0;         ///< √(noise power): residual, unbiased (dof-corrected)
  double noise_floor = 0;       ///< 2·noise_rms/√N: a noise-only line's RMS amplitude (peak scale)
  double noise_floor_dbc = 0;   ///< noise_floor relative to the fundamental, dB
  /// "per-period", "noise-bins" or "fit-residual" [+ " + one-period floor"]: a description for
  /// the outputs, not a decision (nothing compares it)
  std::string noise_method;
  int noise_dof = 0;            ///< degrees of freedom of the noise estimate behind the u's (0 = normal)
  /// Pooled period-to-period scatter variance over the residual variance (≈ 0.9 for white
  /// noise; ≈ 0 when the periods repeat exactly: flag "identical-periods"); 1 when not measured
  double period_scatter_ratio = 1;
  double quantisation_step = 0; ///< Δ found in the samples when the periods repeat (0 = none)
  double f0_first_half_hz = 0;  ///< drift check (0 when the record is under 4 periods)
  double f0_second_half_hz = 0;
  double drift_sigmas = 0;      ///< |Δf| / √(u₁² + u₂²)
  /// With a forced f0: the free fit's f0 and u (flag "forced-f0-off" when they disagree); 0 otherwise
  double f0_free_hz = 0, f0_free_u_hz = 0;
  /// ENOB's full-scale range (0 = unknown: enob_bits is NaN) and where it came from
  /// ("option", "audio full scale", or the reason ENOB is not reported)
  double full_scale_range = 0;
  std::string enob_note;
  BaselineTrend baseline;       ///< Legendre trend of the residual (dsp/baseline.hpp)
  bool baseline_modelled = false;  ///< the trend was fitted jointly and kept out of the noise
  ResidualLines residual_lines; ///< lines beside the harmonics (dsp/residual_lines.hpp)
  double explained_share = 1;   ///< harmonic power / (harmonic + residual-line power)
  std::vector<AnalysisFlag> flags;

  bool has_flag(Flag flag) const;
};

/// A channel's samples seen in place (a numpy array, a memory-mapped file), with the name and
/// unit its results and messages carry.
struct SampleView {
  std::string name;
  std::string unit;
  std::span<const double> samples;
};

/// Analyses one channel sampled at fs_hz whose first sample is at t0_s. Throws AnalysisError
/// (message starting with the channel's name) when it has no periodic component or is too
/// short, OptionError for invalid options.
ChannelAnalysis analyze_channel(const Channel& channel, double fs_hz, double t0_s,
                                const AnalyzeOptions& options = {});
/// The same for samples not held in a Channel; reads them in place.
ChannelAnalysis analyze_channel(const SampleView& channel, double fs_hz, double t0_s,
                                const AnalyzeOptions& options = {});

}  // namespace periodfit::dsp
