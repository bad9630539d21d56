#pragma once
/// The options every command that reads captures shares: --rate, --scale CH=FACTOR,
/// --unit CH=UNIT and --time-column, bound to io::ReadOptions. Call once per subcommand:
///
///   io::ReadOptions read;
///   cli::add_capture_options(app, read);
///   ... after parsing: io::read_capture(path, read)
#include <CLI/CLI.hpp>
#include <string>
#include <string_view>
#include <utility>
#include <vector>

#include "dsp/period_lock.hpp"
#include "io/capture_reader.hpp"

namespace periodfit::cli {

/// Declares the capture options on `app`, writing into `options` as they are parsed. A
/// malformed CH=VALUE is a CLI::ValidationError (a usage error, exit code 2).
void add_capture_options(CLI::App& app, io::ReadOptions& options);

/// The options that steer the fundamental (analyze, identify and batch share them, so their
/// help reads the same everywhere); each binds to the caller's field and shows its default.
struct FundamentalOptions {
  CLI::Option* f0 = nullptr;         ///< --f0 HZ
  CLI::Option* f0_hint = nullptr;    ///< --f0-hint HZ
  CLI::Option* harmonics = nullptr;  ///< --harmonics N
};

/// Declares --f0, --f0-hint and --harmonics. `estimated_on` names what f0 is estimated on when
/// it differs per command (e.g. "the input"); empty = the channel analysed.
FundamentalOptions add_fundamental_options(CLI::App& app, dsp::LockOptions& lock, std::string_view estimated_on = "");

/// An option taking a frequency in Hz or a time in seconds, read with SI prefixes and units by
/// io::parse_quantity (the CSV preamble's reader): `--rate 1MHz`, `--f0 1.2k`, `--skew 12ns`.
/// A value that is not one throws periodfit::Error, printed as one line by main:
/// `--rate: "1MQ" is not a frequency (e.g. 48k, 1MHz)`. The default shown is `target`'s.
CLI::Option* add_frequency_option(CLI::App& app, const std::string& name, double& hz, const std::string& help);
CLI::Option* add_duration_option(CLI::App& app, const std::string& name, double& seconds, const std::string& help);

/// The warnings (Capture::channel_selector_warning) for every selector given, the --scale
/// and --unit ones of `read` included, in order; printed by the command after its outputs.
std::vector<std::string> channel_selector_warnings(const Capture& capture, const std::vector<std::string>& selectors,
                                                   const io::ReadOptions& read = {});

/// Parses a --full-scale value: a peak-to-peak range ("2") or "MIN:MAX" ("-1:1"); returns the
/// full-scale range (> 0, finite). Throws CLI::ValidationError naming `option` otherwise.
double parse_full_scale(std::string_view text, std::string_view option);

/// Splits "CH=VALUE" at its last '=': both sides must be non-empty. Throws
/// CLI::ValidationError naming `option` and what was wrong.
std::pair<std::string, std::string> split_assignment(std::string_view text, std::string_view option);

}  // namespace periodfit::cli
