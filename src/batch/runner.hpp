#pragma once
/// Running one characterisation over folders of captures: list the files (sorted by path),
/// analyse them on a pool of threads, evaluate the limits, and write the outputs into the
/// report folder — summary.csv, summary.json, files/NNNN-<name>.json per file and report.html
/// (docs/batch-output.md). The outputs are written into a staging folder that replaces the
/// report folder whole when the run is complete (batch/report_folder.hpp): the report folder is
/// the complete result of one run, or as it was before — never a mix, never half a file; a
/// second run into the same folder at the same time is refused.
///
/// Memory: a file's report section (text and plots) is rendered as soon as the file is done and
/// spilled to an unnamed scratch file (io::ScratchFile) in the report folder; the run keeps
/// only each file's summary row, and report.html is streamed from the spill file at the end, so
/// the peak RSS does not grow with the number of files (docs/performance.md, Batch).
///
/// Robustness: a file that cannot be read or analysed (corrupt, not periodic, a missing
/// channel) becomes an ERROR row with its message; it never stops the batch. Determinism: each
/// file is analysed independently of the others and the outputs are assembled in path order
/// after all files are done, so the outputs of --jobs 1 and --jobs N are byte-identical (no
/// timings are written into them).
///
/// Usage:
///   BatchOptions o; o.inputs = {"captures/"}; o.report_dir = "out"; o.config = load_batch_config("limits.toml");
///   const BatchResult r = run_batch(o);
///   return to_int(batch_exit_code(r));
#include <cstdint>
#include <functional>
#include <string>
#include <vector>

#include "batch/config.hpp"
#include "batch/limits.hpp"
#include "core/exit_code.hpp"
#include "report/html_report.hpp"

namespace periodfit::batch {

/// Progress as the batch goes, for a terminal display (the library never prints).
struct Progress {
  std::size_t done = 0;
  std::size_t total = 0;
  double elapsed_s = 0;
};

/// One shard K/N of a run split over N processes (batch/shard.hpp); count 0 = not sharded.
struct ShardSpec {
  int index = 0;  ///< K, 1-based
  int count = 0;  ///< N
  bool active() const { return count > 0; }
};

/// What made a run's settings, as given: recorded in each shard (shard.json) so that shards of
/// different settings are refused and the gather rebuilds the same BatchConfig. Filled by the
/// CLI; the hash covers the three fields.
struct SettingsRecord {
  std::string config_source;                ///< --config as given; "" = none
  std::string config_text;                  ///< the config file's bytes when the run read it
  std::vector<std::string> settings_words;  ///< the setting options as given ("--f0", "50", …)
  /// FNV-1a 64 of the fields, each length-prefixed (batch/shard.hpp), as 16 hex digits.
  std::string hash() const;
};

/// BatchOptions::database value naming `results.sqlite` in the report folder.
inline constexpr const char* kReportDatabase = "@report";

struct BatchOptions {
  std::vector<std::string> inputs;  ///< folders (searched per config.files) or single capture files
  std::string report_dir;           ///< output folder, created when missing; required
  int jobs = 0;                     ///< worker threads; 0 = hardware threads
  BatchConfig config;               ///< per-file analysis, file selection, report, limits
  /// Called on the calling thread about every progress_interval_s while files run, and once at
  /// the end; empty = no progress.
  std::function<void(const Progress&)> progress;
  double progress_interval_s = 0.25;
  /// Take only this shard's captures and write shard.json and shard-sections.html beside the
  /// outputs (batch/shard.hpp); inactive by default.
  ShardSpec shard;
  SettingsRecord settings;          ///< recorded in shard.json (sharded runs)
  /// The run id all shards of one run share (shard.json; a results database keys the run by it).
  /// "" = derived: "pf-" + FNV-1a 64 of the tool version, settings hash, inputs and N.
  std::string run_id;
  /// The results database to record the run in (store/recorder.hpp): a SQLite path or a
  /// postgresql:// URL; kReportDatabase = `results.sqlite` inside the report folder; "" = the
  /// config's `[record] database`, else record nothing.
  std::string database;

