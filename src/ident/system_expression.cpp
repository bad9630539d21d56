#include "ident/system_expression.hpp"

#include <algorithm>
#include <charconv>
#include <cmath>
#include <cstdio>
#include <cstdlib>
#include <numbers>
#include <optional>

#include "core/number_format.hpp"

namespace periodfit::ident {

ExpressionError::ExpressionError(const std::string& source, std::size_t column, const std::string& message)
    : InputError(source, 0, 0, message + " at column " + std::to_string(column)),
      column_(column),
      expected_(message) {}

void SystemExpressionOptions::validate() const {
  if (max_length < 1) throw OptionError("max_length", std::to_string(max_length), "must be >= 1");
  if (max_depth < 1) throw OptionError("max_depth", std::to_string(max_depth), "must be >= 1");
  if (max_degree < 1) throw OptionError("max_degree", std::to_string(max_degree), "must be >= 1");
}

namespace {

using Poly = std::vector<double>;  // ascending powers of s

enum class Kind { number, name, op, end };

struct Token {
  Kind kind = Kind::end;
  std::string text;   // name, operator character, or the number's spelling
  double value = 0;   // number
  std::size_t column = 0;  // 1-based
};

/// How a token reads in a message: `"*"`, `"w"`, `end of expression`.
std::string describe(const Token& t) {
  if (t.kind == Kind::end) return "end of expression";
  return "\"" + t.text + "\"";
}

std::string printable(char c) {
  if (static_cast<unsigned char>(c) >= 0x20 && static_cast<unsigned char>(c) < 0x7f) return std::string(1, c);
  char buf[8];
  std::snprintf(buf, sizeof buf, "\\x%02X", static_cast<unsigned>(static_cast<unsigned char>(c)));
  return buf;
}

bool is_name_start(char c) { return (c >= 'a' && c <= 'z') || (c >= 'A' && c <= 'Z') || c == '_'; }
bool is_digit(char c) { return c >= '0' && c <= '9'; }

std::vector<Token> tokenize(std::string_view text, const std::string& source) {
  std::vector<Token> out;
  std::size_t i = 0;
  while (i < text.size()) {
    const char c = text[i];
    const std::size_t column = i + 1;
    if (c == ' ' || c == '\t') {
      ++i;
      continue;
    }
    if (is_digit(c) || (c == '.' && i + 1 < text.size() && is_digit(text[i + 1]))) {
      std::size_t j = i;
      while (j < text.size() && is_digit(text[j])) ++j;
      if (j < text.size() && text[j] == '.') {
        ++j;
        while (j < text.size() && is_digit(text[j])) ++j;
      }
      if (j < text.size() && (text[j] == 'e' || text[j] == 'E')) {
        std::size_t k = j + 1;
        if (k < text.size() && (text[k] == '+' || text[k] == '-')) ++k;
        if (k >= text.size() || !is_digit(text[k]))
          throw ExpressionError(source, k + 1, "expected the digits of an exponent after \"" +
                                                   std::string(text.substr(i, k - i)) + "\"");
        while (k < text.size() && is_digit(text[k])) ++k;
        j = k;
      }
      Token t{Kind::number, std::string(text.substr(i, j - i)), 0, column};
      // from_chars: independent of the C locale's decimal point; the spelling is validated above.
      const auto [end, ec] = std::from_chars(t.text.data(), t.text.data() + t.text.size(), t.value);
      if (ec != std::errc{} || end != t.text.data() + t.text.size() || !std::isfinite(t.value))
        throw ExpressionError(source, column, "number " + t.text + " is out of range for a double (about 2.2e-308 to 1.8e308 in magnitude, or 0)");
      out.push_back(std::move(t));
      i = j;
      continue;
    }
    if (is_name_start(c)) {
      std::size_t j = i;
      while (j < text.size() && (is_name_start(text[j]) || is_digit(text[j]))) ++j;
      out.push_back({Kind::name, std::string(text.substr(i, j - i)), 0, column});
      i = j;
      continue;
    }
    if (std::string_view("+-*/^()=;").find(c) != std::string_view::npos) {
      out.push_back({Kind::op, std::string(1, c), 0, column});
      ++i;
      continue;
    }
    throw ExpressionError(source, column,
                          "unexpected character \"" + printable(c) +
                              "\" (expected a number, a name, + - * / ^ ( ) or ; name = value)");
  }
  out.push_back({Kind::end, "", 0, text.size() + 1});
  return out;
}

// --- polynomial-ratio arithmetic -------------------------------------------------------------

void trim(Poly& p) {
  while (p.size() > 1 && p.back() == 0) p.pop_back();
  if (p.empty()) p.push_back(0);
}
bool is_zero(const Poly& p) { return std::all_of(p.begin(), p.end(), [](double v) { return v == 0; }); }
std::size_t degree(const Poly& p) { return p.size() - 1; }

Poly multiply(const Poly& a, const Poly& b) {
  Poly out(a.size() + b.size() - 1, 0.0);
  for (std::size_t i = 0; i < a.size(); ++i)
    for (std::size_t j = 0; j < b.size(); ++j) out[i + j] += a[i] * b[j];
  trim(out);
  return out;
}

Poly add(const Poly& a, const Poly& b, double sign) {
  Poly out(std::max(a.size(), b.size()), 0.0);
  for (std::size_t i = 0; i < a.size(); ++i) out[i] += a[i];
  for (std::size_t i = 0; i < b.size(); ++i) out[i] += sign * b[i];
  trim(out);
  return out;
}

/// num/den; den is never the zero polynomial.
struct Ratio {
  Poly num{0.0};
  Poly den{1.0};
  bool is_constant() const { return num.size() == 1 && den.size() == 1; }
  double value() const { return num[0] / den[0]; }
};

Ratio constant(double v) { return {{v}, {1.0}}; }

class Parser {
 public:
  Parser(const std::vector<Token>& tokens, std::size_t begin, std::size_t end, const SystemExpressionOptions& o,
         const std::vector<std::pair<std::string, double>>& known, const std::vector<std::string>& later)
      : t_(tokens), pos_(begin), end_(end), o_(o), known_(known), later_(later) {}

