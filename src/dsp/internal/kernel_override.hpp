#pragma once
/// Test hook of the period lock's streamed sums (dsp/period_lock.cpp): run them with one
/// instruction set, so the suite checks every SIMD kernel on a CPU that would pick only one.
/// Internal: src/dsp/internal/ is not installed (cmake/InstallHeaders.cmake copies
/// src/<stage>/*.hpp only), and only period_lock.cpp and tests/period_lock_test.cpp include it.
#include <string>

namespace periodfit::dsp::internal {

/// "avx512", "avx2", "base"; "" = by CPU features again. Returns false when this CPU lacks the
/// instruction set asked for (the choice is then unchanged). Process-wide: not for production use.
bool force_kernel_for_testing(const std::string& name);

}  // namespace periodfit::dsp::internal
