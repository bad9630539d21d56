// The SI quantity reader shared by the command line and the CSV preamble (io/quantity.hpp).
#include <doctest/doctest.h>

#include <cmath>
#include <optional>

#include "io/quantity.hpp"

using namespace periodfit;

namespace {
// Prefix factors are powers of ten applied to a decimal: a few ulp of relative error.
constexpr double kRelative = 1e-12;
bool reads_as(const std::optional<double>& got, double want) {
  return got && std::abs(*got - want) <= kRelative * std::abs(want);
}
}  // namespace

TEST_CASE("quantity: frequencies with SI prefixes and rate units (48k, 1MHz, 2 MSa/s)") {
  // Expected values: the SI prefixes (BIPM SI Brochure, 9th ed., table 7).
  CHECK(reads_as(io::parse_frequency("48k"), 48e3));
  CHECK(reads_as(io::parse_frequency("1MHz"), 1e6));
  CHECK(reads_as(io::parse_frequency("1.2k"), 1.2e3));
  CHECK(reads_as(io::parse_frequency("10 kHz"), 1e4));
  CHECK(reads_as(io::parse_frequency("2 MSa/s"), 2e6));
  CHECK(reads_as(io::parse_frequency("250 ksps"), 2.5e5));
  CHECK(reads_as(io::parse_frequency("1e3"), 1e3));
  CHECK(reads_as(io::parse_frequency("12.5 mHz"), 0.0125));  // SI rule on the command line: milli
  CHECK(reads_as(io::parse_frequency("1 GHz"), 1e9));
}

TEST_CASE("quantity: times with SI prefixes (12ns, 1.5 ms, 3 µs)") {
  CHECK(reads_as(io::parse_duration("12ns"), 12e-9));
  CHECK(reads_as(io::parse_duration("1.5 ms"), 1.5e-3));
  CHECK(reads_as(io::parse_duration("3 \xC2\xB5s"), 3e-6));
  CHECK(reads_as(io::parse_duration("3us"), 3e-6));
  CHECK(reads_as(io::parse_duration("-2 ps"), -2e-12));
  CHECK(reads_as(io::parse_duration("0"), 0));
  CHECK(reads_as(io::parse_duration("2 sec"), 2));
}

TEST_CASE("quantity: not a quantity (unknown unit or prefix, wrong dimension, trailing text, empty)") {
  // "1e308k" overflows only once the prefix is applied: refused, never inf.
  for (const char* bad : {"1MQ", "", "k", "1 kHz x", "1..2", "1e", "nan", "inf", "1e999", "1 ks/", "1e308k"}) {
    CAPTURE(bad);
    CHECK_FALSE(io::parse_frequency(bad));
  }
  CHECK_FALSE(io::parse_frequency("12ns"));  // a time is no frequency
  CHECK_FALSE(io::parse_duration("1MHz"));
}

TEST_CASE("quantity: the instrument case rule and the decimal comma (CSV preamble)") {
  const auto q = io::parse_quantity("1,5 MHZ", ',', io::CaseRule::instrument);
  REQUIRE(q);
  CHECK(q->dimension == io::Dimension::frequency);
  CHECK(std::abs(q->value - 1.5e6) <= kRelative * 1.5e6);
  const auto ms = io::parse_quantity("2 MS", '.', io::CaseRule::instrument);
  REQUIRE(ms);
  CHECK(ms->dimension == io::Dimension::time);
  CHECK(std::abs(ms->value - 2e-3) <= kRelative * 2e-3);
}

TEST_CASE("quantity: a prefix shifts the decimal exponent, so the value is correctly rounded") {
  // 100 × 1e-6 in doubles is 9.999999999999999e-05; "100us" must read as the double nearest
  // 1e-4, as "1e-4" does (std::from_chars is correctly rounded).
  CHECK(*io::parse_duration("100us") == 1e-4);
  CHECK(*io::parse_duration("1.5e2 ns") == 1.5e-7);
  CHECK(*io::parse_frequency("44.1k") == 44100.0);
  // A written exponent at the int limit plus the prefix's does not overflow (read as long long).
  CHECK(*io::parse_frequency("0e2147483647k") == 0.0);
}