  /// expression, then the segment must be over.
  Ratio whole() {
    if (pos_ == end_) fail(peek(), "expected an expression, found " + describe(peek()));
    Ratio r = expression();
    if (pos_ != end_) {
      const Token& t = peek();
      if (t.text == ")") fail(t, "unbalanced parentheses: \")\" without a matching \"(\"");
      if (t.text == "^") fail(t, "a power of a power needs parentheses: write (a^m)^n");
      if (t.text == "=") fail(t, "\"=\" belongs in a definition after \";\" (name = value)");
      fail(t, "expected an operator (+ - * / ^), \";\" or the end, found " + describe(t));
    }
    return r;
  }

 private:
  const Token& peek() const { return t_[pos_ < end_ ? pos_ : end_]; }
  bool at(const char* op) const { return pos_ < end_ && t_[pos_].kind == Kind::op && t_[pos_].text == op; }
  [[noreturn]] void fail(const Token& t, const std::string& what) const { throw ExpressionError(o_.source, t.column, what); }

  void check(Ratio& r, const Token& where) const {
    trim(r.num);
    trim(r.den);
    // An exact common factor s^k (both constant terms exactly zero) cancels without rounding.
    while (r.num.size() > 1 && r.den.size() > 1 && r.num[0] == 0 && r.den[0] == 0) {
      r.num.erase(r.num.begin());
      r.den.erase(r.den.begin());
    }
    if (is_zero(r.den)) fail(where, "the denominator underflows to zero");
    // A constant denominator is folded into the numerator, so sums of polynomials stay
    // polynomials and a common denominator is only formed where the expression has one.
    if (r.den.size() == 1 && r.den[0] != 1) {
      for (double& v : r.num) v /= r.den[0];
      r.den = {1.0};
    }
    for (const Poly* p : {&r.num, &r.den})
      for (double v : *p)
        if (!std::isfinite(v)) fail(where, "a coefficient overflows (beyond about 1.8e308)");
    if (std::max(degree(r.num), degree(r.den)) > o_.max_degree)
      fail(where, "degree above " + std::to_string(o_.max_degree) + ", the highest periodfit evaluates");
  }

  void enter(const Token& where) {
    if (++depth_ > o_.max_depth)
      fail(where, "nesting deeper than " + std::to_string(o_.max_depth) + " levels of parentheses or signs");
  }

  Ratio expression() {
    Ratio left = term();
    while (at("+") || at("-")) {
      const Token& op = t_[pos_++];
      const Ratio right = term();
      const double sign = op.text == "+" ? 1.0 : -1.0;
      Ratio out;
      if (left.den == right.den) {
        out = {add(left.num, right.num, sign), left.den};
      } else {
        out = {add(multiply(left.num, right.den), multiply(right.num, left.den), sign), multiply(left.den, right.den)};
      }
      check(out, op);
      left = std::move(out);
    }
    return left;
  }

