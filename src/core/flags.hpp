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
/// Results carry flags as plain codes ("clipped"); analyze-mode batch rows prefix the channel
/// ("v_out: clipped"), which flag_code() strips.
///
/// Usage:
///   if (const FlagInfo* f = find_flag(flag_code(text)); f && f->severity == FlagSeverity::invalidates) …
#include <string>
#include <string_view>
#include <vector>

namespace periodfit {

enum class FlagSeverity { invalidates, caution, info };

/// "invalidates", "caution", "info".
const char* severity_name(FlagSeverity severity);

struct FlagInfo {
  std::string_view code;       ///< as results carry it: "clipped"
  FlagSeverity severity;
  std::string_view raised_by;  ///< "analyze", "frf", "steady-state" (the commands whose results carry it)
  std::string_view meaning;    ///< one sentence for people: what it means for the numbers
};

/// Every flag periodfit raises, in documentation order.
const std::vector<FlagInfo>& flag_catalogue();

/// The entry for `code`, or nullptr.
const FlagInfo* find_flag(std::string_view code);

/// The code of a flag as a batch row writes it: "v_out: clipped" → "clipped", "clipped" → itself.
std::string_view flag_code(std::string_view flag);

/// The codes of severity `invalidates`, in catalogue order: the default set that fails a batch file.
std::vector<std::string> invalidating_flags();

}  // namespace periodfit
