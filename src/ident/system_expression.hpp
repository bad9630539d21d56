#pragma once
/// A system typed as text: a rational expression in s, e.g.
///   "1/(1 + 0.68e-3*s)"
///   "0.8*w^2/(s^2 + 2*0.35*w*s + w^2); w = 2*pi*1200"
/// parsed into H(s) = B(s)/A(s) with A monic (ident/model.hpp). Grammar (EBNF) and error
/// wording: docs/system-expression.md.
///
/// Model. Every sub-expression is a ratio of two polynomials in s with real coefficients
/// (ascending powers, s in rad/s). Numbers and named constants are ratios of degree 0; `s` is
/// s/1; + − × ÷ and integer powers are exact polynomial-ratio arithmetic (sums over a common
/// denominator, products of coefficient lists — the field of rational functions, e.g. any
/// algebra text, or Oppenheim & Willsky, Signals and Systems, §9.7 for system functions).
/// Nothing is evaluated numerically at a frequency and no roots are taken, so the coefficients
/// are the ones the expression states up to floating-point rounding of the products.
/// Normalisation: exact trailing zero coefficients are dropped, an exact common factor s^k is
/// cancelled, and both polynomials are divided by A's highest coefficient (monic A).
/// No other common factor is cancelled: (s+1)/(s+1) stays degree 1 over degree 1, which is the
/// same H(jω); cancelling near-equal roots numerically would change the model silently.
///
/// Definitions after `;` name constants (numbers, not functions of s) that later definitions
/// and the system itself may use; a definition may use only names defined before it, so there
/// is no recursion. `pi` and `s` are built in and cannot be redefined.
///
/// Hostile input: the text is at most `max_length` characters, parentheses and unary signs
/// nest at most `max_depth` deep (the parser recurses once per level), and every intermediate
/// polynomial has degree at most `max_degree` (a power s^n is refused before it is built).
/// Every fault is an ExpressionError naming what was expected and the 1-based column.
///
/// Misuse: the coefficients are in ascending powers of s with s in rad/s; a corner given in Hz
/// must be written with 2*pi (e.g. "1/(1 + s/(2*pi*fc)); fc = 1000").
///
/// Usage:
///   SystemExpressionResult r = parse_system_expression("1/(1 + 1e-3*s)");
///   // r.model.num == {1000}, r.model.den == {1000, 1}
#include <cstddef>
#include <string>
#include <string_view>
#include <utility>
#include <vector>

#include "core/error.hpp"
#include "ident/model.hpp"

namespace periodfit::ident {

struct SystemExpressionOptions {
  std::string source = "system";         ///< name used in messages (the CLI passes "--system")
  std::size_t max_length = 4096;         ///< characters of text accepted
  int max_depth = 64;                    ///< nesting of parentheses and unary signs
  std::size_t max_degree = kMaxModelDegree;  ///< highest degree of any intermediate polynomial
  void validate() const;                 ///< OptionError naming the field
};

struct SystemExpressionResult {
  RationalModel model;  ///< num, den (monic, a_N = 1); delay 0, no covariance
  /// The named constants in definition order with their values (pi not included).
  std::vector<std::pair<std::string, double>> constants;
  std::string method = "recursive descent into exact polynomial-ratio arithmetic";  ///< a description
};

/// A malformed expression: what() reads `<source>: <what was expected> at column N`.
class ExpressionError : public InputError {
 public:
  ExpressionError(const std::string& source, std::size_t column, const std::string& message);
  std::size_t expression_column() const noexcept { return column_; }  ///< 1-based
  const std::string& expected() const noexcept { return expected_; }   ///< the message without the column

 private:
  std::size_t column_;
  std::string expected_;
};

/// Parses `text`. Throws ExpressionError for malformed text, an unknown or twice-defined name,
/// a non-integer power of a polynomial, a power or product above max_degree, a division by
/// the zero polynomial, a non-finite coefficient, or a zero denominator.
SystemExpressionResult parse_system_expression(std::string_view text, const SystemExpressionOptions& options = {});

}  // namespace periodfit::ident
