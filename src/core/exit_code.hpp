#pragma once
/// Process exit codes, defined once; documented in `periodfit --help` and the README.
namespace periodfit {
enum class ExitCode : int {
  ok = 0,     ///< success; in batch: every file passed its limits
  fail = 1,   ///< batch: at least one file failed a limit or a flag (and none had an error)
  error = 2,  ///< bad usage, unreadable or invalid input, or a file that could not be analysed
};
constexpr int to_int(ExitCode code) noexcept { return static_cast<int>(code); }
}  // namespace periodfit
