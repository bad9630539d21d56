#pragma once
/// The command line's own voice: the --help layout and the one-line usage errors.
///
/// Help (stdout, exit 0): a `usage:` line, the description, the commands (top level), then the
/// options group by group, each with its value name, description, default and its relations
/// to other options in plain words ("cannot be combined with --model", "only with --system").
///
/// Usage errors (stderr, exit 2): the argument parser's exceptions are turned into one line
/// naming the option and what it expects, e.g. `--rate: "1MQ" is not a number`,
/// `unknown option --rat; did you mean --rate?` (edit distance over the command's options,
/// core/error.hpp nearest_name), `no command given; commands: info, analyze, …`.
#include <CLI/CLI.hpp>
#include <memory>
#include <string>
#include <vector>

namespace periodfit::cli {

/// The help formatter; set on the top-level app before the commands are added (commands
/// inherit their parent's formatter when they are created).
std::shared_ptr<CLI::FormatterBase> make_help_formatter();

/// One line (without the `periodfit: error: ` prefix) for a parse error. `app` is the top-level
/// app after the failed parse; `args` the words after the program name.
std::string usage_error_message(const CLI::ParseError& error, CLI::App& app, const std::vector<std::string>& args);

}  // namespace periodfit::cli
