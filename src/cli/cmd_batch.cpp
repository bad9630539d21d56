// periodfit batch DIR…: one characterisation over folders of captures, with limits, summaries
// and an HTML report. Settings come from --config FILE (TOML) and/or the flags below; a flag
// given on the command line overrides the config's value.
#include <unistd.h>

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <map>
#include <memory>
#include <string>
#include <vector>

#include "batch/config.hpp"
#include "batch/runner.hpp"
#include "batch/shard.hpp"
#include "cli/capture_options.hpp"
#include "cli/commands.hpp"
#include "core/error.hpp"
#include "core/exit_code.hpp"
#include "core/number_format.hpp"
#include "io/output_file.hpp"
#include "core/table.hpp"
#include "store/database.hpp"
#include "store/identity.hpp"

namespace periodfit::cli {

namespace {

struct BatchArgs {
  batch::BatchOptions run;          ///< inputs, report_dir, jobs
  batch::BatchConfig flags;         ///< settings given as flags (defaults from the structs)
  std::string config_path;
  std::string mode;
  std::string plots;
  std::string config_text;          ///< the config's bytes, as read (recorded by shards)
  std::string shard;                ///< --shard K/N
  bool quiet = false;
  bool timing = false;
  std::vector<std::string> database;  ///< --db [TARGET]: 0 or 1 value
  CLI::Option* db_option = nullptr;
  std::map<std::string, std::string> who;  ///< --serial, --lot, … (store/identity.hpp)
  // Options whose presence decides whether they override the config.
  CLI::Option* patterns = nullptr;
  CLI::Option* recursive = nullptr;
  CLI::Option* channels = nullptr;
  CLI::Option* input = nullptr;
  CLI::Option* output = nullptr;
  CLI::Option* order = nullptr;
  CLI::Option* delay = nullptr;
  CLI::Option* f0 = nullptr;
  CLI::Option* f0_hint = nullptr;
  CLI::Option* harmonics = nullptr;
  CLI::Option* min_snr = nullptr;
  CLI::Option* skew = nullptr;
  CLI::Option* plots_option = nullptr;
  CLI::Option* mode_option = nullptr;
};

std::string duration_text(double s) {
  if (!std::isfinite(s) || s < 0) return "?";
  if (s < 60) return std::to_string(static_cast<int>(std::lround(s))) + " s";
  const long m = std::lround(s) / 60;
  return std::to_string(m) + " min " + std::to_string(std::lround(s) - 60 * m) + " s";
}

// One line, redrawn in place: done/total, files per second, estimated time left.
void show_progress(const batch::Progress& p) {
  const double rate = p.elapsed_s > 0 ? static_cast<double>(p.done) / p.elapsed_s : 0;
  const double eta = rate > 0 ? static_cast<double>(p.total - p.done) / rate : std::nan("");
  std::string line = "\r  " + std::to_string(p.done) + "/" + std::to_string(p.total) + " files  " +
                     format_fixed(rate, 1) + " files/s  ETA " +
                     (p.done == p.total ? std::string("0 s") : duration_text(eta)) + "   ";
  std::fputs(line.c_str(), stderr);
  if (p.done == p.total) std::fputs("\n", stderr);
  std::fflush(stderr);
}

batch::BatchConfig settings(const BatchArgs& a) {
  batch::BatchConfig c = a.config_path.empty() ? batch::BatchConfig{} : batch::parse_batch_config(a.config_text, a.config_path);
  const batch::BatchConfig& f = a.flags;
  if (a.mode_option->count()) c.mode = batch::parse_mode(a.mode, "--mode");
  else if (a.config_path.empty() && (a.input->count() || a.output->count() || a.order->count()))
    c.mode = batch::AnalysisMode::identify;  // identify flags without --mode or a config
  if (a.patterns->count()) c.files.patterns = f.files.patterns;
  if (a.recursive->count()) c.files.recursive = f.files.recursive;
  if (f.read.rate_hz != 0) c.read.rate_hz = f.read.rate_hz;
  c.read.scales.insert(c.read.scales.end(), f.read.scales.begin(), f.read.scales.end());
  c.read.units.insert(c.read.units.end(), f.read.units.begin(), f.read.units.end());
  if (!f.read.time_column.empty()) c.read.time_column = f.read.time_column;
  if (a.channels->count()) c.analyze.channels = f.analyze.channels;
  if (a.input->count()) c.identify.input_channel = f.identify.input_channel;
  if (a.output->count()) c.identify.output_channel = f.identify.output_channel;
  if (a.order->count()) c.identify.order = f.identify.order;
  if (a.delay->count()) c.identify.estimate_delay = f.identify.estimate_delay;
  if (a.min_snr->count()) c.identify.frf.min_snr_db = f.identify.frf.min_snr_db;
  if (a.skew->count()) c.identify.frf.skew_s = f.identify.frf.skew_s;
  if (a.f0->count()) c.analyze.lock.f0_hz = c.identify.lock.f0_hz = f.analyze.lock.f0_hz;
  if (a.f0_hint->count()) c.analyze.lock.f0_hint_hz = c.identify.lock.f0_hint_hz = f.analyze.lock.f0_hint_hz;
  if (a.harmonics->count()) c.analyze.lock.max_harmonic = c.identify.lock.max_harmonic = f.analyze.lock.max_harmonic;
  if (a.plots_option->count()) c.plots = batch::parse_plot_selection(a.plots, "--plots");
  if (!c.identify.order.empty() && c.identify.order != "auto")
    ident::parse_model_order(c.identify.order, "--order");
  batch::revalidate_limits(c);  // the flags may have changed the mode or the order
  for (const auto& [field, value] : a.who) c.identity.command_values[field] = value;
  return c;
}


// The options that set how files are chosen and analysed (everything a shard records as its
// settings words, batch/shard.hpp); the run's own options (inputs, --report, --config, --jobs,
// --shard, --run-id, --quiet, --timing) are declared by add_batch.
void add_setting_options(CLI::App& app, BatchArgs& a) {
  const batch::BatchConfig defaults;
  a.patterns = app.add_option("--pattern", a.flags.files.patterns,
                              "file-name glob, repeatable (default: known capture extensions)")
                   ->type_name("GLOB");
  a.recursive = app.add_flag("--recursive,-r", a.flags.files.recursive, "descend into sub-folders");
  a.mode_option = app.add_option("--mode", a.mode, "per-file analysis: analyze or frf")
                      ->default_str(batch::mode_name(defaults.mode))
                      ->type_name("MODE");
  a.channels = app.add_option("--channel", a.flags.analyze.channels,
                              "analyze: channel to analyse, a name or #N (0-based position), repeatable (default: all)")
                   ->type_name("CH");
  a.input = app.add_option("--input", a.flags.identify.input_channel, "frf: DUT input channel")
                ->capture_default_str()
                ->type_name("CH");
  a.output = app.add_option("--output", a.flags.identify.output_channel, "frf: DUT output channel (default: #1)")
                 ->type_name("CH");
  a.order = app.add_option("--order", a.flags.identify.order, "frf: model order M/N or auto (default: no model)")
                ->type_name("M/N");
  a.delay = app.add_flag("--delay", a.flags.identify.estimate_delay, "frf: estimate the dead time");
  a.min_snr = app.add_option("--min-snr", a.flags.identify.frf.min_snr_db,
                             "frf: input SNR for a harmonic to count as excited")
                  ->capture_default_str()
                  ->type_name("DB");
  a.skew = add_duration_option(app, "--skew", a.flags.identify.frf.skew_s,
                               "frf: output path delay to remove in seconds, e.g. 12ns");
  const FundamentalOptions fundamental = add_fundamental_options(app, a.flags.analyze.lock);
  a.f0 = fundamental.f0;
  a.f0_hint = fundamental.f0_hint;
  a.harmonics = fundamental.harmonics;
  a.plots_option = app.add_option("--plots", a.plots, "plots in report.html: all, failed or none")
                       ->default_str(batch::plot_selection_name(defaults.plots))
                       ->type_name("WHICH");
  add_capture_options(app, a.flags.read);
  // Who and what the captures are: settings like the others, so every shard of a run records
  // them and the gather rebuilds the same identity.
  for (const auto& field : store::identity_fields())
    app.add_option("--" + field, a.who[field], "the captures' " + field + " (overrides [identity])")
        ->type_name("TEXT");
}

// Options that say how and where this process runs, not what the run measures: left out of the
// settings a shard records (a shard may record in a database the others do not name).
constexpr const char* kRunOptions[] = {"--report", "--config", "--jobs",   "--shard", "--run-id",
                                       "--quiet",  "--timing", "--help",   "--db"};

// The setting options as given, in the parser's order: each value as `--name VALUE`, each
// flag as `--name` (a flag's only value here is its presence). add_setting_options parses them
// back into the same settings.
std::vector<std::string> setting_words(const CLI::App& app) {
  std::vector<std::string> words;
  for (const CLI::Option* opt : app.get_options()) {
    if (opt->count() == 0 || opt->get_lnames().empty()) continue;
    const std::string name = "--" + opt->get_lnames().front();
    if (std::find(std::begin(kRunOptions), std::end(kRunOptions), name) != std::end(kRunOptions)) continue;
    if (opt->get_items_expected_max() == 0) {
      for (std::size_t i = 0; i < opt->count(); ++i) words.push_back(name);
      continue;
    }
    for (const auto& value : opt->results()) {
      words.push_back(name);
      words.push_back(value);
    }
  }
  return words;
}

/// What the run reads and writes and how it is spread: the folders, the report, the config
/// file, the jobs and the shard of a scaled-out run.
void add_batch_run_options(CLI::App& app, BatchArgs& a) {
  app.add_option("DIR", a.run.inputs, "folders of captures (or single capture files)")
      ->required()
      ->type_name("DIR");
  app.add_option("--report", a.run.report_dir, "folder for summary.csv, summary.json, files/*.json, report.html")
      ->required()
      ->type_name("OUTDIR");
  app.add_option("--config", a.config_path, "TOML file with the settings and the limits (docs/batch-config.md)")
      ->type_name("FILE");
  app.add_option("--jobs,-j", a.run.jobs, "files analysed in parallel (0 = hardware threads)")
      ->capture_default_str()
      ->type_name("N");
  app.add_option("--shard", a.shard,
                 "take only shard K of N of the captures and record it for `periodfit gather` "
                 "(docs/scale-out.md)")
      ->type_name("K/N");
  app.add_option("--run-id", a.run.run_id,
                 "with --shard: the id the shards of one run share (default: derived from the version, "
                 "settings, inputs and N)")
      ->type_name("ID");
}

}  // namespace

batch::BatchConfig rebuild_batch_config(const batch::SettingsRecord& record) {
  BatchArgs a;
  CLI::App app{"batch settings", "batch"};
  add_setting_options(app, a);
  std::vector<std::string> words(record.settings_words.rbegin(), record.settings_words.rend());  // CLI11 takes them reversed
  try {
    app.parse(words);
  } catch (const CLI::ParseError& e) {
    throw InputError("shard.json", 0, 0, "its recorded settings do not parse: " + std::string(e.what()));
  }
  a.config_path = record.config_source;
  a.config_text = record.config_text;
  return settings(a);
}

Runner add_batch(CLI::App& app) {
  auto args = std::make_shared<BatchArgs>();
  BatchArgs& a = *args;
  add_batch_run_options(app, a);
  add_setting_options(app, a);
  app.add_flag("--quiet,-q", a.quiet, "no progress and no per-file table; only the closing line");
  app.add_flag("--timing", a.timing, "print throughput and per-file overhead on stderr");
  a.db_option = app.add_option("--db", a.database,
                               "record the run in a results database: a SQLite file or a postgresql:// URL; "
                               "alone: results.sqlite in the report folder (docs/results-db.md)")
                    ->expected(0, 1)
                    ->type_name("[TARGET]");

  const CLI::App* parsed = &app;
  return [args, parsed]() -> int {
    BatchArgs& b = *args;
    for (auto it = b.who.begin(); it != b.who.end();) it = it->second.empty() ? b.who.erase(it) : std::next(it);
    if (!b.config_path.empty())
      b.config_text = io::read_file(b.config_path, io::kMaxTextFileBytes);
    b.run.config = settings(b);
    if (b.db_option->count())
      b.run.database = b.database.empty() || b.database.front().empty() ? batch::kReportDatabase : b.database.front();
    if (!b.shard.empty()) {
      b.run.shard = batch::parse_shard(b.shard);
      b.run.settings = {b.config_path, b.config_text, setting_words(*parsed)};
    } else if (!b.run.run_id.empty()) {
      throw OptionError("--run-id", b.run.run_id, "only with --shard");
    }
    if (!b.quiet && ::isatty(STDERR_FILENO)) b.run.progress = show_progress;
    const batch::BatchResult r = batch::run_batch(b.run);
    std::string out;
    if (!b.quiet) {
      Table table({{"file", Table::Align::left},
                           {"status", Table::Align::left},
                           {"flags", Table::Align::left},
                           {"why not PASS (value, 95 % interval, allowed range) / message",
                            Table::Align::left}});
      for (const auto& f : r.files) {
        std::string flags;
        for (const auto& flag : f.flags) flags += (flags.empty() ? "" : ", ") + flag;
        table.add_row({f.path, report::status_text(f.status), flags.empty() ? "-" : flags,
                       batch::file_reason(f, b.run.config)});
      }
      out += table.render();
      out += "report: " + r.report_html + "\n";
    }
    out += batch::batch_totals_line(r) + "\n";
    std::string timing_line;
    if (b.timing && !r.files.empty()) {
      // Overhead: wall time per file beyond its reading and analysis (listing, thread hand-off,
      // limits, plots, JSON, report), from the run's wall time and the analysis time per worker.
      const double files = static_cast<double>(r.files.size());
      const double overhead = (r.elapsed_s - r.analysis_s / r.jobs) / files;
      const std::string line = "timing: " + std::to_string(r.files.size()) + " files in " +
                               format_fixed(r.elapsed_s, 2) + " s with " + std::to_string(r.jobs) +
                               " jobs (" + format_fixed(files / r.elapsed_s, 2) + " files/s); analysis " +
                               format_fixed(r.analysis_s / files * 1e3, 1) + " ms/file; overhead " +
                               format_fixed(overhead * 1e3, 1) + " ms/file\n";
      timing_line = line;
    }
    // Checked: a table that did not arrive is exit 2 with the reason, although the report
    // folder is complete by now (docs/robustness.md, issue 11 class 3).
    if (!r.database.empty() && r.database_error.empty())
      out += "recorded in " + r.database + ": " + std::to_string(r.recorded_new) + " new, " +
             std::to_string(r.recorded_known) + " already recorded\n";
    io::write_stdout(out);
    std::fputs(timing_line.c_str(), stderr);
    // The report folder is complete; the database is missing results: one line, exit 2, and
    // the way to catch up (docs/results-db.md, "When the database is down").
    if (!r.database_error.empty())
      throw store::DatabaseError(r.database, "not recorded (" + r.database_error +
                                                 "); the report folder is complete: import it later with "
                                                 "`periodfit import " + r.report_dir + " --db TARGET`");
    return to_int(batch::batch_exit_code(r));
  };
}

}  // namespace periodfit::cli