  Ratio term() {
    Ratio left = unary();
    while (at("*") || at("/")) {
      const Token& op = t_[pos_++];
      const Token& operand_start = peek();
      const Ratio right = unary();
      Ratio out;
      if (op.text == "*") {
        out = {multiply(left.num, right.num), multiply(left.den, right.den)};
      } else {
        if (is_zero(right.num)) fail(operand_start, "division by the zero polynomial");
        out = {multiply(left.num, right.den), multiply(left.den, right.num)};
      }
      check(out, op);
      left = std::move(out);
    }
    return left;
  }

  Ratio unary() {
    if (at("-") || at("+")) {
      const Token& op = t_[pos_++];
      enter(op);
      Ratio r = unary();
      --depth_;
      if (op.text == "-")
        for (double& v : r.num) v = -v;
      return r;
    }
    return power();
  }

  Ratio power() {
    Ratio base = primary();
    if (!at("^")) return base;
    const Token& op = t_[pos_++];
    // The exponent: an optional sign and a primary (number, constant or parenthesised).
    double sign = 1;
    if (at("-") || at("+")) sign = t_[pos_++].text == "-" ? -1 : 1;
    const Token& exponent_start = peek();
    const Ratio e = primary();
    if (!e.is_constant()) fail(exponent_start, "an exponent must be a number, not a function of s");
    const double n = sign * e.value();
    if (base.is_constant()) {
      const double v = std::pow(base.value(), n);
      if (!std::isfinite(v))
        fail(op, "the power " + format_shortest(base.value()) + "^" + format_shortest(n) +
                     " is not a finite real number");
      return constant(v);
    }
    if (n != std::round(n)) fail(exponent_start, "a power of a function of s needs an integer exponent, found " + format_shortest(n));
    const std::size_t count = static_cast<std::size_t>(std::min(std::abs(n), 1e9));
    const std::size_t d = std::max(degree(base.num), degree(base.den));
    if (count > o_.max_degree || d * count > o_.max_degree)
      fail(op, "degree above " + std::to_string(o_.max_degree) + ", the highest periodfit evaluates");
    Ratio out = constant(1);
    for (std::size_t k = 0; k < count; ++k) {
      out = {multiply(out.num, base.num), multiply(out.den, base.den)};
      check(out, op);
    }
    if (n < 0) {
      if (is_zero(out.num)) fail(op, "division by the zero polynomial (a negative power of zero)");
      std::swap(out.num, out.den);
      check(out, op);
    }
    return out;
  }

  Ratio primary() {
    const Token& t = peek();
    if (t.kind == Kind::number) {
      ++pos_;
      return constant(t.value);
    }
    if (t.kind == Kind::name) {
      ++pos_;
      if (t.text == "s") return {{0.0, 1.0}, {1.0}};
      if (t.text == "pi") return constant(std::numbers::pi);
      for (const auto& [name, value] : known_)
        if (name == t.text) return constant(value);
      if (std::find(later_.begin(), later_.end(), t.text) != later_.end())
        fail(t, "\"" + t.text + "\" is used before its definition (a definition may use only earlier ones)");
      std::vector<std::string> names{"s", "pi"};
      for (const auto& k : known_) names.push_back(k.first);
      std::string message = "unknown name \"" + t.text + "\" (";
      if (const std::string near = nearest_name(t.text, names); !near.empty())
        message += "did you mean \"" + near + "\"? ";
      message += "names: ";
      for (std::size_t i = 0; i < names.size(); ++i) message += (i ? ", " : "") + names[i];
      fail(t, message + ")");
    }
    if (t.kind == Kind::op && t.text == "(") {
      ++pos_;
      enter(t);
      if (at(")")) fail(peek(), "expected an expression inside \"( )\", found \")\"");
      Ratio r = expression();
      --depth_;
      if (!at(")")) {
        const Token& f = peek();
        if (f.kind == Kind::end || f.text == ";")
          fail(f, "unbalanced parentheses: expected \")\" for the \"(\" at column " + std::to_string(t.column) +
                      ", found " + describe(f));
        fail(f, "expected an operator (+ - * / ^) or \")\", found " + describe(f));
      }
      ++pos_;
      return r;
    }
    if (t.kind == Kind::end || t.text == ";") {
      const Token& before = pos_ > 0 ? t_[pos_ - 1] : t;
      if (before.kind == Kind::op && std::string_view("+-*/^").find(before.text) != std::string_view::npos)
        fail(t, "expected a number, a name or \"(\" after \"" + before.text + "\", found " + describe(t));
    }
    fail(t, "expected a number, a name or \"(\", found " + describe(t));
  }

