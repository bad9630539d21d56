#pragma once
/// Steady-state output of a linear time-invariant system for a periodic input, by superposition.
///
/// Model. The input is a (partial) Fourier series x(t) = X_0 + Σ_{n=1}^{N} Re(X_n·e^{jnω0t});
/// the system is stable and linear, so after the transient has died out the output is
///   y(t) = H(0)·X_0 + Σ_{n=1}^{N} Re(H(jnω0)·X_n·e^{jnω0t}),   Y_n = H(jnω0)·X_n
/// (sinusoidal steady state of each term, summed: any circuits/signals text, e.g. Oppenheim &
/// Willsky, Signals and Systems, 2nd ed., §3.8 "Fourier series and LTI systems").
/// H comes from a rational model B(s)/A(s)·e^{−sT} (ident/model.hpp) or from measured FRF points,
/// which are used only at the harmonics they hold: a harmonic (or a dc) the FRF lacks is an
/// AnalysisError unless a model can fill it. A model with a pole in the closed right half-plane
/// (or on the imaginary axis) has no periodic steady state and is refused.
///
/// Derived numbers: dc = Y_0; RMS = sqrt(Y_0² + Σ|Y_n|²/2) (Parseval); THD =
/// sqrt(Σ_{n≥2}|Y_n|²)/|Y_1| (IEEE Std 1241-2010 §4.6.1 ratio to the fundamental; undefined
/// when Y_1 = 0, e.g. a full-wave rectified input); peak-to-peak ripple = max − min of y over one
/// period, from a dense grid (folded inverse FFT, exact at the grid points) refined by Newton
/// steps on y'(t) = 0.
///
/// Uncertainty (first-order propagation, GUM JCGM 100:2008 §5.1.2): with model parameter
/// covariance C and ∂H(jω)/∂θ from RationalModel::response_gradient, every output quantity Q
/// (a sample y(t), a harmonic's amplitude and phase, dc, RMS, THD, ripple) has
/// u²(Q) = ∇Qᵀ·C·∇Q, ∇Q = ∂Q/∂θ through Y_n = H_n·X_n. Measured FRF points carry their own
/// 2×2 covariance of (Re H, Im H), taken independent between frequencies and from the model.
/// The input's own uncertainty (a capture's analysed harmonics) is propagated when given
/// (InputUncertainty): δY_n = H_n·δX_n with the 2×2 covariance of (Re X_n, Im X_n), and δY_0 =
/// H(0)·δX_0; the input harmonics are taken independent of each other and of the system (the
/// analysis fit's columns are orthogonal over whole periods). u²(Q) is then the sum of the
/// system's and the input's parts; `uncertainty_sources` says which were included.
///
/// Samples: t_k = k/rate_hz over `periods` whole periods. When rate/f0 is an integer M the
/// samples come from one folded inverse DFT of length M (harmonic n added to bin n mod M), which
/// gives the partial sum exactly at those instants; otherwise the sum is evaluated directly.
///
/// Misuse: the input series is truncated at N harmonics. For inputs with jumps and a system that
/// passes high frequencies (not strictly proper) the samples show Gibbs overshoot whatever N;
/// `output_tail_estimate` (Σ|Y_n| over n > N, summed to 4N and extrapolated beyond) says how far
/// the samples can be off,
/// and the status becomes "truncation-visible" when that exceeds kVisibleTailFraction of the
/// output's peak.
///
/// Usage:
///   PredictSystem sys; sys.model = model_from_coefficients({1}, {1e3, 1}, 0);   // 1/(1 + s/1000)·…
///   dsp::WaveSpec w{.kind = dsp::WaveKind::half_wave, .amplitude_v = 10, .f0_hz = 50};
///   PredictResult r = predict_steady_state(w, sys);   // r.dc, r.harmonics_out[0].amplitude, r.value
#include <array>
#include <complex>
#include <optional>
#include <string>
#include <string_view>
#include <vector>

#include "dsp/waveforms.hpp"
#include "ident/model.hpp"
#include "ident/rational_fit.hpp"
#include "core/flags.hpp"

namespace periodfit::predict {

/// Tail above which the truncation is reported as visible in the samples: 1e-4 of the output
/// peak, the accuracy the superposition tests demand.
inline constexpr double kVisibleTailFraction = 1e-4;

/// A validated rational model from coefficients in ascending powers of s (SI, s in rad/s):
/// den is normalised to monic (every coefficient divided by the highest). Throws OptionError for
/// empty lists, non-finite values, a zero highest den coefficient, or a negative delay.
ident::RationalModel model_from_coefficients(std::vector<double> num, std::vector<double> den,
                                             double delay_s = 0);

/// Poles of a model (roots of den, rad/s), from the companion matrix eigenvalues.
std::vector<std::complex<double>> model_poles(const ident::RationalModel& model);

/// ∠z in degrees, in (−180, 180]: the convention of every phase in a PredictResult.
double phase_deg(std::complex<double> z);

/// The system to predict through.
struct PredictSystem {
  std::optional<ident::RationalModel> model;   ///< H(s); empty = measured points only
  std::vector<ident::FrfPoint> measured;       ///< measured H(jω) points (may be empty)
  /// true: use a measured point wherever one lies at the harmonic, the model elsewhere;
  /// false: the model everywhere (measured points are ignored when a model exists).
  bool prefer_measured = false;
};

/// The system of a rational expression in s (ident/system_expression.hpp) with dead time
/// delay_s; `source` names the expression in parse errors (an option, an argument).
PredictSystem system_from_expression(std::string_view text, double delay_s, std::string source);


struct PredictOptions {
  dsp::TruncationOptions truncation;  ///< harmonic count N (0 = automatic energy bound)
  int periods = 1;                    ///< samples cover this many whole periods, >= 1
  double rate_hz = 0;                 ///< sample rate; 0 = default_samples_per_period × f0
  int default_samples_per_period = 1000;  ///< used when rate_hz = 0, >= 2
  int dense_min_points = 8192;        ///< ripple grid: at least this many points per period
  /// A measured point serves harmonic n when |ω − nω0| ≤ this × nω0.
  double frf_match_rel_tolerance = 1e-6;
  /// Refuse (AnalysisError) direct-summation jobs above this many harmonic·sample terms.
  double max_direct_terms = 4e9;

