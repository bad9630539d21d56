#pragma once
/// Internal to the CSV reader (io/csv_reader.hpp): what the row parser needs beside the
/// parser's own state (io/internal/csv_parser.hpp) — the time column's uniform-spacing check,
/// the line count that bounds the rows, and the step in which mapped pages are released.
/// Not installed (cmake/InstallHeaders.cmake copies src/io/*.hpp, not this folder).
#include <algorithm>
#include <cmath>
#include <cstddef>
#include <functional>
#include <limits>
#include <string_view>

#include "core/capture.hpp"

namespace periodfit::io::csv {

// The rule for a time column: spacing uniform within 1e-4 relative. The rounding of
// the printed values is allowed on top (see TimeCheck).
constexpr double kTimeUniformRel = 1e-4;
// Printed times coarser than this fraction of the step get no rounding allowance: with it a
// one-sample gap would pass (the allowance reaches a whole step at a resolution of 1/2 step).
constexpr double kCoarsestResolution = 0.5;
// Mapped pages behind the parse are released in steps of this size (bounded RSS).
constexpr std::size_t kReleaseBytes = std::size_t{8} << 20;

/// Gives back the mapped pages before an offset (0: all of them); empty for text in memory.
using Release = std::function<void(std::size_t)>;

/// The step between neighbouring values the printed text can express: "1.2340e-05" → 1e-9.
/// A literal integer ("0", "12") is taken as exact.
double printed_resolution(std::string_view s, char decimal);

/// Number of '\n' in [p, end).
std::size_t count_newlines(const char* p, const char* end);

// ---- the time column's uniform spacing, checked while streaming -------------------------

// Model: t_k = t_0 + k·Δt. Row k is compared with the mean step of the rows before it,
// Δ̄ = (t_{k-1} − t_0)/(k−1): |t_k − t_{k−1} − Δ̄| must stay within kTimeUniformRel·Δ̄ plus the
// rounding of the printed values (half a printed unit for each of t_k, t_{k−1}, and the
// part of Δ̄'s uncertainty that comes from t_0 and t_{k−1}). A one-sample gap is therefore
// found wherever the printed times resolve a step. The printed rounding is only worked out
// when the plain 1e-4 test fails, so the common case costs one comparison per row; the value
// texts it needs are views into the parsed text, which outlives the check.
class TimeCheck {
 public:
  enum class Verdict { ok, not_increasing, not_uniform };

  TimeCheck(char decimal, double factor) : decimal_(decimal), factor_(factor) {}

  Verdict add(double t, std::string_view text) {
    if (count_ == 0) {
      first_ = t;
      first_text_ = text;
    } else {
      const double step = t - last_;
      if (!(step > 0)) return Verdict::not_increasing;
      // Welford's running mean and variance of the steps (stable where E[s²] − E[s]² would
      // cancel: deviations are ~1e-7 of a step), and the extreme steps, for info's report.
      ++steps_;
      const double delta = step - step_mean_;
      step_mean_ += delta / static_cast<double>(steps_);
      step_m2_ += delta * (step - step_mean_);
      step_min_ = steps_ == 1 ? step : std::min(step_min_, step);
      step_max_ = steps_ == 1 ? step : std::max(step_max_, step);
      finest_ = std::min(finest_, resolution(text));
      if (count_ >= 2) {
        const double mean = (last_ - first_) / static_cast<double>(count_ - 1);
        last_mean_ = mean;
        if (std::fabs(step - mean) > kTimeUniformRel * mean) {
          const double res = resolution(text), last_res = resolution(last_text_),
                       first_res = resolution(first_text_);
          // Rounding is allowed for only where the printed unit is finer than half a step:
          // coarser times cannot tell a rounded grid from a missing sample.
          if (std::max({res, last_res, first_res}) >= kCoarsestResolution * mean) return Verdict::not_uniform;
          const double allowed = kTimeUniformRel * mean + 0.5 * (res + last_res) +
                                 0.5 * (first_res + last_res) / static_cast<double>(count_ - 1);
          if (std::fabs(step - mean) > allowed) return Verdict::not_uniform;
        }
      } else {
        last_mean_ = step;
      }
    }
    last_ = t;
    last_text_ = text;
    ++count_;
    return Verdict::ok;
  }
  std::size_t count() const { return count_; }
  double first() const { return first_; }
  double last() const { return last_; }
  double mean_step() const { return last_mean_; }
  double rate_hz() const { return static_cast<double>(count_ - 1) / (last_ - first_); }
  /// The regularity of the steps seen (Capture::time_base), source left to the caller.
  TimeBase regularity() const {
    TimeBase b;
    b.steps = steps_;
    if (steps_ > 0) {
      b.step_deviation_rms_s = std::sqrt(step_m2_ / static_cast<double>(steps_));
      b.step_deviation_max_s = std::max(step_max_ - step_mean_, step_mean_ - step_min_);
      b.printed_resolution_s = std::isfinite(finest_) ? finest_ : 0;
    }
    return b;
  }
  /// Relative uncertainty of rate_hz() from the rounding of the first and last value.
  double rate_rounding() const {
    return 0.5 * (resolution(first_text_) + resolution(last_text_)) / (last_ - first_);
  }

 private:
  double resolution(std::string_view text) const { return printed_resolution(text, decimal_) * factor_; }

  char decimal_;
  double factor_;
  std::size_t count_ = 0;
  double first_ = 0, last_ = 0, last_mean_ = 0;
  std::size_t steps_ = 0;
  double step_mean_ = 0, step_m2_ = 0, step_min_ = 0, step_max_ = 0;
  double finest_ = std::numeric_limits<double>::infinity();
  std::string_view first_text_, last_text_;
};

}  // namespace periodfit::io::csv