  const std::vector<Token>& t_;
  std::size_t pos_, end_;
  const SystemExpressionOptions& o_;
  const std::vector<std::pair<std::string, double>>& known_;
  const std::vector<std::string>& later_;
  int depth_ = 0;
};

}  // namespace

SystemExpressionResult parse_system_expression(std::string_view text, const SystemExpressionOptions& options) {
  options.validate();
  if (text.size() > options.max_length)
    throw ExpressionError(options.source, options.max_length + 1,
                          "expression longer than " + std::to_string(options.max_length) + " characters");
  const std::vector<Token> tokens = tokenize(text, options.source);
  // Segments between top-level ";": the system first, then the definitions.
  std::vector<std::size_t> cuts{0};
  for (std::size_t i = 0; i < tokens.size(); ++i)
    if (tokens[i].kind == Kind::op && tokens[i].text == ";") cuts.push_back(i + 1);
  cuts.push_back(tokens.size());  // one past the end token; segment k is [cuts[k], cuts[k+1] - 1)

  SystemExpressionResult result;
  std::vector<std::size_t> defined_at;
  std::vector<std::string> all_names;
  for (std::size_t k = 1; k + 1 < cuts.size(); ++k) {
    const Token& name = tokens[cuts[k]];
    if (name.kind == Kind::name) all_names.push_back(name.text);
  }
  for (std::size_t k = 1; k + 1 < cuts.size(); ++k) {
    const std::size_t begin = cuts[k], end = cuts[k + 1] - 1;
    const Token& name = tokens[begin];
    if (begin == end && name.kind == Kind::end) break;  // a trailing ";" ends the list
    if (name.kind != Kind::name)
      throw ExpressionError(options.source, name.column, "expected a definition name = value after \";\", found " + describe(name));
    if (name.text == "s")
      throw ExpressionError(options.source, name.column, "\"s\" is the Laplace variable and cannot be redefined");
    if (name.text == "pi") throw ExpressionError(options.source, name.column, "\"pi\" is built in and cannot be redefined");
    for (std::size_t i = 0; i < result.constants.size(); ++i)
      if (result.constants[i].first == name.text)
        throw ExpressionError(options.source, name.column,
                              "\"" + name.text + "\" is defined twice (first at column " +
                                  std::to_string(defined_at[i]) + ")");
    const Token& eq = tokens[begin + 1];
    if (begin + 1 >= end || eq.kind != Kind::op || eq.text != "=")
      throw ExpressionError(options.source, begin + 1 < end ? eq.column : tokens[end].column,
                            "expected \"=\" after the name \"" + name.text + "\", found " +
                                describe(begin + 1 < end ? eq : tokens[end]));
    std::vector<std::string> later(all_names.begin() + static_cast<std::ptrdiff_t>(result.constants.size()),
                                   all_names.end());
    Parser p(tokens, begin + 2, end, options, result.constants, later);
    const Ratio value = p.whole();
    if (!value.is_constant())
      throw ExpressionError(options.source, tokens[begin + 2].column,
                            "\"" + name.text + "\" must be a number, not a function of s");
    result.constants.emplace_back(name.text, value.value());
    defined_at.push_back(name.column);
  }
  const std::vector<std::string> none;
  Parser system(tokens, 0, cuts[1] - 1, options, result.constants, none);
  Ratio h = system.whole();
  if (is_zero(h.den)) throw ExpressionError(options.source, 1, "the denominator is zero");
  const double lead = h.den.back();
  for (double& v : h.num) v /= lead;
  for (double& v : h.den) v /= lead;
  h.den.back() = 1;
  for (const Poly* p : {&h.num, &h.den})
    for (double v : *p)
      if (!std::isfinite(v))
        throw ExpressionError(options.source, 1, "a coefficient overflows when A(s) is made monic");
  result.model.num = std::move(h.num);
  result.model.den = std::move(h.den);
  return result;
}

}  // namespace periodfit::ident
