#pragma once
/// How much memory one request may ask for, and what "out of memory" says when it happens anyway.
///
/// Every size an input or an option can request (samples read from a pipe, a resampled grid,
/// predicted samples, a CSV's columns) is checked against this budget BEFORE it is allocated,
/// so a hostile size is refused with a message naming the input and the bound instead of the
/// process growing until the kernel or std::bad_alloc stops it (issue 11, class 5).
///
/// The budget is half the machine's physical memory (sysconf(_SC_PHYS_PAGES) ×
/// sysconf(_SC_PAGE_SIZE), POSIX), lowered to half the address-space limit when one is set
/// (getrlimit(RLIMIT_AS), i.e. `ulimit -v`): the other half is left for the program, the
/// libraries, copies a step makes, and the rest of the machine. It is a bound for a single
/// request, not an accounting of everything alive.
///
/// Usage:
///   if (auto over = over_memory_budget(count * 8.0))
///     throw OptionError("samples_per_period", text, "needs " + *over);
///   auto grid = with_memory_step("resampling " + name, [&] { return resample(...); });
#include <cstdint>
#include <new>
#include <optional>
#include <string>
#include <string_view>

#include "core/error.hpp"

namespace periodfit {

/// Bytes one request may allocate (see the header comment); at least 64 MiB.
std::uint64_t memory_budget_bytes();

/// "1.5 GB" style text (decimal units, 3 significant digits) for messages.
std::string format_bytes(double bytes);

/// nullopt when `bytes` fits the budget; else "about 7.6 GB, more than the 11.7 GB memory
/// budget (half of this machine's memory)" — the caller prefixes what needs it.
std::optional<std::string> over_memory_budget(double bytes);

/// std::bad_alloc turned into an error that names the step (and through it the file): the
/// allocation that failed was not one a bound could foresee, but the message still says where.
class OutOfMemoryError : public Error {
 public:
  explicit OutOfMemoryError(const std::string& step);
};

/// Runs `f`; a std::bad_alloc inside becomes OutOfMemoryError("out of memory while <step> …").
/// Nested steps keep the innermost (most precise) one.
template <typename F>
decltype(auto) with_memory_step(std::string_view step, F&& f) {
  try {
    return f();
  } catch (const std::bad_alloc&) {
    throw OutOfMemoryError(std::string(step));
  }
}

}  // namespace periodfit
