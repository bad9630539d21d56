// libFuzzer target: the batch configuration and limits loader (batch::parse_batch_config:
// toml++ parse, then our key, type, range and limit checks) on arbitrary text.
#include <cmath>
#include <cstddef>
#include <cstdint>
#include <string>

#include "batch/config.hpp"
#include "core/error.hpp"
#include "fuzz_check.hpp"

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
  try {
    const auto config = periodfit::batch::parse_batch_config(periodfit::fuzz::as_text(data, size),
                                                             "fuzz.toml");
    // A loaded config has been validated (batch/config.hpp): its numeric settings are finite.
    if (!std::isfinite(config.read.rate_hz) || !std::isfinite(config.analyze.f0_hz) ||
        !std::isfinite(config.analyze.f0_hint_hz) || !std::isfinite(config.identify.f0_hz))
      __builtin_trap();
  } catch (const periodfit::Error&) {
  }
  return 0;
}