  /// Throws OptionError naming the field, value and constraint.
  void validate() const;
};

/// Standard uncertainty of the input series (a capture's analysed harmonics; dsp/harmonics.hpp).
struct InputUncertainty {
  double dc_var = 0;  ///< u²(X_0)
  /// [n] = {u²(Re X_n), u²(Im X_n), cov(Re X_n, Im X_n)}, indexed like the series' phasors
  /// (entry 0 unused); missing entries are exact
  std::vector<std::array<double, 3>> phasor_cov;
};

/// One output harmonic n ≥ 1 (only harmonics the input holds, X_n ≠ 0).
struct PredictedHarmonic {
  int n = 0;
  double freq_hz = 0;
  std::complex<double> input;    ///< X_n
  std::complex<double> gain;     ///< H(jnω0)
  std::complex<double> output;   ///< Y_n
  double amplitude = 0;          ///< |Y_n|, peak
  double phase_deg = 0;          ///< ∠Y_n, degrees in (−180, 180]
  double amplitude_u = 0;        ///< standard uncertainty of |Y_n| (0 when unknown)
  double phase_u_deg = 0;        ///< standard uncertainty of ∠Y_n, degrees
  std::string source;            ///< "model" or "measured"
};

/// How output_tail_estimate was found: none (the input series ends at N: no tail), summed
/// (capped look-ahead), summed_extrapolated, summed_diverges (|Y_n| falls as 1/n or slower: only
/// the explicit part), or unknown (no model or closed form beyond N). Its code ("none",
/// "summed", "summed+extrapolated", "summed (diverges)", "unknown": steady-state's
/// output_tail_method) through code() only.
enum class TailMethod { unknown, none, summed, summed_extrapolated, summed_diverges };

inline std::string_view code(TailMethod method) {
  switch (method) {
    case TailMethod::unknown: return "unknown";
    case TailMethod::none: return "none";
    case TailMethod::summed: return "summed";
    case TailMethod::summed_extrapolated: return "summed+extrapolated";
    case TailMethod::summed_diverges: return "summed (diverges)";
  }
  return "unknown";
}

struct PredictResult {
  Status status = Status::ok;    ///< ok or truncation_visible (see the header comment)
  /// "superposition (model)", "… (measured FRF)", "… (measured FRF + model)": a description,
  /// not a decision (nothing compares it)
  std::string method;
  double f0_hz = 0;
  int harmonics = 0;             ///< N, input harmonics used
  dsp::SeriesCount harmonic_count_method = dsp::SeriesCount::given;  ///< the input series' count rule
  /// Input ac energy left out by the truncation / total (NaN when unknown, e.g. a capture).
  double input_left_out_fraction = 0;
  /// Σ|H(jnω0)·X_n| over n > N: summed explicitly up to tail_checked_to (4N), the rest
  /// extrapolated from the ratio of the last two octave sums (NaN when unknown: no model or no
  /// closed form beyond N).
  double output_tail_estimate = 0;
  int tail_checked_to = 0;
  TailMethod output_tail_method = TailMethod::unknown;
  bool has_uncertainty = false;  ///< a covariance (model, measured or input) was propagated
  /// What the u's include: "model covariance", "measured FRF covariance", "input harmonics"
  /// (empty when has_uncertainty is false)
  std::vector<std::string> uncertainty_sources;
  double dc = 0, dc_u = 0;
  double rms = 0, rms_u = 0;
  double min = 0, max = 0;       ///< extremes over one period
  double ripple_pp = 0, ripple_pp_u = 0;  ///< max − min
  bool thd_defined = false;      ///< false when Y_1 = 0
  double thd = 0, thd_u = 0;     ///< ratio (not %)
  std::vector<PredictedHarmonic> harmonics_out;
  double rate_hz = 0;            ///< sample rate of time_s/value
  std::string sampling_method;   ///< "folded-dft" or "direct"
  int dense_points = 0;          ///< grid points per period used for min/max
  std::vector<double> time_s, value, value_u;  ///< samples (value_u empty without uncertainty)
  std::vector<Flag> flags;            ///< gibbs, truncation_visible, no_fundamental
  std::vector<std::string> warnings;  ///< sentences for people (the CLI prints them to stderr)
};

/// Predicts through `system` for an input given as a series (N = its harmonic count), with the
/// input's uncertainty when it has one.
PredictResult predict_steady_state(const dsp::SeriesTruncation& input, const PredictSystem& system,
                                   const PredictOptions& options = {}, const InputUncertainty& input_u = {});

/// Truncates `wave` with options.truncation, predicts, and estimates the output tail from the
/// closed-form harmonics beyond N.
PredictResult predict_steady_state(const dsp::WaveSpec& wave, const PredictSystem& system,
                                   const PredictOptions& options = {});

}  // namespace periodfit::predict