  void validate() const;  ///< throws OptionError naming the field
};

/// One file's outcome.
struct FileResult {
  std::string path;                 ///< as found (folder argument joined with the relative path)
  report::FileStatus status = report::FileStatus::error;
  std::string error;                ///< the message when status is ERROR
  std::vector<std::string> flags;   ///< analysis flags (nonlinear, few-periods, v_out: clipped, …)
  /// The flags that fail this file (those whose code is in config.fail_on_flags), as in `flags`
  std::vector<std::string> failing_flags;
  std::vector<std::pair<std::string, std::string>> key_results;  ///< summary columns, in order
  std::vector<LimitOutcome> limits; ///< one per config limit, in config order
  std::string json_file;            ///< per-file JSON, relative to the report folder
  double analysis_s = 0;            ///< wall time of reading + analysing (never written to outputs)
  report::BoardResponse response;   ///< its points in the report's cross-board overlay
};

struct BatchResult {
  std::vector<FileResult> files;    ///< in path order
  std::size_t passed = 0, failed = 0, errors = 0;
  std::string report_dir;
  std::string summary_csv, summary_json, report_html;  ///< paths written
  int jobs = 1;                     ///< worker threads used
  double elapsed_s = 0;             ///< wall time of the whole run
  double analysis_s = 0;            ///< sum of FileResult::analysis_s
  /// The results database the run was recorded in ("" = none), the captures it added and those
  /// it already held (a re-run), and the error that stopped recording ("" = all recorded; the
  /// report folder is complete either way and can be imported later).
  std::string database;
  std::int64_t recorded_new = 0, recorded_known = 0;
  std::string database_error;
};

/// The captures a batch would take from `inputs`: regular files named directly, and the files
/// in each folder matching `selection` (dangling symbolic links included, so they become ERROR
/// rows), sorted by path, duplicates removed. Hidden entries and the folder `report_dir` (an
/// earlier run's report inside an input folder) are not searched. Throws IoError for an input
/// that does not exist and InputError when nothing is found.
std::vector<std::string> find_captures(const std::vector<std::string>& inputs,
                                       const FileSelection& selection,
                                       const std::string& report_dir = {});

/// Runs the batch (see the header). Throws only for problems of the run itself (bad options, an
/// unwritable report folder); problems of single files become ERROR rows.
BatchResult run_batch(const BatchOptions& options);

/// The per-file JSON's name in the report folder for the file at 0-based position `index` in
/// report order: "files/NNNN-<safe name>.json" (docs/batch-output.md).
std::string per_file_json_name(std::size_t index, const std::string& path);

/// Writes summary.csv, summary.json and report.html of `files` (in report order; `rows` their
/// overview rows) into `folder`; `section_body(i, sink)` passes file i's section body
/// (report::render_section_body) to the sink, after its heading. The one writer of these
/// outputs: run_batch and gather_shards both call it.
void write_report_outputs(const std::string& folder, const BatchConfig& config,
                          const std::vector<FileResult>& files, const std::vector<report::ReportRow>& rows,
                          const std::function<void(std::size_t, const report::HtmlSink&)>& section_body);

/// The pass / fail / error counts of `files` into `result`.
void count_statuses(const std::vector<FileResult>& files, BatchResult& result);

/// Why a file did not pass, for one line on a terminal: its error, else its first failing flag
/// ("flag v_out: clipped (invalidates)"), else its first failing limit with the value, its 95 %
/// interval and the allowed range; "(+N more)" when there are more. "" for a PASS.
std::string file_reason(const FileResult& file, const BatchConfig& config);

/// One failing limit for people: "thd = 9.3 % (no uncertainty known), allowed ≤ 8 %".
std::string failing_limit_text(const Limit& limit, const LimitOutcome& outcome);

/// One failing flag for people: "flag v_out: clipped (invalidates)".
std::string failing_flag_text(const std::string& flag);

/// 0 all passed, 1 some limit or flag failed (no errors), 2 some file had an error.
ExitCode batch_exit_code(const BatchResult& result);

/// "N pass, N fail, N error".
std::string batch_totals_line(const BatchResult& result);

}  // namespace periodfit::batch
