#pragma once
/// The checks of one channel's analysis (dsp/harmonics.cpp) and the flags they raise, in two
/// steps: check_channel() runs every test on the unit-scaled samples (the analysis' own domain,
/// harmonics.cpp, analyze_channel) and keeps its evidence; raise_flags() words the flags after
/// the results are back in the channel's unit, so a message quotes levels in that unit without
/// rescaling numbers inside it. Internal to dsp (not installed).
#include <optional>
#include <span>

#include "dsp/clipping.hpp"
#include "dsp/harmonics.hpp"

namespace periodfit::dsp::internal {

/// Harmonics above this fraction of fs count for "aliasing-risk"; there the per-period noise is a
/// floor too (the interpolation kernel's band edge, harmonics.cpp).
inline constexpr double kAliasBandFraction = 0.4;

/// What the checks found; levels (clip) are in the analysis' domain until scale_checks().
struct ChannelChecks {
  /// Lines beside the harmonics: none, too much unexplained line power, a sparse comb (f0 a false
  /// sub-multiple), or interference.
  enum class Lines { none, not_periodic, sparse_comb, interference };
  Lines lines = Lines::none;
  std::optional<double> strongest_line_dbc;  ///< the strongest residual line re the fundamental
  int comb_occupied = 0;                     ///< sparse comb: significant harmonics up to the strongest
  int comb_strongest = 0;                    ///< ... and the strongest harmonic's number
  int harmonics = 0;                         ///< H fitted (harmonics-truncated quotes it)
  ClipCheck clip;
  std::optional<double> baseline_dbc;        ///< the trend's peak-to-peak re the fundamental
  /// aliasing-risk: the first top-band harmonic whose Hotelling T² rejects "no line"
  struct Alias {
    int n = 0;
    double freq_hz = 0, db_below = 0, t2 = 0, t2_limit = 0;
    int candidates = 0;
  };
  std::optional<Alias> aliasing;
  bool identical_periods = false;
  bool quantisation_floor = false;  ///< the one-period floor is the quantisation step's, not the residual's
  bool forced_f0_off = false;
  double forced_f0_hz = 0;
  double forced_f0_off_bins = 0;    ///< |forced − free| in record bins
  bool drift = false;
};

/// Runs the checks that need the samples or the fit (residual lines, clipping, aliasing, the
/// forced f0 against a free fit, drift between the halves) and fills the figures they measure in
/// `out` (residual_lines, explained_share, f0_free_*, f0_first/second_half_hz, drift_sigmas).
/// `x` and `fit` are the unit-scaled ones the analysis ran on.
ChannelChecks check_channel(ChannelAnalysis& out, std::span<const double> x, double fs, double t0,
                            const HarmonicFit& fit, const AnalyzeOptions& options);

/// Multiplies the levels in `checks` by 2^exponent, as scale_results does for the results.
void scale_checks(ChannelChecks& checks, int exponent);

/// Appends the flags of `checks` and `out` to out.flags, in catalogue order of the analysis
/// (not-converged, lines, harmonics-truncated, clipped, baseline-drift, aliasing-risk,
/// identical-periods, few-periods, dc-only, forced-f0-off, drift); `out` is in the channel's unit.
void raise_flags(ChannelAnalysis& out, const ChannelChecks& checks);

}  // namespace periodfit::dsp::internal
