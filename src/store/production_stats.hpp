#pragma once
/// Production statistics on one limit's measured values: process capability with confidence
/// intervals, and an individuals control chart with the standard run rules.
///
/// Capability (NIST/SEMATECH e-Handbook of Statistical Methods, §6.1.6 "What is Process
/// Capability?"), with x̄ and s the sample mean and standard deviation of n values:
///   Cp  = (USL − LSL) / (6 s)                      (needs both limits)
///   Cpk = min(USL − x̄, x̄ − LSL) / (3 s)           (one-sided: the side that exists)
///   Cp CI:  Cp·√(χ²(α/2; ν)/ν) … Cp·√(χ²(1−α/2; ν)/ν), ν = n − 1 (χ² quantiles, lower tail)
///   Cpk CI: Cpk ∓ z(1−α/2)·√(1/(9n) + Cpk²/(2(n − 1)))   (Bissell, A. F. (1990), "How reliable
///           is your capability index?", Applied Statistics 39(3), 331–340; the handbook's form)
/// The indices assume a stable, normal process; read them with the control chart.
///
/// Individuals chart (X and moving range of two; ASTM E2587 / Montgomery, "Introduction to
/// Statistical Quality Control", §6.4; constants for n = 2: d2 = 1.128, D4 = 3.267, E2 = 3/d2 ≈ 2.66):
///   centre x̄, limits x̄ ± 2.66·MR̄; MR chart: centre MR̄, UCL = 3.267·MR̄, LCL 0; σ̂ = MR̄/d2.
/// Run rules (Nelson, L. S. (1984), "The Shewhart control chart — tests for special causes",
/// J. Quality Technology 16(4), 237–239; rules 1–4, the same as the Western Electric
/// Statistical Quality Control Handbook (1956) tests where they overlap):
///   1 one point beyond 3σ̂ (outside the control limits)
///   2 nine points in a row on one side of the centre line
///   3 six points in a row steadily increasing or decreasing
///   4 fourteen points in a row alternating up and down
///
/// Misuse: values must be in time order for the chart; Cp/Cpk of fewer than 2 values, or of
/// values with s = 0, are not defined (status says so, numbers are NaN — never invented).
///
/// Usage:
///   const Capability c = capability(values, lsl, usl);   // c.cpk, c.cpk_lo, c.cpk_hi
///   const ControlChart chart = individuals_chart(values_in_time_order);
#include <cstddef>
#include <limits>
#include <string>
#include <string_view>
#include <vector>

namespace periodfit::store {

inline constexpr double kD2 = 1.128;   ///< d2 for subgroups of 2 (moving range of two)
inline constexpr double kD4 = 3.267;   ///< D4 for subgroups of 2
inline constexpr double kE2 = 2.66;    ///< E2 = 3/d2 as published for individuals charts

/// Whether a capability or a control chart is defined for the values given (a chart is ok or
/// too_few_values). Written as its code ("too few values") through code() only; the report
/// prints the code in place of an index that is not defined (docs/results-db.md).
enum class StatisticStatus { ok, too_few_values, no_spread, no_limits };

/// "ok", "too few values", "no spread", "no limits".
std::string_view code(StatisticStatus status);

struct CapabilityOptions {
  double confidence = 0.95;  ///< two-sided confidence level of the intervals, in (0, 1)
  void validate() const;     ///< throws OptionError
};

struct Capability {
  static constexpr double nan = std::numeric_limits<double>::quiet_NaN();
  StatisticStatus status = StatisticStatus::ok;  ///< any of the four
  std::size_t n = 0;
  double mean = nan, sd = nan, min = nan, max = nan;
  double lsl = -std::numeric_limits<double>::infinity(), usl = std::numeric_limits<double>::infinity();
  double cp = nan, cp_lo = nan, cp_hi = nan;     ///< NaN unless both limits are finite
  double cpk = nan, cpk_lo = nan, cpk_hi = nan;
  double confidence = 0.95;
  /// A description (the sources), not a decision: nothing compares it.
  std::string method = "NIST/SEMATECH 6.1.6; Cp CI chi-square; Cpk CI Bissell (1990)";
};

/// Capability of `values` against [lsl, usl] (an infinite bound = one-sided).
Capability capability(const std::vector<double>& values, double lsl, double usl,
                      const CapabilityOptions& options = {});

struct RuleSignal {
  int rule = 0;            ///< 1–4 (Nelson 1984)
  std::size_t index = 0;   ///< the point that completes the pattern (0-based)
  std::string text;        ///< "rule 2: nine points in a row above the centre line"
};

struct ControlChart {
  static constexpr double nan = std::numeric_limits<double>::quiet_NaN();
  StatisticStatus status = StatisticStatus::ok;  ///< ok, or too_few_values (< 2)
  double centre = nan, mr_bar = nan, sigma = nan;
  double ucl = nan, lcl = nan, mr_ucl = nan;
  std::vector<double> x;          ///< the values, in time order
  std::vector<double> mr;         ///< moving ranges; mr[0] is NaN (no predecessor)
  std::vector<RuleSignal> signals;  ///< in index order, then rule order
};

ControlChart individuals_chart(const std::vector<double>& values);

}  // namespace periodfit::store
