// libFuzzer target: the batch configuration and limits loader (batch::parse_batch_config:
// nesting pre-scan, toml++ parse, then our key, type, range and limit checks) on arbitrary
// text, and, in the nesting mode of fuzz_check.hpp, on documents nested to a depth libFuzzer
// chooses.
#include <cmath>
#include <cstddef>
#include <cstdint>
#include <string>

#include "batch/config.hpp"
#include "core/error.hpp"
#include "fuzz_check.hpp"
#include "io/input_limits.hpp"

namespace {

// The nesting-mode document, by shape % 4: a dotted key of depth + 1 parts, a value nested in
// arrays, in inline tables, or a table header of depth + 1 parts; the payload follows.
std::string nested_document(const periodfit::fuzz::Nested& n) {
  using periodfit::fuzz::wrap;
  switch (n.shape % 4) {
    case 0: return wrap(n.depth, "a.", "", "") + "a = " + std::string(n.payload) + "\n";
    case 1: return "x = " + wrap(n.depth, "[", n.payload, "]") + "\n";
    case 2: return "x = " + wrap(n.depth, "{y = ", n.payload, "}") + "\n";
    default: return "[" + wrap(n.depth, "t.", "", "") + "t]\n" + std::string(n.payload) + "\n";
  }
}

}  // namespace

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
  const auto nested = periodfit::fuzz::nested_mode(data, size);
  const std::string text = nested.active ? nested_document(nested) : std::string(periodfit::fuzz::as_text(data, size));
  try {
    const auto config = periodfit::batch::parse_batch_config(text, "fuzz.toml");
    // No nesting-mode document is a valid config (its keys are unknown), and none deeper than
    // the limits may have reached toml++.
    if (nested.active && nested.depth >= static_cast<std::size_t>(periodfit::io::kMaxNestingDepth)) __builtin_trap();
    // A loaded config has been validated (batch/config.hpp): its numeric settings are finite.
    if (!std::isfinite(config.read.rate_hz) || !std::isfinite(config.analyze.lock.f0_hz) ||
        !std::isfinite(config.analyze.lock.f0_hint_hz) || !std::isfinite(config.identify.lock.f0_hz))
      __builtin_trap();
  } catch (const periodfit::Error&) {
  }
  return 0;
}
