// ident/system_expression: a system typed as a rational expression in s becomes the same
// RationalModel as its coefficient lists; malformed text names what was expected and the column.
#include <doctest/doctest.h>

#include <cmath>
#include <complex>
#include <numbers>
#include <random>
#include <string>
#include <vector>

#include "ident/system_expression.hpp"
#include "predict/superposition.hpp"

using namespace periodfit;
using ident::parse_system_expression;

namespace {
constexpr double kPi = std::numbers::pi;
/// Coefficients are a handful of products and one division by the leading coefficient: each
/// rounds by at most half an ulp, so a few ulps of relative error is the most expected.
constexpr double kCoefficientRel = 1e-14;
/// H(jω) from the same coefficients by two routes (one of them re-rounded by the parser).
constexpr double kResponseRel = 1e-13;

void check_coefficients(const std::vector<double>& got, const std::vector<double>& want) {
  REQUIRE(got.size() == want.size());
  for (std::size_t i = 0; i < want.size(); ++i) {
    INFO("coefficient " << i);
    CHECK(got[i] == doctest::Approx(want[i]).epsilon(kCoefficientRel));
  }
}

/// Parses and returns the error's column and message, failing the test when it parses.
ident::ExpressionError error_of(const std::string& text) {
  try {
    parse_system_expression(text);
  } catch (const ident::ExpressionError& e) {
    return e;
  }
  FAIL("parsed without error: " << text);
  return ident::ExpressionError("system", 0, "");
}
}  // namespace

TEST_CASE("system expression: the first-order low-pass of the issue gives 1/τ over (1/τ + s)") {
  // 1/(1 + τs) with τ = 0.68e-3 s, made monic: (1/τ)/(1/τ + s) (closed form).
  const auto r = parse_system_expression("1/(1 + 0.68e-3*s)");
  check_coefficients(r.model.num, {1 / 0.68e-3});
  check_coefficients(r.model.den, {1 / 0.68e-3, 1});
  CHECK(r.model.delay_s == 0);
  CHECK(r.constants.empty());
}

TEST_CASE("system expression: the second-order section of the issue with a named constant") {
  // 0.8·ω²/(s² + 2ζωs + ω²), ω = 2π·1200 rad/s, ζ = 0.35 (closed form, already monic).
  const auto r = parse_system_expression("0.8*w^2/(s^2 + 2*0.35*w*s + w^2); w = 2*pi*1200");
  const double w = 2 * kPi * 1200;
  check_coefficients(r.model.num, {0.8 * w * w});
  check_coefficients(r.model.den, {w * w, 2 * 0.35 * w, 1});
  REQUIRE(r.constants.size() == 1);
  CHECK(r.constants[0].first == "w");
  CHECK(r.constants[0].second == doctest::Approx(w).epsilon(kCoefficientRel));
}

TEST_CASE("system expression: definitions may use earlier ones") {
  const auto r = parse_system_expression("k*w^2/(s^2 + 2*z*w*s + w^2); f = 1200; w = 2*pi*f; z = 0.35; k = 0.8;");
  const double w = 2 * kPi * 1200;  // closed form, as above
  check_coefficients(r.model.num, {0.8 * w * w});
  check_coefficients(r.model.den, {w * w, 2 * 0.35 * w, 1});
}

TEST_CASE("system expression: H(jw) equals the coefficient-list model at several frequencies") {
  struct Case {
    const char* text;
    std::vector<double> num, den;  // ascending powers of s: the former --num/--den lists
  };
  const double w = 2 * kPi * 1200;
  const Case cases[] = {
      {"1000/(1000 + s)", {1000}, {1000, 1}},
      {"1/(1 + s/(2*pi*50))", {1}, {1, 1 / (2 * kPi * 50)}},
      {"w^2/(s^2 + 2*0.35*w*s + w^2); w = 2*pi*1200", {w * w}, {w * w, 2 * 0.35 * w, 1}},
      {"(s^2 + w^2)/(s^2 + w/2*s + w^2); w = 2*pi*1200", {w * w, 0, 1}, {w * w, w / 2, 1}},  // a notch
  };
  for (const auto& c : cases) {
    INFO(c.text);
    const ident::RationalModel typed = parse_system_expression(c.text).model;
    const ident::RationalModel listed = predict::model_from_coefficients(c.num, c.den);
    for (const double f_hz : {0.0, 10.0, 50.0, 1000.0, 1200.0, 1e5}) {
      INFO("f = " << f_hz << " Hz");
      const std::complex<double> a = typed.response(2 * kPi * f_hz), b = listed.response(2 * kPi * f_hz);
      CHECK(std::abs(a - b) <= kResponseRel * std::max(1.0, std::abs(b)));
    }
  }
}

TEST_CASE("system expression: signs, powers and exact cancellation of s") {
  // -s^2 is -(s^2) (sign binds looser than ^, common algebra); s/s cancels exactly to 1.
  auto r = parse_system_expression("-s^2 + 3");
  check_coefficients(r.model.num, {3, 0, -1});
  check_coefficients(r.model.den, {1});
  r = parse_system_expression("s/s");
  check_coefficients(r.model.num, {1});
  check_coefficients(r.model.den, {1});
  r = parse_system_expression("s^-2");  // 1/s²: a double integrator
  check_coefficients(r.model.num, {1});
  check_coefficients(r.model.den, {0, 0, 1});
  r = parse_system_expression("2^0.5*(s + 1)/(2*s + 4)");  // constants may take any real power
  check_coefficients(r.model.num, {std::sqrt(2.0) / 2, std::sqrt(2.0) / 2});
  check_coefficients(r.model.den, {2, 1});
}

