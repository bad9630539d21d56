#pragma once
// What every fuzz target asserts beyond "no crash": a parser either throws one of periodfit's
// own errors (core/error.hpp: what the CLI turns into `periodfit: error: …`, exit 2) or returns
// a result that keeps its documented invariants. Any other exception escapes the target and
// libFuzzer reports it (the CLI would print it as an "internal error"); a broken invariant is
// a __builtin_trap, so the input is saved as a crash artifact.
#include <cmath>
#include <cstddef>
#include <cstdint>
#include <string_view>

#include "core/capture.hpp"

namespace periodfit::fuzz {

inline std::string_view as_text(const std::uint8_t* data, std::size_t size) {
  return {reinterpret_cast<const char*>(data), size};
}

/// A Capture as every importer promises it (core/capture.hpp, io/csv_reader.hpp): a positive
/// finite rate, a finite t0, at least one channel, every channel the same non-zero length, and
/// every sample finite.
inline void check_capture(const Capture& c) {
  if (!(std::isfinite(c.sample_rate_hz) && c.sample_rate_hz > 0)) __builtin_trap();
  if (!std::isfinite(c.t0_s)) __builtin_trap();
  if (c.channels.empty()) __builtin_trap();
  const std::size_t n = c.channels.front().samples.size();
  if (n == 0) __builtin_trap();
  for (const auto& ch : c.channels) {
    if (ch.samples.size() != n) __builtin_trap();
    for (double v : ch.samples)
      if (!std::isfinite(v)) __builtin_trap();
  }
}

}  // namespace periodfit::fuzz
