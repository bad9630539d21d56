#pragma once
/// Standard periodic waveforms with their exact time-domain values and analytic Fourier series.
///
/// Conventions (docs/waveforms.md holds the full table with sources):
///   x(t) = X_0 + Σ_{n≥1} A_n·cos(n·ω0·t + φ_n),  X_n = A_n·e^{jφ_n},  ω0 = 2π·f0,
/// A_n the peak amplitude of the cosine term, φ_n in radians here (degrees only at the edges).
/// Every waveform is defined from the sine A·sin(ω0·t): t = 0 is the sine's upward zero
/// crossing, and u = frac(f0·t) ∈ [0, 1) is the position in the period.
///   sine       A·sin(2πu)
///   square     +A for u ∈ [0, d), −A for u ∈ [d, 1): t = 0 is the rising edge (d = 1/2 gives
///              A·sign(sin ω0t)); duty d ∈ (0, 1)
///   triangle   peak A, rising through 0 at t = 0, +A at u = 1/4, −A at u = 3/4
///              (A·(2/π)·asin(sin ω0t))
///   sawtooth   peak A, rising linearly through 0 at t = 0 from −A (u → 1/2⁺) to +A
///              (u → 1/2⁻); the falling edge is at u = 1/2
///   half_wave  A·max(sin ω0t, 0)
///   full_wave  A·|sin ω0t|; f0 is the frequency of the sine *before* rectification, so only
///              even n are present (the ripple is at 2·f0)
///   pulse      0…A rectangular pulse train: A for u ∈ [0, d), 0 otherwise (rising edge at t = 0)
///   harmonics  a user list of (n, A_n, φ_n) terms; A is unused
/// plus a dc `offset` added to X_0. At a jump the value is the midpoint of the two sides (what
/// the Fourier series converges to, Dirichlet's theorem), so the exact value and the series
/// agree everywhere.
///
/// Series (handbook tables, e.g. Abramowitz & Stegun / any Fourier-series table; closed forms
/// re-derived in docs/waveforms.md): square 4A/(nπ) odd n (general duty: pulse of height 2A
/// minus A); triangle 8A/(π²n²) odd n; sawtooth 2A/(nπ); half-wave dc A/π, fundamental A/2,
/// even n 2A/(π(n²−1)); full-wave dc 2A/π, 4A/(π(4k²−1)) at n = 2k; pulse dc A·d,
/// 2A·d·|sinc(n·d)|.
///
/// Truncation: `truncate_series` picks the harmonic count N so that the ac energy left out,
/// Σ_{n>N} A_n²/2, is at most a fraction of the total ac energy. The left-out energy is the
/// closed-form mean square of the waveform (Parseval) minus the energy kept, so it is exact
/// (not an estimate) up to rounding, ~N·ε of the total.
///
/// Misuse: the series of a waveform with jumps (square, sawtooth, pulse) converges slowly
/// (A_n ∝ 1/n); any partial sum overshoots near a jump by ≈9 % of the jump (Gibbs), whatever N.
///
/// Usage:
///   WaveSpec w{.kind = WaveKind::square, .amplitude_v = 1, .f0_hz = 50};
///   const SeriesTruncation s = truncate_series(w);   // s.series.phasors[n], s.left_out_fraction
///   double v = wave_value(w, 1e-3);                    // exact value at t = 1 ms
#include <complex>
#include <string>
#include <string_view>
#include <vector>

namespace periodfit::dsp {

enum class WaveKind { sine, square, triangle, sawtooth, half_wave, full_wave, pulse, harmonics };

/// The names used on the command line: "sine", "square", "triangle", "sawtooth", "half-wave",
/// "full-wave", "pulse", "harmonics".
std::vector<std::string> wave_kind_names();
std::string_view wave_kind_name(WaveKind kind);
/// Parses a name from wave_kind_names(); throws UnknownNameError ("did you mean") otherwise.
WaveKind parse_wave_kind(std::string_view name);

/// One user-given harmonic term A·cos(n·ω0·t + φ).
struct HarmonicTerm {
  int n = 1;               ///< harmonic number, >= 1
  double amplitude = 0;    ///< peak, >= 0
  double phase_deg = 0;    ///< degrees, cos convention
};

/// A waveform: shape, size and fundamental.
struct WaveSpec {
  WaveKind kind = WaveKind::sine;   ///< shape (see the header comment)
  double amplitude_v = 1;           ///< A, the peak of the shape (pulse: its height), > 0
  double f0_hz = 1000;              ///< fundamental (full-wave: the sine before rectification), > 0
  double duty = 0.5;                ///< square and pulse: fraction of the period high, in (0, 1)
  double offset_v = 0;              ///< dc added to the shape
  std::vector<HarmonicTerm> terms;  ///< kind == harmonics: the terms (distinct n)

