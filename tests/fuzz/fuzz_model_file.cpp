// libFuzzer target: the model-file reader (ident::parse_model_file: JSON parse, then the
// schema, version and consistency checks) on arbitrary text.
#include <cmath>
#include <cstddef>
#include <cstdint>

#include "core/error.hpp"
#include "fuzz_check.hpp"
#include "ident/model_file.hpp"

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
  try {
    const auto file = periodfit::ident::parse_model_file(periodfit::fuzz::as_text(data, size),
                                                         "fuzz.model.json");
    // A model that loads is usable by predict (ident/model_file.hpp): a monic denominator and
    // finite coefficients.
    const auto& m = file.model;
    if (m.den.empty() || m.den.back() != 1.0) __builtin_trap();
    for (double v : m.num)
      if (!std::isfinite(v)) __builtin_trap();
    for (double v : m.den)
      if (!std::isfinite(v)) __builtin_trap();
    if (!std::isfinite(m.delay_s)) __builtin_trap();
  } catch (const periodfit::Error&) {
  }
  return 0;
}
