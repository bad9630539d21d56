#pragma once
/// Periodic excitation signals for measuring a frequency response: multisines and the standard
/// waveforms of dsp/waveforms.hpp, one period of M samples repeated, so a file loops seamlessly.
///
/// Multisine: x_k = Σ_{n∈S} a_n·cos(2π·n·k/M + φ_n), S the excited harmonic set.
/// Phases:
///  - "schroeder" (M. R. Schroeder, "Synthesis of low-peak-factor signals and binary sequences
///    with low autocorrelation", IEEE Trans. Inf. Theory 16(1), 1970, pp. 85–89):
///    φ_k = φ_1 − 2π·Σ_{l<k} (k − l)·p_l for the excited components k = 1…K in ascending
///    harmonic order, of relative power p_l = a_l²/Σa², φ_1 = 0 (flat: φ_k = −π·k(k−1)/K).
///    For sparse sets (odd, skip-every) k stays the component index, not the harmonic number:
///    numpy checks give crest factors 1.70 (odd 1–199) and 1.99 (odd 1–399, every 3rd odd
///    skipped) this way, against 2.13 and 2.70 with phases spread over the harmonic numbers.
///  - "random": φ_n = 2π·(r >> 11)·2^−53 with r successive outputs of std::mt19937_64 seeded
///    with `seed`, one per excited harmonic in ascending n (the raw 64-bit engine output is
///    portable across standard libraries; std::uniform_real_distribution is not).
///  - "zero": every φ_n = 0 (the worst crest factor, Σa/sqrt(Σa²/2); for reference only).
/// Harmonic sets: lists like "1-200", "2,5,11", "1,3,5-9"; `odd_only` keeps the odd ones;
/// `skip_every` K ≥ 2 keeps the odd ones and leaves out every K-th odd harmonic (the odd
/// harmonics counted 1st, 2nd, … as 1, 3, 5, …: for K = 3 harmonics 5, 11, 17, … are left out),
/// so even and skipped-odd lines reveal even and odd non-linear distortion (common practice,
/// e.g. Pintelon & Schoukens, System Identification, 2nd ed., §3.4 "odd random-phase
/// multisines").
///
/// Looping: the period must hold a whole number M of samples. With adjust = f0 (default),
/// M = round(rate/f0) and f0 becomes rate/M; with adjust = rate, f0 is kept and the rate becomes
/// M·f0 (it must come out a whole number of Hz for WAV). The result says which ("adjusted").
///
/// Level: `amplitude` is the peak of the whole waveform. The unit-amplitude signal is sampled,
/// its true sampled peak max|x_k| found, and everything scaled so that peak is the amplitude;
/// PCM codes are then rounded and limited to floor(amplitude·2^(b−1)) (io/audio_writer.hpp), so
/// the file never exceeds the amplitude and never clips. Crest factor = peak/RMS of the samples
/// written.
///
/// Waves: sampled exactly (value at k/M of the period, midpoint at a jump), so harmonics above
/// M/2 alias onto lower ones as an ideal sampler would give; `band_limited` instead sums the
/// analytic series up to the highest harmonic below M/2 (no aliasing, Gibbs ripple instead).
///
/// Usage:
///   ExciteOptions o; o.harmonics = "1-200"; o.f0_hz = 10; o.rate_hz = 48000;
///   ExciteResult r = generate_excitation(o);   // r.samples (one period), r.crest_factor
///   output::write_excitation("ms.wav", r);  // output/excitation_output.hpp
#include <cstdint>
#include <optional>
#include <string>
#include <string_view>
#include <utility>
#include <vector>

#include "core/flags.hpp"
#include "dsp/waveforms.hpp"

