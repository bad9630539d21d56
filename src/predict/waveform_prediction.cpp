// The steady state of a waveform (its Fourier series from dsp/waveforms.hpp, truncated) and what
// the truncation leaves out of the output: the waveform-series side of superposition.hpp; the
// sum itself is in superposition.cpp.
#include <algorithm>
#include <cmath>
#include <numbers>

#include "core/memory_budget.hpp"
#include "core/number_format.hpp"
#include "predict/superposition.hpp"

namespace periodfit::predict {

namespace {

constexpr double kPi = std::numbers::pi;
/// Tail look-ahead: harmonics N+1 … min(4N, N + kTailMaxExtra), then extrapolated.
constexpr int kTailFactor = 4;
constexpr int kTailMaxExtra = 6'000'000;  // 3 × the largest automatic count
/// Octave ratio of the tail sums at or above which Σ|Y_n| is taken as divergent: 2^{1−p} ≥ 0.9
/// means |Y_n| falls slower than n^{−1.15}, and the extrapolated rest would exceed 9× the octave.
constexpr double kTailDivergentRatio = 0.9;

/// Σ|H(jnω0)·X_n| over n > N into r.output_tail_estimate, r.output_tail_method and
/// r.tail_checked_to; true when the sum diverges.
bool estimate_tail(const dsp::WaveSpec& wave, int n0, const ident::RationalModel& model, PredictResult& r) {
  // Σ|Y_n| over the octaves (N, 2N] and (2N, 4N] summed explicitly; beyond 4N the octave
  // ratio q = S2/S1 (2^{1−p} for |Y_n| ∝ n^{−p}) continues geometrically: S2·q/(1 − q).
  // When q ≥ kTailDivergentRatio (|Y_n| falling as 1/n or slower) the sum does not converge
  // and only the explicit part is reported; the status is then set regardless.
  const int n_mid = n0 + std::min(kTailMaxExtra / 3, n0);
  const int n_end = n0 + std::min(kTailMaxExtra, (kTailFactor - 1) * n0);
  double s1 = 0, s2 = 0;
  const double omega0 = 2 * kPi * wave.f0_hz;
  for (int n = n0 + 1; n <= n_end; ++n) {
    const std::complex<double> x = dsp::wave_harmonic(wave, n);
    if (x != 0.0) (n <= n_mid ? s1 : s2) += std::abs(model.response(omega0 * n) * x);
  }
  double tail = s1 + s2;
  const double q = s1 > 0 ? s2 / s1 : 0;
  r.output_tail_method = TailMethod::summed;
  if (q >= kTailDivergentRatio) {
    r.output_tail_method = TailMethod::summed_diverges;
  } else if (n_end == n0 + (kTailFactor - 1) * n0) {
    tail += s2 * q / (1 - q);
    r.output_tail_method = TailMethod::summed_extrapolated;
  }
  r.output_tail_estimate = tail;
  r.tail_checked_to = n_end;
  return q >= kTailDivergentRatio;
}

/// Status, flags and the warning when the left-out tail is visible in the samples.
void flag_visible_tail(const dsp::WaveSpec& wave, int harmonics, bool tail_diverges, PredictResult& r) {
  const double peak = std::max(std::abs(r.max), std::abs(r.min));
  if (tail_diverges ||
      (std::isfinite(r.output_tail_estimate) && r.output_tail_estimate > kVisibleTailFraction * peak)) {
    r.status = Status::truncation_visible;
    r.flags.push_back(Flag::truncation_visible);
    if (dsp::wave_has_jumps(wave)) r.flags.push_back(Flag::gibbs);
    if (tail_diverges)
      r.warnings.push_back("the output harmonics above " + std::to_string(harmonics) +
                           " fall as 1/n or slower, so their sum does not converge (" +
                           format_significant(r.output_tail_estimate, 3) + " up to harmonic " +
                           std::to_string(r.tail_checked_to) +
                           "): the samples, min, max and ripple show the truncation at any harmonic count" +
                           (dsp::wave_has_jumps(wave) ? " (Gibbs overshoot next to the input's jumps, which "
                                                        "this system passes)"
                                                      : ""));
    else
      r.warnings.push_back("the output harmonics above " + std::to_string(harmonics) + " sum to up to " +
                           format_significant(r.output_tail_estimate, 3) + " (" +
                           format_significant(100 * r.output_tail_estimate / peak, 3) +
                           " % of the output peak): samples, min, max and ripple can be off by that much; "
                           "raise the harmonic count");
  }
}

}  // namespace

PredictResult predict_steady_state(const dsp::WaveSpec& wave, const PredictSystem& system,
                                   const PredictOptions& options) {
  options.validate();
  const dsp::SeriesTruncation input = dsp::truncate_series(wave, options.truncation);
  PredictResult r = with_memory_step("predicting the steady-state output",
                                     [&] { return predict_steady_state(input, system, options); });
  const ident::RationalModel* model =
      system.model && !system.model->den.empty() ? &*system.model : nullptr;
  bool tail_diverges = false;
  if (input.method == dsp::SeriesCount::complete) {
    r.output_tail_estimate = 0;
    r.output_tail_method = TailMethod::none;
    r.tail_checked_to = input.harmonics;
  } else if (model) {
    tail_diverges = estimate_tail(wave, input.harmonics, *model, r);
  }
  flag_visible_tail(wave, input.harmonics, tail_diverges, r);
  return r;
}

}  // namespace periodfit::predict
