// Size, nesting and memory bounds checked before a parser or an allocation sees a hostile size
// (io/input_limits.hpp, core/memory_budget.hpp; issue 11, classes 1 and 5).
#include <doctest/doctest.h>

#include <new>
#include <string>

#include "batch/config.hpp"
#include "core/error.hpp"
#include "core/memory_budget.hpp"
#include "dsp/period_lock.hpp"
#include "output/model_file.hpp"
#include "ident/rational_fit.hpp"
#include "io/csv_reader.hpp"
#include "io/input_limits.hpp"
#include "io/output_file.hpp"
#include "predict/superposition.hpp"

using namespace periodfit;

namespace {

std::string repeated(const std::string& piece, std::size_t n) {
  std::string s;
  for (std::size_t i = 0; i < n; ++i) s += piece;
  return s;
}

/// The issue's model file: model.num nested `depth` arrays deep.
std::string deep_model(std::size_t depth) {
  return R"({"format":"periodfit-model","version":1,"model":{"num":)" + repeated("[", depth) + "1" +
         repeated("]", depth) + R"(,"den":[1000,1]}})";
}

}  // namespace

TEST_CASE("input limits: JSON nesting up to the limit passes, one more level is refused at its bracket") {
  const std::size_t limit = io::kMaxNestingDepth;
  CHECK_NOTHROW(io::check_json_nesting(repeated("[", limit) + repeated("]", limit), "ok.json"));
  // Brackets inside strings (with an escaped quote) are text, not nesting.
  CHECK_NOTHROW(io::check_json_nesting(R"({"a":")" + repeated("[", 1000) + R"(\"[[["})", "s.json"));
  // Level 65 opens at byte 64 of line 2 (column 65).
  CHECK_THROWS_WITH_AS(io::check_json_nesting("\n" + repeated("[", limit + 1), "deep.json"),
                       "deep.json:2:65: nested more than 64 levels deep (the limit for periodfit's input files)",
                       InputError);
}

TEST_CASE("input limits: the issue's 50 000-deep model file is a located error, not a stack overflow") {
  // The first '[' of model.num is byte 55 (0-based; the 55-byte prefix above); level 65 is 62
  // brackets later (2 levels are the document and model objects): column 55 + 62 + 1 = 118.
  CHECK_THROWS_WITH_AS(output::parse_model_file(deep_model(50'000), "deep.model.json"),
                       "deep.model.json:1:118: nested more than 64 levels deep (the limit for periodfit's input files)",
                       InputError);
  // At the limit the nesting check passes and the schema check answers.
  CHECK_THROWS_WITH_AS(output::parse_model_file(deep_model(62), "d.model.json"),
                       "d.model.json: \"model.num[0]\" must be a number, found an array", InputError);
}

TEST_CASE("input limits: TOML dotted keys, arrays, inline tables and headers are bounded") {
  const std::string key64 = repeated("a.", 63) + "a";  // 64 parts: allowed
  CHECK_NOTHROW(io::check_toml_nesting(key64 + " = 1\n", "ok.toml"));
  CHECK_THROWS_WITH_AS(io::check_toml_nesting("# c\n" + repeated("a.", 64) + "a = 1\n", "k.toml"),
                       "k.toml:2:128: a dotted key with more than 64 parts (the limit for periodfit's config files)",
                       InputError);
  CHECK_THROWS_WITH_AS(io::check_toml_nesting("[" + repeated("t.", 64) + "t]\n", "h.toml"),
                       "h.toml:1:129: a dotted key with more than 64 parts (the limit for periodfit's config files)",
                       InputError);
  CHECK_THROWS_WITH_AS(io::check_toml_nesting("x = " + repeated("[", 65), "a.toml"),
                       "a.toml:1:69: nested more than 64 levels deep (the limit for periodfit's input files)",
                       InputError);
  CHECK_THROWS_AS(io::check_toml_nesting("x = " + repeated("{y = ", 65), "t.toml"), InputError);
  // Numbers, dates, strings and comments hold dots and brackets that are not keys or nesting.
  CHECK_NOTHROW(io::check_toml_nesting("x = [1.5, 2.5e3, 1979-05-27T07:32:00.999]\n"
                                       "s = \"" + repeated("a.[{", 200) + "\"\n"
                                       "l = '" + repeated(".", 200) + "'\n"
                                       "m = \"\"\"\n" + repeated("a.b.", 100) + "\n\"\"\"\n"
                                       "# " + repeated("[.", 200) + "\n",
                                       "ok.toml"));
}

TEST_CASE("input limits: the issue's 50 000-part dotted key in a batch config is a located error") {
  CHECK_THROWS_WITH_AS(batch::parse_batch_config(repeated("a.", 49'999) + "a = 1\n", "deep.toml"),
                       "deep.toml:1:128: a dotted key with more than 64 parts (the limit for periodfit's config files)",
                       InputError);
}

TEST_CASE("input limits: a device that never ends is refused at the byte limit with the path") {
  CHECK_THROWS_WITH_AS(io::read_file("/dev/zero", 1 << 20), "/dev/zero: larger than the 1.05 MB limit for this input",
                       InputError);
}

TEST_CASE("input limits: model degree above kMaxModelDegree is refused in files, options and orders") {
  // From the issue: a model with 2000 denominator coefficients ran past 60 s.
  std::string den = "[";
  for (int i = 0; i < 2000; ++i) den += i ? ",1" : "1";
  den += "]";
  const std::string text = R"({"format":"periodfit-model","version":1,"model":{"num":[1],"den":)" + den + "}}";
  CHECK_THROWS_WITH_AS(output::parse_model_file(text, "big.model.json"),
                       "big.model.json: \"model.den\" has 2000 coefficients, more than the 101 of degree 100, the "
                       "highest periodfit evaluates (ident/model.hpp)",
                       InputError);
  CHECK_THROWS_WITH_AS(predict::model_from_coefficients({1}, std::vector<double>(102, 1.0), 0),
                       "invalid option: den = 102 coefficients (at most 101 (degree 100, the highest periodfit "
                       "evaluates))",
                       OptionError);
  CHECK_NOTHROW(predict::model_from_coefficients({1}, std::vector<double>(101, 1.0), 0));
  CHECK_THROWS_WITH_AS(ident::parse_model_order("1/101", "order"),
                       "invalid option: order = 1/101 (degrees must be at most 100 (ident/model.hpp))", OptionError);
}

TEST_CASE("input limits: harmonic counts above kMaxHarmonic are refused before the O(H^2) fit") {
  dsp::LockOptions o;
  o.max_harmonic = dsp::kMaxHarmonic;
  CHECK_NOTHROW(dsp::validate(o));
  o.max_harmonic = 5000;  // the issue: 823 MB at 5000 harmonics
  CHECK_THROWS_WITH_AS(dsp::validate(o),
                       "invalid option: max_harmonic = 5000 (must be between 0 (automatic) and 2000 (fit time grows "
                       "as H³; dsp/period_lock.hpp))",
                       OptionError);
}

TEST_CASE("memory budget: sizes over it are described, sizes under it pass, bad_alloc names the step") {
  const auto budget = static_cast<double>(memory_budget_bytes());
  CHECK(budget >= 64.0 * 1024 * 1024);  // the documented floor
  CHECK_FALSE(over_memory_budget(budget).has_value());
  const auto over = over_memory_budget(budget * 2);
  REQUIRE(over.has_value());
  CHECK(over->find("memory budget (half of") != std::string::npos);
  CHECK(format_bytes(7.6e9) == "7.6 GB");  // decimal units, 3 significant digits
  CHECK(format_bytes(512) == "512 B");
  const auto fails = [] { throw std::bad_alloc(); };
  CHECK_THROWS_WITH_AS(with_memory_step("reading x.csv", fails),
                       ("out of memory while reading x.csv (memory budget " + format_bytes(budget) +
                        "; give a smaller input or option value)")
                           .c_str(),
                       OutOfMemoryError);
}

TEST_CASE("input limits: a CSV line wider than the column limit is refused at its line") {
  // From the issue: a one-row CSV of 5·10^6 columns took 1.15 GB; 2^20 + 1 fields are refused.
  const std::string row = "1" + repeated(",1", 1'048'576) + "\n";
  CHECK_THROWS_WITH_AS(io::parse_csv("# wide\n" + row, "wide.csv", {}),
                       "wide.csv:2: more than 1048576 columns (the most periodfit reads; io/csv_reader.cpp)",
                       InputError);
}
