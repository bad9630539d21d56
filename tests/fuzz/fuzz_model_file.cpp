// libFuzzer target: the model-file reader (output::parse_model_file: nesting pre-scan, JSON
// parse, then the schema, version and consistency checks) on arbitrary text, and, in the
// nesting mode of fuzz_check.hpp, on documents nested to a depth libFuzzer chooses.
#include <cmath>
#include <cstddef>
#include <cstdint>
#include <string>

#include "core/error.hpp"
#include "fuzz_check.hpp"
#include "output/model_file.hpp"
#include "io/input_limits.hpp"

namespace {

// The nesting-mode document: the payload nested `depth` levels inside model.num (shape bit 0
// clear: arrays) or inside an object under model (bit 0 set: {"x": …}); the two objects around it
// (document, model) add 2 levels.
std::string nested_document(const periodfit::fuzz::Nested& n) {
  const std::string head = R"({"format":"periodfit-model","version":1,"model":{)";
  const std::string tail = R"(,"den":[1000,1]}})";
  if (n.shape & 1)
    return head + R"("extra":)" + periodfit::fuzz::wrap(n.depth, R"({"x":)", n.payload, "}") + R"(,"num":[1])" + tail;
  return head + R"("num":)" + periodfit::fuzz::wrap(n.depth, "[", n.payload, "]") + tail;
}

}  // namespace

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
  const auto nested = periodfit::fuzz::nested_mode(data, size);
  const std::string text = nested.active ? nested_document(nested) : std::string(periodfit::fuzz::as_text(data, size));
  try {
    const auto file = periodfit::output::parse_model_file(text, "fuzz.model.json");
    // Deeper than the limit must have been refused before the JSON reader saw it.
    if (nested.active && nested.depth + 2 > static_cast<std::size_t>(periodfit::io::kMaxNestingDepth))
      __builtin_trap();
    // A model that loads is usable by predict (ident/model_file.hpp): a monic denominator and
    // finite coefficients, of at most kMaxModelDegree.
    const auto& m = file.model;
    if (m.den.empty() || m.den.back() != 1.0) __builtin_trap();
    if (m.num.size() > periodfit::ident::kMaxModelDegree + 1 || m.den.size() > periodfit::ident::kMaxModelDegree + 1)
      __builtin_trap();
    for (double v : m.num)
      if (!std::isfinite(v)) __builtin_trap();
    for (double v : m.den)
      if (!std::isfinite(v)) __builtin_trap();
    if (!std::isfinite(m.delay_s)) __builtin_trap();
  } catch (const periodfit::Error&) {
  }
  return 0;
}
