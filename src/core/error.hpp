#pragma once
/// The one error hierarchy of periodfit. Bad input and impossible requests throw one of these;
/// the CLI prints `periodfit: error: <what()>` and exits with ExitCode::error. Programmer errors
/// (size mismatch, use before compute) are assertions, not exceptions.
#include <cstddef>
#include <stdexcept>
#include <string>
#include <string_view>
#include <vector>

namespace periodfit {

/// `message` with every NUL byte written as the four characters \x00: what() is a C string,
/// so a NUL from a file's bytes would cut the message there (issue 11, class 10).
std::string escape_nul(std::string_view message);

/// Base of every error the library reports to a user.
class Error : public std::runtime_error {
 public:
  explicit Error(const std::string& message) : std::runtime_error(escape_nul(message)) {}
};

/// A problem in an input file. what() reads `path:line:column: message` (line/column omitted
/// when 0), so editors and people can jump to the spot.
class InputError : public Error {
 public:
  InputError(std::string path, std::size_t line, std::size_t column, std::string message);
  const std::string& path() const noexcept { return path_; }
  std::size_t line() const noexcept { return line_; }      ///< 1-based; 0 = whole file
  std::size_t column() const noexcept { return column_; }  ///< 1-based; 0 = whole line
  const std::string& message() const noexcept { return message_; }

 private:
  std::string path_;
  std::size_t line_;
  std::size_t column_;
  std::string message_;
};

/// An operating-system failure on a path (open, read, write, rename): names the path and the
/// OS reason.
class IoError : public Error {
 public:
  IoError(std::string path, std::string what_failed, int errno_value);
  const std::string& path() const noexcept { return path_; }

 private:
  std::string path_;
};

/// An option value outside its documented range:
/// `invalid option: max_harmonic = 0 (must be >= 1)`.
class OptionError : public Error {
 public:
  OptionError(std::string_view field, std::string_view value, std::string_view constraint);
};

/// A request the data cannot satisfy: no periodic component, too few excited harmonics for the
/// requested model order, a singular fit. The message says what would be needed.
class AnalysisError : public Error {
 public:
  explicit AnalysisError(const std::string& message) : Error(message) {}
};

/// An unknown name (channel, command, limit, wave kind). Lists what exists and suggests the
/// nearest one: `unknown channel "v_ot" (did you mean "v_out"? channels: t, v_in, v_out)`.
class UnknownNameError : public Error {
 public:
  /// `where` (a file, when the name was looked up in one) follows the name: `unknown channel
  /// "1" in out.csv (channels: CH2)`; empty = not said.
  UnknownNameError(std::string_view what, std::string_view name,
                   const std::vector<std::string>& known, std::string_view where = "");
};

/// The nearest of `known` to `name` by edit distance, or "" when none is close enough to
/// suggest (distance more than a third of the name's length, at least 2).
std::string nearest_name(std::string_view name, const std::vector<std::string>& known);

}  // namespace periodfit
