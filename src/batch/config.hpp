#pragma once
/// The batch configuration: which files, how each is analysed (analyze or identify settings),
/// what the report holds, and the limits. Written in TOML (docs/batch-config.md); read with
/// toml++. Everything is checked at load time, before any capture is read: a TOML syntax error,
/// an unknown section or key (with a "did you mean"), a value of the wrong type or out of
/// range, an unknown result name or a malformed limit throws InputError carrying the config's
/// path and the line and column of the offending value.
///
/// Usage:
///   const BatchConfig config = load_batch_config("limits.toml");
///   for (const Limit& l : config.limits) …
#include <optional>
#include <string>
#include <string_view>
#include <vector>

#include "batch/limits.hpp"
#include "core/flags.hpp"
#include "ident/identify.hpp"
#include "io/capture_reader.hpp"
#include "store/identity.hpp"

namespace periodfit::batch {

/// Which files' sections in report.html get plots.
enum class PlotSelection { all, failed, none };

const char* plot_selection_name(PlotSelection selection);
/// Parses "all", "failed" or "none"; throws OptionError naming `field` otherwise.
PlotSelection parse_plot_selection(std::string_view text, std::string_view field = "plots");
/// Parses "analyze" or "frf"; throws OptionError naming `field` otherwise.
AnalysisMode parse_mode(std::string_view text, std::string_view field = "mode");

/// Settings of analyze mode (one result per channel).
struct AnalyzeSettings {
  std::vector<std::string> channels;  ///< channel names or 0-based indices; empty = all data channels
  /// f0_hz, f0_hint_hz and max_harmonic (the `harmonics` key; 0 = the automatic count): the
  /// options struct analyze and frf share (dsp/period_lock.hpp); set together with identify.lock.
  dsp::LockOptions lock;
  void validate() const;  ///< throws OptionError naming the field
};

/// Which files a batch takes from its folders.
struct FileSelection {
  /// File-name globs (`*`, `?`, `[…]`); empty = every file with a capture extension
  /// (.csv, .txt, .tsv, .dat, .wav, .flac, .aif, .aiff, .w64, .rf64).
  std::vector<std::string> patterns;
  bool recursive = false;  ///< descend into sub-folders
};

struct BatchConfig {
  std::string source;  ///< path of the config file; "" when built from flags alone
  AnalysisMode mode = AnalysisMode::analyze;
  FileSelection files;
  io::ReadOptions read;
  AnalyzeSettings analyze;
  ident::IdentifyOptions identify;  ///< identify mode: channels, order, delay, FRF settings
  PlotSelection plots = PlotSelection::all;
  std::string title = "periodfit batch report";  ///< heading of report.html
  std::vector<Limit> limits;  ///< finished (lo/hi derived) for `mode`
  /// Flag codes (core/flags.hpp) that fail a file whatever its limits say; `[verdict]
  /// fail_on_flags`. Default: every flag of severity `invalidates`.
  std::vector<std::string> fail_on_flags = invalidating_flags();
  /// Who and what each capture belongs to (`[identity]`, store/identity.hpp).
  store::IdentitySettings identity;
  /// The results database (`[record] database`): a SQLite path or a postgresql:// URL; "" =
  /// record nothing unless the command line asks (docs/results-db.md).
  std::string database;
  std::string text;  ///< the config file's text ("" when built from flags alone)
};

/// Parses config text; `source` names it in error messages.
BatchConfig parse_batch_config(std::string_view text, const std::string& source);

/// Reads and parses a config file (IoError when it cannot be read).
BatchConfig load_batch_config(const std::string& path);

/// Why `limit` cannot be evaluated with `config`'s analysis settings (a model quantity when no
/// model order is set), or nullopt.
std::optional<std::string> model_problem(const Limit& limit, const BatchConfig& config);

/// Re-checks every limit for `config.mode` (after a command line changed it); an invalid one
/// throws InputError at the limit's position in the config.
void revalidate_limits(BatchConfig& config);

}  // namespace periodfit::batch