  /// Throws OptionError naming the field, value and constraint.
  void validate() const;
};

/// A (partial) Fourier series: phasors[0] is the dc value (real), phasors[n] = A_n·e^{jφ_n}.
struct FourierSeries {
  double f0_hz = 0;
  std::vector<std::complex<double>> phasors;

  int harmonics() const { return phasors.empty() ? 0 : static_cast<int>(phasors.size()) - 1; }
  double dc() const { return phasors.empty() ? 0 : phasors[0].real(); }
  /// Σ_{n≥1} |X_n|²/2, the ac mean square.
  double ac_energy() const;
  /// The partial sum at time t (direct summation).
  double value(double t_s) const;
};

/// The series at t_k = k/(M·f0), k = 0…M−1, from one inverse DFT of length M with harmonic n
/// folded onto bin n mod M: exact values of the partial sum at those instants for any N (an
/// harmonic above M/2 shows as its alias, as sampling would show it). O(N + M log M).
std::vector<double> sample_period(const FourierSeries& series, int samples_per_period);

/// Exact value of the waveform at time t (midpoint at jumps).
double wave_value(const WaveSpec& wave, double t_s);
/// Exact value at position u in the period (u is reduced to [0, 1)); exact for u = k/M.
double wave_value_at_phase(const WaveSpec& wave, double u);

/// X_0: the dc value of the waveform, including the offset.
double wave_dc(const WaveSpec& wave);
/// X_n for n >= 1 from the closed forms; exactly 0 where the series has no term.
std::complex<double> wave_harmonic(const WaveSpec& wave, int n);
/// Σ_{n≥1} A_n²/2 from the closed-form mean square of the shape (Parseval), offset excluded.
double wave_ac_energy(const WaveSpec& wave);
/// True when the waveform has jumps (square, sawtooth, pulse): its series converges as 1/n.
bool wave_has_jumps(const WaveSpec& wave);

struct TruncationOptions {
  int harmonics = 0;                    ///< N; 0 = automatic (smallest N meeting the bound), <= max_harmonics
  double max_left_out_fraction = 1e-6;  ///< automatic: ac energy left out ≤ this × ac total
  int max_harmonics = 2'000'000;        ///< automatic: give up above this N (AnalysisError); caps a given N

  /// Throws OptionError naming the field, value and constraint.
  void validate() const;
};

/// How a series' harmonic count was set: by the energy bound (automatic), as given, or all of a
/// finite series (complete); measured is a capture's harmonics taken as found (predict). Its
/// code ("automatic", "given", "complete", "measured": steady-state's harmonic_count_method)
/// through code() only. A complete series has no tail.
enum class SeriesCount { automatic, given, complete, measured };

inline std::string_view code(SeriesCount count) {
  switch (count) {
    case SeriesCount::automatic: return "automatic";
    case SeriesCount::given: return "given";
    case SeriesCount::complete: return "complete";
    case SeriesCount::measured: return "measured";
  }
  return "automatic";
}

/// A series cut at N harmonics, with the energy bound that decided it.
struct SeriesTruncation {
  FourierSeries series;           ///< phasors 0…N
  int harmonics = 0;              ///< N
  double left_out_fraction = 0;   ///< ac energy left out / total ac energy (0 when no ac)
  SeriesCount method = SeriesCount::automatic;  ///< automatic, given or complete (finite list, all kept)
};

/// The series of `wave` cut at options.harmonics, or automatically (see the header comment).
/// Throws OptionError for invalid waves or options, AnalysisError when the automatic count
/// would exceed max_harmonics.
SeriesTruncation truncate_series(const WaveSpec& wave, const TruncationOptions& options = {});

}  // namespace periodfit::dsp
