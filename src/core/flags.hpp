#pragma once
/// The flags an analysis can raise, each with its severity and one sentence for people: the
/// one table that the batch verdict (batch/runner), the docs (docs/batch-config.md, "[verdict]")
/// and the tests read.
///
/// Severity says what a flag does to the numbers of the result that carries it:
/// - `invalidates`: the numbers cannot be trusted (the waveform was not what was measured, or the
///   estimate is not the one the method defines). A batch fails such a file by default.
/// - `caution`: the numbers hold, with the stated caveat (little data, an approximate model,
///   uncertainties that rest on an approximation).
/// - `info`: a fact about the signal or the method that does not qualify the numbers.
///
/// The analyze, frf and steady-state results carry flags as `Flag` values (analyze's with the
/// channel's message beside it, dsp/harmonics.hpp), and their statuses as `Status` values; both
/// are written as their codes ("model-inadequate") through this table, which is the only place a
/// code is spelled. analyze-mode batch rows prefix the channel ("v_out: clipped"), which
/// flag_code() strips.
///
/// The other things code decides on are enums too, each written as its text through one code()
/// in the header of the stage that owns it: how f0 was found and which rule set the harmonic
/// count (dsp/period_lock.hpp), the magnitude interval's method (dsp/magnitude_interval.hpp),
/// a series' count rule (dsp/waveforms.hpp), the FRF's noise method (ident/frf.hpp), the cost
/// band's method (ident/rational_fit.hpp), the output-tail method (predict/superposition.hpp),
/// the production statistics' status (store/production_stats.hpp) and a batch file's PASS /
/// FAIL / ERROR (report/html_report.hpp). Strings that stay strings are descriptions nothing
/// compares (a fit's "levy+sk(12)+ml-lm(7)", an excitation's "multisine, schroeder phases").
///
/// Usage:
///   if (const FlagInfo* f = find_flag(flag_code(text)); f && f->severity == FlagSeverity::invalidates) …
#include <string>
#include <string_view>
#include <vector>

namespace periodfit {

enum class FlagSeverity { invalidates, caution, info };

/// Every flag, in catalogue (documentation) order.
enum class Flag {
  clipped, aliasing_risk, not_converged, dc_only, not_periodic, forced_f0_off, model_not_converged,
  few_periods, baseline_drift, interference, identical_periods, harmonics_truncated, drift,
  nonlinear, model_inadequate, unstable_pole, ill_conditioned, parameter_u_undefined,
  numerical_floor, truncation_visible, gibbs, no_fundamental
};

/// "invalidates", "caution", "info".
const char* severity_name(FlagSeverity severity);

struct FlagInfo {
  Flag flag;
  std::string_view code;       ///< as results carry it: "clipped"
  FlagSeverity severity;
  std::string_view raised_by;  ///< "analyze", "frf", "steady-state" (the commands whose results carry it)
  std::string_view meaning;    ///< one sentence for people: what it means for the numbers
};

/// Every flag periodfit raises, in documentation order.
const std::vector<FlagInfo>& flag_catalogue();

/// The entry for `code`, or nullptr.
const FlagInfo* find_flag(std::string_view code);

/// The entry of `flag` (every Flag has one).
const FlagInfo& flag_info(Flag flag);

/// The code results are written with: flag_info(flag).code.
std::string_view code(Flag flag);

/// The codes of `flags`, in order (for JSON arrays and batch rows).
std::vector<std::string> codes(const std::vector<Flag>& flags);

/// The outcome of a result: ok, or the flag that decided it otherwise (an analyze channel whose
/// f0 fit hit its iteration cap, an frf model that is not adequate or did not converge, a
/// steady-state series cut where it still shows). The code of a status that is not ok is its
/// flag's code, so severity and sentence are the flag's. Results that cannot come out otherwise
/// (the FRF estimate, an excitation) carry Status::ok so their JSON "status" reads the same table.
enum class Status { ok, not_converged, model_inadequate, model_not_converged, truncation_visible };

/// "ok", or the deciding flag's code.
std::string_view code(Status status);

/// How a linearity check came out (ident/linearity.hpp).
enum class LinearityStatus { linear, nonlinear, untested };

/// "linear", "nonlinear", "untested".
std::string_view code(LinearityStatus status);

/// The code of a flag as a batch row writes it: "v_out: clipped" → "clipped", "clipped" → itself.
std::string_view flag_code(std::string_view flag);

/// The codes of severity `invalidates`, in catalogue order: the default set that fails a batch file.
std::vector<std::string> invalidating_flags();

}  // namespace periodfit
