#pragma once
/// Is the DUT linear? Output power at harmonics the input does not excite, against the output
/// noise floor at those harmonics.
///
/// Model. A linear time-invariant DUT driven by a periodic input answers only at the excited
/// harmonics; anything else at n·f0 in the output is distortion (or interference locked to
/// f0). Under "linear", Ȳ_n at an unexcited harmonic is circular complex noise with variance
/// σ²_n, so |Ȳ_n|²/σ̂²_n follows an F(2, ν) distribution, ν the dof of the floor estimate
/// σ̂²_n (FrfResult::output_noise_floor / output_noise_dof). A line is detected when the ratio
/// exceeds the F quantile 1 − α/m (Bonferroni over the m harmonics tested, so α bounds the
/// probability of flagging a linear DUT at all) and its level is above min_level_dbc.
/// Detected lines are split by parity of n: with an odd multisine that leaves some odd
/// harmonics out, even lines reveal even-order distortion (x², x⁴…) and lines at the skipped
/// odd harmonics reveal odd-order distortion (x³…). Pintelon & Schoukens, System
/// Identification: A Frequency Domain Approach, 2nd ed. 2012, §3.4 (detection of nonlinear
/// distortions with odd multisines and detection lines).
///
/// Misuse: harmonics that an input also excites weakly (below FrfOptions::min_snr_db) count as
/// unexcited, so a "nonlinear" flag can be a leaky input; the report lists the harmonics so
/// the user can check. A square-wave or other input that excites every odd harmonic leaves
/// only even harmonics to test: odd-order distortion is then invisible.
///
/// Usage:
///   const FrfResult frf = compute_frf(u, y);
///   const LinearityResult lin = check_linearity(frf, y);
///   if (lin.nonlinear) …  // lin.even / lin.odd hold the lines
#include <optional>
#include <string>
#include <vector>

#include "dsp/period_lock.hpp"
#include "ident/frf.hpp"
#include "core/flags.hpp"

namespace periodfit::ident {

struct LinearityOptions {
  /// Probability of flagging a linear DUT (family-wise over the harmonics tested), in (0, 1).
  double false_alarm = 1e-3;
  /// Lines weaker than this relative to the largest excited output harmonic are not reported
  /// (below the band-limited resampling accuracy of the lock stage).
  double min_level_dbc = -120;

  void validate() const;  ///< throws OptionError
};

/// One output line at a harmonic the input does not excite.
struct DistortionLine {
  int n = 0;
  double freq_hz = 0;
  double amplitude = 0;       ///< |Ȳ_n|, output unit (peak)
  double level_dbc = 0;       ///< 20·log10(|Ȳ_n|/max excited |Ȳ|)
  double above_floor_db = 0;  ///< 10·log10(|Ȳ_n|²/σ̂²_n)
};

struct LinearityResult {
  LinearityStatus status = LinearityStatus::untested;  ///< untested: no harmonic left free
  std::string reason;        ///< why "untested", in words; "" otherwise
  bool nonlinear = false;
  std::string method = "F-test at unexcited harmonics (Bonferroni)";  ///< a description, not a decision
  int tested = 0;            ///< unexcited harmonics examined (m)
  int dof = 0;               ///< ν of the noise floor
  double threshold_db = 0;   ///< detection threshold above the floor, 10·log10 F quantile
  std::vector<DistortionLine> odd;   ///< detected at odd n
  std::vector<DistortionLine> even;  ///< detected at even n
  /// Power of detected lines relative to the power of the excited output harmonics, in dB;
  /// empty when nothing was detected.
  std::optional<double> level_db, odd_level_db, even_level_db;
};

/// Looks for output power at the harmonics that `frf` lists as unexcited. `output` is the
/// output spectrum `frf` was computed from.
LinearityResult check_linearity(const FrfResult& frf, const dsp::PeriodSpectra& output,
                                const LinearityOptions& options = {});

}  // namespace periodfit::ident