namespace periodfit::predict {

/// Parses a harmonic list: comma-separated numbers n ≥ 1 and ranges a-b (a ≤ b); returns the
/// harmonics sorted. Throws OptionError naming the bad item (empty item, not a number, reversed
/// range, 0, a harmonic listed twice, more than kMaxListedHarmonics).
std::vector<int> parse_harmonic_list(std::string_view text);
inline constexpr int kMaxListedHarmonics = 1'000'000;

/// Applies the odd / skip-every selection of the header comment to a sorted list.
std::vector<int> select_harmonics(const std::vector<int>& list, bool odd_only, int skip_every);

enum class PhaseRule { schroeder, random, zero };
enum class LoopAdjust { f0, rate };
/// pcm16/pcm24/float32 are WAV sample formats; text is CSV (doubles, no quantisation).
enum class SampleFormat { pcm16, pcm24, float32, text };

std::vector<std::string> phase_rule_names();       ///< "schroeder", "random", "zero"
PhaseRule parse_phase_rule(std::string_view name); ///< UnknownNameError with did-you-mean
std::vector<std::string> sample_format_names();    ///< "pcm16", "pcm24", "float", "csv"
SampleFormat parse_sample_format(std::string_view name);
std::string_view sample_format_name(SampleFormat format);

struct ExciteOptions {
  /// "multisine" or a wave kind of dsp::wave_kind_names() other than "harmonics".
  std::string signal = "multisine";
  /// multisine: the harmonic list (see parse_harmonic_list); the default, 1 kHz … 20 kHz, lies
  /// below half the default rate, so `excite OUT` works with every option left at its default
  std::string harmonics = "1-20";
  bool odd_only = false;            ///< multisine: keep odd harmonics only
  int skip_every = 0;               ///< multisine: 0 = none; K >= 2 = odd, every K-th odd skipped
  /// multisine: relative amplitude per harmonic (n, a_n > 0); empty = flat. Every selected
  /// harmonic must be listed; listed harmonics outside the selection are not used.
  std::vector<std::pair<int, double>> spectrum;
  PhaseRule phases = PhaseRule::schroeder;  ///< multisine phase rule
  std::uint64_t seed = 1;           ///< random phases: the mt19937_64 seed
  double duty = 0.5;                ///< square, pulse: high fraction of the period, in (0, 1)
  bool band_limited = false;        ///< waves: analytic series below M/2 instead of exact samples
  double f0_hz = 1000;              ///< fundamental (requested), > 0
  double rate_hz = 48000;           ///< sample rate (requested), > 0
  LoopAdjust adjust = LoopAdjust::f0;  ///< which one gives way so M = rate/f0 is whole
  int periods = 1;                  ///< periods in the file, >= 1 (ignored when duration_s > 0)
  double duration_s = 0;            ///< > 0: the fewest whole periods lasting at least this long
  double amplitude = 0.5;           ///< peak of the whole waveform (WAV: fraction of full scale, <= 1)
  SampleFormat format = SampleFormat::pcm24;  ///< file sample format
  int channels = 1;                 ///< identical copies of the signal, >= 1

  /// Throws OptionError naming the field, value and constraint.
  void validate() const;
};

struct ExcitedHarmonic {
  int n = 0;
  double freq_hz = 0;
  double amplitude = 0;   ///< peak of the cosine term in the written file
  double phase_deg = 0;   ///< cos convention, t = 0 at the file's first sample
};

struct ExciteResult {
  Status status = Status::ok;     ///< always ok (impossible options throw OptionError)
  /// "multisine, schroeder phases", "square wave, exact samples", …: a description, not a decision
  std::string method;
  std::string signal;
  double f0_requested_hz = 0, f0_hz = 0;
  double rate_requested_hz = 0, rate_hz = 0;
  std::optional<LoopAdjust> adjusted;  ///< which one gave way; empty = none (M was already whole)
  std::optional<PhaseRule> phases;     ///< multisine: the phase rule used; empty for a wave
  int samples_per_period = 0;     ///< M
  int periods = 0;
  int channels = 1;
  SampleFormat format = SampleFormat::pcm24;
  std::uint64_t seed = 0;         ///< the seed used (random phases), else 0
  double amplitude_requested = 0;
  double peak = 0;                ///< max |x| written
  double rms = 0;                 ///< of the samples written
  double crest_factor = 0;        ///< peak / rms
  long max_code = 0;              ///< PCM: largest |code| written; float/text: 0
  long full_scale_code = 0;       ///< PCM: 2^(b−1)
  /// The file's harmonics from a DFT of the written period: the excited set for a multisine,
  /// n = 1…min(50, M/2) for a wave.
  std::vector<ExcitedHarmonic> harmonics;
  std::vector<double> period;     ///< one period, M values exactly as written
  std::vector<std::string> warnings;

  std::size_t sample_count() const { return period.size() * static_cast<std::size_t>(periods); }
};

/// Builds the excitation (one period; the file repeats it `periods` times).
ExciteResult generate_excitation(const ExciteOptions& options);

/// Parses an amplitude spectrum file: one `n,amplitude` pair per line (comma, semicolon, tab or
/// spaces between), `#` comments and blank lines ignored, an optional non-numeric header on the
/// first line. `name` is used in messages. Throws InputError (name:line:column: what).
std::vector<std::pair<int, double>> parse_amplitude_spectrum(std::string_view text, std::string_view name);

}  // namespace periodfit::predict
