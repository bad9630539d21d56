#include "core/memory_budget.hpp"

#include <sys/resource.h>
#include <unistd.h>

#include <algorithm>
#include <cmath>
#include <cstdio>

namespace periodfit {

namespace {
/// When sysconf cannot tell (it may return -1), assume a small machine rather than none.
constexpr std::uint64_t kUnknownPhysicalBytes = std::uint64_t{4} << 30;
/// The budget never drops below this, so a tight ulimit still lets small files through.
constexpr std::uint64_t kMinimumBudgetBytes = std::uint64_t{64} << 20;

std::uint64_t physical_bytes() {
  const long pages = ::sysconf(_SC_PHYS_PAGES);
  const long page = ::sysconf(_SC_PAGE_SIZE);
  if (pages <= 0 || page <= 0) return kUnknownPhysicalBytes;
  return static_cast<std::uint64_t>(pages) * static_cast<std::uint64_t>(page);
}

std::uint64_t address_space_limit() {
  struct rlimit limit {};
  if (::getrlimit(RLIMIT_AS, &limit) != 0 || limit.rlim_cur == RLIM_INFINITY) return UINT64_MAX;
  return static_cast<std::uint64_t>(limit.rlim_cur);
}
}  // namespace

std::uint64_t memory_budget_bytes() {
  const std::uint64_t budget = std::min(physical_bytes(), address_space_limit()) / 2;
  return std::max(budget, kMinimumBudgetBytes);
}

std::string format_bytes(double bytes) {
  static constexpr const char* kUnits[] = {"B", "kB", "MB", "GB", "TB", "PB", "EB"};
  std::size_t unit = 0;
  while (bytes >= 1000 && unit + 1 < std::size(kUnits)) {
    bytes /= 1000;
    ++unit;
  }
  char text[64];
  std::snprintf(text, sizeof text, unit == 0 ? "%.0f %s" : "%.3g %s", bytes, kUnits[unit]);
  return text;
}

std::optional<std::string> over_memory_budget(double bytes) {
  const auto budget = static_cast<double>(memory_budget_bytes());
  if (!(bytes > budget) && std::isfinite(bytes)) return std::nullopt;
  const bool limited = address_space_limit() < physical_bytes();
  return "about " + (std::isfinite(bytes) ? format_bytes(bytes) : std::string("unbounded memory")) +
         ", more than the " + format_bytes(budget) + " memory budget (half of " +
         (limited ? "the address-space limit, ulimit -v" : "this machine's memory") + ")";
}

OutOfMemoryError::OutOfMemoryError(const std::string& step)
    : Error("out of memory while " + step + " (memory budget " +
            format_bytes(static_cast<double>(memory_budget_bytes())) + "; give a smaller input or option value)") {}

}  // namespace periodfit
