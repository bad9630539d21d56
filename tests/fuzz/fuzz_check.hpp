#pragma once
// What every fuzz target asserts beyond "no crash": a parser either throws one of periodfit's
// own errors (core/error.hpp: what the CLI turns into `periodfit: error: …`, exit 2) or returns
// a result that keeps its documented invariants. Any other exception escapes the target and
// libFuzzer reports it (the CLI would print it as an "internal error"); a broken invariant is
// a __builtin_trap, so the input is saved as a crash artifact.
#include <cmath>
#include <cstddef>
#include <cstdint>
#include <string>
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

/// Structure-aware nesting mode (issue 11, class 1): an input that starts with byte 0x01 is
/// `0x01, d_hi, d_lo, shape, payload…`. The target wraps the payload in depth = d_hi·256 + d_lo
/// levels of the shape it chooses, so libFuzzer explores depths from 0 to 65 535 around any
/// payload (random bytes alone would rarely nest more than a few levels).
struct Nested {
  bool active = false;
  std::size_t depth = 0;
  std::uint8_t shape = 0;
  std::string_view payload;
};
inline Nested nested_mode(const std::uint8_t* data, std::size_t size) {
  Nested n;
  if (size < 4 || data[0] != 0x01) return n;
  n.active = true;
  n.depth = std::size_t{data[1]} << 8 | data[2];
  n.shape = data[3];
  n.payload = as_text(data + 4, size - 4);
  return n;
}
/// `open` repeated depth times, the payload, then `close` repeated depth times.
inline std::string wrap(std::size_t depth, std::string_view open, std::string_view payload, std::string_view close) {
  std::string text;
  text.reserve(depth * (open.size() + close.size()) + payload.size());
  for (std::size_t i = 0; i < depth; ++i) text += open;
  text += payload;
  for (std::size_t i = 0; i < depth; ++i) text += close;
  return text;
}

}  // namespace periodfit::fuzz