TEST_CASE("system expression: malformed text names what was expected and the column") {
  struct Case {
    std::string text;
    std::size_t column;
    std::string expected;
  };
  const Case cases[] = {
      {"1/(1 + s", 9, "unbalanced parentheses: expected \")\" for the \"(\" at column 3, found end of expression"},
      {"1 + s)", 6, "unbalanced parentheses: \")\" without a matching \"(\""},
      {"1 + s*", 7, "expected a number, a name or \"(\" after \"*\", found end of expression"},
      {"1/(s - s)", 3, "division by the zero polynomial"},
      {"s^0.5", 3, "a power of a function of s needs an integer exponent, found 0.5"},
      {"", 1, "expected an expression, found end of expression"},
      {"   ", 4, "expected an expression, found end of expression"},
      {std::string(100, '(') + "s" + std::string(100, ')'), 65,
       "nesting deeper than 64 levels of parentheses or signs"},
      {std::string(100, '-') + "s", 65, "nesting deeper than 64 levels of parentheses or signs"},
      {"s^101", 2, "degree above 100, the highest periodfit evaluates"},
      {"2 s", 3, "expected an operator (+ - * / ^), \";\" or the end, found \"s\""},
      {"1/(1 + s/wc); w = 1", 10, "unknown name \"wc\" (did you mean \"w\"? names: s, pi, w)"},
      {"w; w = 1; w = 2", 11, "\"w\" is defined twice (first at column 4)"},
      {"1/s; s = 2", 6, "\"s\" is the Laplace variable and cannot be redefined"},
      {"a; a = b; b = 1", 8, "\"b\" is used before its definition (a definition may use only earlier ones)"},
      {"1; w = s", 8, "\"w\" must be a number, not a function of s"},
      {"1; w 2", 6, "expected \"=\" after the name \"w\", found \"2\""},
      {"1e", 3, "expected the digits of an exponent after \"1e\""},
      {"1e999", 1, "number 1e999 is out of range for a double (about 2.2e-308 to 1.8e308 in magnitude, or 0)"},
      {"1/(1 + 1e-999*s)", 8, "number 1e-999 is out of range for a double (about 2.2e-308 to 1.8e308 in magnitude, or 0)"},
      {"1 # 2", 3, "unexpected character \"#\" (expected a number, a name, + - * / ^ ( ) or ; name = value)"},
      {"s^2^3", 4, "a power of a power needs parentheses: write (a^m)^n"},
  };
  for (const auto& c : cases) {
    INFO("text: " << c.text.substr(0, 40));
    const ident::ExpressionError e = error_of(c.text);
    CHECK(e.expression_column() == c.column);
    CHECK(e.expected() == c.expected);
    CHECK(std::string(e.what()) == "system: " + c.expected + " at column " + std::to_string(c.column));
  }
}

TEST_CASE("system expression: text over the length bound is refused before it is read") {
  const std::string long_text = "1" + std::string(4096, ' ');
  const ident::ExpressionError e = error_of(long_text);
  CHECK(e.expression_column() == 4097);
  CHECK(e.expected() == "expression longer than 4096 characters");
}

TEST_CASE("system expression: random edits of valid text parse or are refused with a column inside it") {
  // A cheap stand-in for fuzzing (fixed seed, std::mt19937 is fully specified by the standard):
  // every outcome is a model or an ExpressionError whose column lies within the text + 1.
  const std::string seeds[] = {"0.8*w^2/(s^2 + 2*0.35*w*s + w^2); w = 2*pi*1200", "1/(1 + 0.68e-3*s)",
                               "(s^2 + w^2)/(s + 1)^3; w = 2; k = w^-1"};
  const std::string alphabet = "0123456789.eE+-*/^() ;=swpi_x\t#";
  std::mt19937 rng(14);
  int parsed = 0, refused = 0;
  for (int trial = 0; trial < 3000; ++trial) {
    std::string text = seeds[static_cast<std::size_t>(trial) % 3];
    const int edits = 1 + static_cast<int>(rng() % 4);
    for (int e = 0; e < edits && !text.empty(); ++e) {
      const std::size_t at = rng() % text.size();
      const char c = alphabet[rng() % alphabet.size()];
      switch (rng() % 3) {
        case 0: text[at] = c; break;
        case 1: text.insert(text.begin() + static_cast<std::ptrdiff_t>(at), c); break;
        default: text.erase(at, 1); break;
      }
    }
    try {
      const auto r = parse_system_expression(text);
      ++parsed;
      REQUIRE_FALSE(r.model.den.empty());
      CHECK(r.model.den.back() == 1);
    } catch (const ident::ExpressionError& e) {
      ++refused;
      INFO(text);
      CHECK(e.expression_column() >= 1);
      CHECK(e.expression_column() <= text.size() + 1);
    }
  }
  CHECK(parsed > 0);   // the edits leave some text valid …
  CHECK(refused > 0);  // … and break most of it
}
