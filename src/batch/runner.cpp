#include "batch/runner.hpp"

#include <fnmatch.h>
#include <malloc.h>

#include <algorithm>
#include <atomic>
#include <chrono>
#include <cmath>
#include <condition_variable>
#include <exception>
#include <filesystem>
#include <functional>
#include <limits>
#include <mutex>
#include <nlohmann/json.hpp>
#include <numbers>
#include <thread>

#include "batch/file_analysis.hpp"
#include "batch/report_folder.hpp"
#include "batch/shard.hpp"
#include "core/error.hpp"
#include "core/memory_budget.hpp"
#include "core/number_format.hpp"
#include "output/json_writer.hpp"
#include "io/output_file.hpp"
#include "io/scratch_file.hpp"
#include "core/safe_text.hpp"
#include "report/svg_plot.hpp"
#include "store/clock.hpp"
#include "store/recorder.hpp"

namespace periodfit::batch {

namespace fs = std::filesystem;
using json = nlohmann::ordered_json;

namespace {

// Extensions taken from folders when [files] patterns is empty (lower-case comparison).
constexpr const char* kCaptureExtensions[] = {".csv", ".txt", ".tsv", ".dat", ".wav",
                                              ".flac", ".aif", ".aiff", ".w64", ".rf64"};

bool has_capture_extension(const fs::path& p) {
  std::string ext = p.extension().string();
  std::transform(ext.begin(), ext.end(), ext.begin(),
                 [](unsigned char c) { return static_cast<char>(std::tolower(c)); });
  return std::find(std::begin(kCaptureExtensions), std::end(kCaptureExtensions), ext) !=
         std::end(kCaptureExtensions);
}

bool selected(const fs::path& p, const FileSelection& selection) {
  const std::string name = p.filename().string();
  if (!name.empty() && name[0] == '.') return false;  // hidden files and our temporaries
  if (selection.patterns.empty()) return has_capture_extension(p);
  return std::any_of(selection.patterns.begin(), selection.patterns.end(),
                     [&](const std::string& g) { return ::fnmatch(g.c_str(), name.c_str(), 0) == 0; });
}

// A file name safe on every file system, for the per-file JSON: letters, digits, . _ - only.
std::string safe_name(const std::string& path) {
  std::string name = fs::path(path).filename().string();
  for (auto& c : name)
    if (!(std::isalnum(static_cast<unsigned char>(c)) || c == '.' || c == '_' || c == '-')) c = '_';
  if (name.size() > 80) name.resize(80);
  return name;
}

std::string index_prefix(std::size_t i) {
  std::string s = std::to_string(i + 1);
  return std::string(s.size() < 4 ? 4 - s.size() : 0, '0') + s;
}

json limit_json(const Limit& l, std::size_t index) {
  json j;
  j["index"] = index + 1;
  j["result"] = l.result;
  const ResultInfo* info = find_result(l.result);
  j["unit"] = info && !info->yes_no ? std::string(info->unit) : std::string();
  json written = json::object();
  for (const auto& [field, text] : l.written) written[field] = text;
  j["written"] = std::move(written);
  j["key"] = l.key();
  j["label"] = l.label;
  j["description"] = l.describe();
  j["allowed"] = l.allowed_text();
  j["lo"] = output::json_number(l.lo);
  j["hi"] = output::json_number(l.hi);
  j["guard_band"] = l.guard_band;
  return j;
}

json number_or_null(double v) { return std::isfinite(v) ? output::json_number(v) : json(nullptr); }

bool yes_no(const Limit& l) {
  const ResultInfo* info = find_result(l.result);
  return info && info->yes_no;
}

json outcome_json(const Limit& l, const LimitOutcome& o, std::size_t index) {
  json j;
  j["index"] = index + 1;
  j["key"] = l.key();
  j["passed"] = o.passed;
  j["evaluated"] = o.evaluated;
  if (o.evaluated && yes_no(l))
    j["value"] = o.measured.value != 0;
  else
    j["value"] = o.evaluated ? output::json_number(o.measured.value) : json(nullptr);
  const bool interval = o.evaluated && !yes_no(l) && o.measured.has_interval();
  j["u"] = o.evaluated && !yes_no(l) ? number_or_null(o.measured.u) : json(nullptr);
  j["k"] = interval ? number_or_null(o.measured.k) : json(nullptr);
  j["lo95"] = interval ? output::json_number(o.measured.lo95) : json(nullptr);
  j["hi95"] = interval ? output::json_number(o.measured.hi95) : json(nullptr);
  j["min"] = yes_no(l) ? json(nullptr) : number_or_null(l.lo);
  j["max"] = yes_no(l) ? json(nullptr) : number_or_null(l.hi);
  j["allowed"] = l.allowed_text();
  j["margin"] = number_or_null(o.margin);
  j["margin_fraction"] = number_or_null(o.margin_fraction);
  j["measured"] = o.measured_text;
  j["verdict"] = o.verdict;
  return j;
}

std::string flags_text(const std::vector<std::string>& flags) {
  std::string out;
  for (const auto& f : flags) out += (out.empty() ? "" : "; ") + f;
  return out;
}

/// Everything one worker produces for one file; the section and the JSON leave memory as soon
/// as the file is done.
struct FileWork {
  FileResult result;
  report::ReportFile section;
  json document;  // the per-file JSON
};

/// What the run keeps of a file until the end: a few hundred bytes, whatever its plots weigh.
struct FileDone {
  FileResult result;
  report::ReportRow row;           ///< its line in report.html's overview
  io::ScratchFile::Span section;  ///< its rendered report.html section in the spill file
};

// The measured response a board contributes to the report's overlay: frf — |H| in dB at each
// excited harmonic's frequency (mag_db[n=K] at K·f0); analyze — the first channel's harmonic
// amplitudes in dB re 1 unit (amplitude[n=K]). Keys with a channel selector are other channels.
report::BoardResponse board_response(const MeasurementSet& m, AnalysisMode mode) {
  report::BoardResponse r;
  const std::string prefix = mode == AnalysisMode::identify ? "mag_db[n=" : "amplitude[n=";
  const Quantity* f0 = m.find("f0_hz");
  if (mode == AnalysisMode::identify && (!f0 || !std::isfinite(f0->value))) return r;
  std::vector<std::pair<double, double>> points;
  for (const auto& [key, q] : m.values()) {
    if (!key.starts_with(prefix) || key.back() != ']' || key.find(',') != std::string::npos) continue;
    const double n = std::strtod(key.c_str() + prefix.size(), nullptr);
    const double y = mode == AnalysisMode::identify ? q.value : (q.value > 0 ? 20 * std::log10(q.value) : std::numeric_limits<double>::quiet_NaN());
    if (n > 0 && std::isfinite(y)) points.emplace_back(mode == AnalysisMode::identify ? n * f0->value : n, y);
  }
  std::sort(points.begin(), points.end());
  for (const auto& [x, y] : points) {
    r.x.push_back(x);
    r.y.push_back(y);
  }
  return r;
}

// Runs the analysis of one file; a failure becomes the file's error (with the reason a
// dangling symbolic link gives), never the run's. Sets the analysis time.
FileAnalysis analyse_timed(const std::string& path, const BatchConfig& config, FileResult& result) {
  FileAnalysis analysis;
  const auto started = std::chrono::steady_clock::now();
  try {
    analysis = analyse_file(path, config);
  } catch (const Error& e) {
    result.error = e.what();
    std::error_code ec;
    if (fs::is_symlink(fs::symlink_status(path, ec)) && !fs::exists(path, ec))
      result.error += " (a symbolic link to " + fs::read_symlink(path, ec).string() + ", which does not exist)";
  } catch (const std::bad_alloc&) {
    result.error = OutOfMemoryError("analysing " + path).what();
  } catch (const std::exception& e) {
    result.error = std::string("internal error: ") + e.what();
  }
  result.analysis_s = std::chrono::duration<double>(std::chrono::steady_clock::now() - started).count();
  return analysis;
}

std::vector<std::string> render_plots(const std::vector<report::Figure>& figures, const std::string& path) {
  std::vector<std::string> plots;
  for (std::size_t k = 0; k < figures.size(); ++k) {
    report::Figure fig = figures[k];
    // Named by the path, not the position: a section's body is the same bytes whichever
    // run (a single one or a shard, batch/shard.hpp) renders it and wherever it is placed.
    fig.id = "f" + hex64(fnv1a_64(path)) + "-" + std::to_string(k + 1);
    plots.push_back(report::render_svg(fig));
  }
  return plots;
}

// Who and what the capture belongs to (store/identity.hpp); a malformed sidecar makes the
// file an ERROR row like any other unreadable input.
store::Identity resolve_file_identity(const BatchConfig& config, const std::string& path,
                                      const FileAnalysis& analysis, FileWork& w) {
  store::Identity identity;
  if (config.identity.empty()) return identity;
  try {
    identity = store::resolve_identity(config.identity, path, analysis.metadata);
  } catch (const Error& e) {
    if (w.result.error.empty()) {
      w.result.error = e.what();
      w.result.status = w.section.status = report::FileStatus::error;
      w.section.messages.push_back(w.result.error);
    }
  }
  const auto rows = identity.rows();
  w.section.metadata.insert(w.section.metadata.begin(), rows.begin(), rows.end());
  return identity;
}

// The per-file JSON after its status lines: limit outcomes, measurements, the analysis' own
// result, identity, the capture's digest and metadata (docs/batch-output.md).
void add_results_json(json& d, const FileResult& result, const BatchConfig& config, const std::string& path,
                      const FileAnalysis& analysis, const store::Identity& identity) {
  json limits = json::array();
  for (std::size_t i = 0; i < result.limits.size(); ++i)
    limits.push_back(outcome_json(config.limits[i], result.limits[i], i));
  d["limits"] = std::move(limits);
  d["measurements"] = measurements_json(analysis.measurements);
  d["result"] = analysis.result_json.is_null() ? json(nullptr) : analysis.result_json;
  json who = json::object();
  for (const auto& [field, value] : identity.rows()) who[field] = value;
  d["identity"] = std::move(who);
  // The capture's size and content hash: its identity in the results database, written here so
  // an import of this folder later identifies it exactly as a live recording would.
  json capture = nullptr;
  try {
    const store::FileDigest digest = store::sha256_file(path);
    capture = {{"size_bytes", digest.size}, {"sha256", digest.sha256}};
  } catch (const Error&) {
    // an unreadable capture is an ERROR row already; the database identifies it by its JSON
  }
  d["capture"] = std::move(capture);
  json metadata = json::array();
  for (const auto& [name, value] : analysis.metadata) metadata.push_back({{"name", name}, {"value", value}});
  d["metadata"] = std::move(metadata);
}

FileWork process(std::size_t index, const std::string& path, const BatchOptions& options) {
  const BatchConfig& config = options.config;
  FileWork w;
  w.result.path = path;
  w.result.json_file = per_file_json_name(index, path);
  w.section.path = path;
  const FileAnalysis analysis = analyse_timed(path, config, w.result);

  if (!w.result.error.empty()) {
    w.result.status = report::FileStatus::error;
    w.section.status = report::FileStatus::error;
    w.section.messages.push_back(w.result.error);
    w.section.key_results = "";
    for (const auto& key : analysis_key_names(config)) w.result.key_results.emplace_back(key, "");
  } else {
    bool all_passed = true;
    for (const auto& limit : config.limits) {
      LimitOutcome o = evaluate_limit(limit, analysis.measurements);
      all_passed = all_passed && o.passed;
      report::ReportLimit row{limit.describe(), o.measured_text, limit.allowed_text(), o.verdict,
                              !o.passed};
      if (!o.passed) {
        w.section.failing.push_back(failing_limit_text(limit, o));
      }
      w.section.limits.push_back(std::move(row));
      w.result.limits.push_back(std::move(o));
    }
    // Flags reach the verdict: a flag whose code the config lists fails the file whatever the
    // limits say, because the numbers the limits read cannot be trusted (core/flags.hpp).
    w.result.flags = analysis.flags;
    for (const auto& flag : analysis.flags) {
      const std::string code(flag_code(flag));
      w.section.flags.push_back(flag + " (" +
                                (find_flag(code) ? severity_name(find_flag(code)->severity) : "unknown") + ")");
      if (std::find(config.fail_on_flags.begin(), config.fail_on_flags.end(), code) == config.fail_on_flags.end())
        continue;
      w.result.failing_flags.push_back(flag);
      w.section.failing.insert(w.section.failing.begin() + static_cast<std::ptrdiff_t>(w.result.failing_flags.size() - 1),
                               failing_flag_text(flag));
      all_passed = false;
    }
    w.result.status = all_passed ? report::FileStatus::pass : report::FileStatus::fail;
    w.section.status = w.result.status;
    w.result.response = board_response(analysis.measurements, config.mode);
    w.result.response.passed = all_passed;
    for (const auto& k : analysis.keys) w.result.key_results.emplace_back(k.name, k.machine);
    std::string line;
    for (const auto& k : analysis.keys)
      if (!k.person.empty()) line += (line.empty() ? "" : " \xC2\xB7 ") + k.label + " " + k.person;
    w.section.key_results = line;
    w.section.results = analysis.result_rows;
    w.section.metadata = analysis.metadata;
    for (const auto& m : analysis.messages) w.section.messages.push_back(m);
    const bool plots = config.plots == PlotSelection::all ||
                       (config.plots == PlotSelection::failed && !all_passed);
    if (plots) w.section.plots = render_plots(analysis.figures, path);
  }

  const store::Identity identity = resolve_file_identity(config, path, analysis, w);

  json& d = w.document;
  d["path"] = path;
  d["status"] = report::status_text(w.result.status);
  d["error"] = w.result.error.empty() ? json(nullptr) : json(w.result.error);
  d["mode"] = mode_name(config.mode);
  d["flags"] = w.result.flags;
  d["failing_flags"] = w.result.failing_flags;
  add_results_json(d, w.result, config, path, analysis, identity);
  return w;
}

// Per limit K: its value column (named by its key, as before), then u, k, lo95, hi95, min, max
// (SI), allowed (as written), passed, verdict, margin, margin_fraction (docs/batch-output.md).
constexpr const char* kLimitColumns[] = {"u",   "k",       "lo95",    "hi95",   "min",
                                         "max", "allowed", "passed",  "verdict", "margin",
                                         "margin_fraction"};

std::string csv_number(double v) { return std::isfinite(v) ? format_shortest(v) : ""; }

std::string summary_csv(const std::vector<FileResult>& works, const BatchConfig& config) {
  std::string out = "path,status";
  for (const auto& key : analysis_key_names(config)) out += "," + csv_cell(key);
  for (std::size_t i = 0; i < config.limits.size(); ++i) {
    const std::string prefix = "limit" + std::to_string(i + 1) + ":";
    out += "," + csv_cell(prefix + config.limits[i].key());
    for (const char* column : kLimitColumns) out += "," + csv_cell(prefix + column);
  }
  out += ",flags,failing_flags,failing_limits,message\n";
  for (const FileResult& r : works) {
    out += csv_cell(r.path) + "," + report::status_text(r.status);
    for (const auto& [key, value] : r.key_results) out += "," + csv_cell(value);
    for (std::size_t i = 0; i < config.limits.size(); ++i) {
      const Limit& l = config.limits[i];
      const bool have = i < r.limits.size();
      const bool measured = have && r.limits[i].evaluated;
      const Quantity q = measured ? r.limits[i].measured : Quantity{};
      const bool interval = measured && !yes_no(l) && q.has_interval();
      if (measured && yes_no(l))
        out += std::string(",") + (q.value != 0 ? "true" : "false");
      else
        out += "," + csv_number(q.value);
      out += "," + (measured && !yes_no(l) ? csv_number(q.u) : "");
      out += "," + (interval ? csv_number(q.k) : "");
      out += "," + (interval ? csv_number(q.lo95) : "");
      out += "," + (interval ? csv_number(q.hi95) : "");
      out += "," + (yes_no(l) ? "" : csv_number(l.lo));
      out += "," + (yes_no(l) ? "" : csv_number(l.hi));
      out += "," + csv_cell(l.allowed_text());
      out += "," + (have ? std::string(r.limits[i].passed ? "true" : "false") : "");
      out += "," + (have ? csv_cell(r.limits[i].verdict) : "");
      out += "," + (have ? csv_number(r.limits[i].margin) : "");
      out += "," + (have ? csv_number(r.limits[i].margin_fraction) : "");
    }
    std::string failing;
    for (std::size_t i = 0; i < r.limits.size(); ++i)
      if (!r.limits[i].passed)
        failing += (failing.empty() ? "" : "; ") + failing_limit_text(config.limits[i], r.limits[i]);
    out += "," + csv_cell(flags_text(r.flags)) + "," + csv_cell(flags_text(r.failing_flags));
    out += "," + csv_cell(failing) + "," + csv_cell(r.error) + "\n";
  }
  return out;
}

json summary_json(const std::vector<FileResult>& works, const BatchResult& result,
                  const BatchConfig& config) {
  json j;
  j["format"] = "periodfit-batch-summary";
  j["version"] = 1;
  j["periodfit"] = PERIODFIT_VERSION;
  j["mode"] = mode_name(config.mode);
  j["config"] = config.source.empty() ? json(nullptr) : json(config.source);
  j["totals"] = {{"files", works.size()},
                 {"pass", result.passed},
                 {"fail", result.failed},
                 {"error", result.errors}};
  j["fail_on_flags"] = config.fail_on_flags;
  json limits = json::array();
  for (std::size_t i = 0; i < config.limits.size(); ++i) limits.push_back(limit_json(config.limits[i], i));
  j["limits"] = std::move(limits);
  json files = json::array();
  for (const FileResult& r : works) {
    json f;
    f["path"] = r.path;
    f["status"] = report::status_text(r.status);
    f["json"] = r.json_file;
    f["error"] = r.error.empty() ? json(nullptr) : json(r.error);
    json keys = json::object();
    for (const auto& [key, value] : r.key_results) keys[key] = value;
    f["key_results"] = std::move(keys);
    json failing = json::array();
    json outcomes = json::array();
    for (std::size_t i = 0; i < r.limits.size(); ++i) {
      outcomes.push_back(outcome_json(config.limits[i], r.limits[i], i));
      if (!r.limits[i].passed) failing.push_back(outcomes.back());
    }
    f["limits"] = std::move(outcomes);
    f["failing"] = std::move(failing);
    f["flags"] = r.flags;
    f["failing_flags"] = r.failing_flags;
    files.push_back(std::move(f));
  }
  j["files"] = std::move(files);
  return j;
}

// Every board against every limit for report.html (report/cross_board.hpp): values in the unit
// each limit was written in, and the limits that apply to the response overlay.
report::CrossBoardView cross_board_view(const std::vector<FileResult>& files, const BatchConfig& config) {
  report::CrossBoardView v;
  for (const auto& l : config.limits) {
    report::CrossBoardLimit c;
    c.name = l.describe();
    c.allowed = l.allowed_text();
    c.yes_no = yes_no(l);
    const ResultInfo* info = find_result(l.result);
    c.unit = !l.display_unit.empty() ? l.display_unit : (info && !c.yes_no ? std::string(info->unit) : std::string());
    if (!c.yes_no) {
      c.lo = std::isfinite(l.lo) ? l.to_display(l.lo) : l.lo;
      c.hi = std::isfinite(l.hi) ? l.to_display(l.hi) : l.hi;
      if (c.lo > c.hi) std::swap(c.lo, c.hi);
    }
    v.limits.push_back(std::move(c));
    // Limits on the response itself are drawn on the overlay in its own units (dB).
    if (config.mode == AnalysisMode::identify && l.result == "mag_db" && l.freq_hz)
      v.response_limits.push_back({*l.freq_hz, l.lo, l.hi});
    if (config.mode == AnalysisMode::analyze && l.result == "amplitude" && l.harmonic && l.channel.empty()) {
      const auto db = [](double a) { return a > 0 && std::isfinite(a) ? 20 * std::log10(a) : -std::numeric_limits<double>::infinity(); };
      v.response_limits.push_back({static_cast<double>(*l.harmonic), db(l.lo), std::isfinite(l.hi) ? db(l.hi) : std::numeric_limits<double>::infinity()});
    }
  }
  for (const FileResult& f : files) {
    std::vector<report::CrossBoardCell> row;
    for (std::size_t i = 0; i < config.limits.size(); ++i) {
      report::CrossBoardCell c;
      if (i < f.limits.size()) {
        const LimitOutcome& o = f.limits[i];
        c.evaluated = o.evaluated;
        c.passed = o.passed;
        c.value = yes_no(config.limits[i]) ? o.measured.value : config.limits[i].to_display(o.measured.value);
        c.margin_fraction = o.margin_fraction;
        c.verdict = o.verdict;
      }
      row.push_back(std::move(c));
    }
    v.cells.push_back(std::move(row));
    v.responses.push_back(f.response);
  }
  if (config.mode == AnalysisMode::identify) {
    v.x_quantity = "frequency";
    v.x_unit = "Hz";
    v.x_log = true;
    v.y_quantity = "|H|";
    v.y_unit = "dB";
  } else {
    v.x_quantity = "harmonic";
    v.y_quantity = "amplitude";
    v.y_unit = "dB re 1 unit";
  }
  return v;
}

// A shard's share of the captures (batch/shard.hpp); `listing` gets the whole list with each
// capture's shard, so the gather can name the captures of a shard that never ran.
std::vector<std::string> shard_share(const std::vector<std::string>& paths, const BatchOptions& options,
                                     std::vector<std::pair<std::string, int>>& listing) {
  std::vector<std::string> held;
  listing.reserve(paths.size());
  for (const auto& p : paths) {
    const int k = shard_of(partition_key(p, options.inputs), options.shard.count);
    listing.emplace_back(p, k);
    if (k == options.shard.index) held.push_back(p);
  }
  return held;
}

// The results database of the run, or none: one transaction per capture as each file is done,
// so a run killed at any moment leaves whole captures; a database that fails stops recording,
// never the run (store/recorder.hpp).
std::unique_ptr<store::RunRecording> open_recording(const BatchOptions& options, const fs::path& staging,
                                                    std::size_t files, BatchResult& result) {
  std::string database = options.database.empty() ? options.config.database : options.database;
  const bool in_report = database == kReportDatabase;
  if (in_report) database = (staging / "results.sqlite").string();
  if (database.empty()) return nullptr;
  store::RunInfo info;
  info.mode = mode_name(options.config.mode);
  info.config_source = options.config.source;
  info.config_text = options.config.text;
  // The command line's value first, then the config's (store/identity.hpp).
  const auto& identity = options.config.identity;
  const auto value_of = [&identity](const std::string& field) -> std::string {
    if (identity.command_values.count(field)) return identity.command_values.at(field);
    return identity.config_values.count(field) ? identity.config_values.at(field) : "";
  };
  info.station = value_of("station");
  info.operator_name = value_of("operator");
  info.report_dir = fs::absolute(options.report_dir).lexically_normal().string();
  info.files_total = static_cast<std::int64_t>(files);
  if (options.shard.active()) {
    info.batch_run_id = shard_run_id(options);
    info.shard_index = options.shard.index;
    info.shard_count = options.shard.count;
  }
  auto recording = std::make_unique<store::RunRecording>(database, std::move(info));
  result.database = in_report ? (fs::path(options.report_dir) / "results.sqlite").string()
                              : store::redact_target(database);
  return recording;
}

// Runs step(0 … count−1) on `jobs` threads, each taking the next index, and reports progress
// every options.progress_interval_s. The first exception a step throws (an output that could
// not be written) stops the run: no new file starts, and it is rethrown once the threads end.
void run_pool(std::size_t count, std::size_t jobs, const BatchOptions& options,
              const std::function<double()>& elapsed, const std::function<void(std::size_t)>& step) {
  std::atomic<std::size_t> next{0};
  std::size_t done = 0;
  std::mutex mutex;
  std::condition_variable changed;
  std::exception_ptr fatal;  // an output that could not be written stops the run
  const auto worker = [&] {
    for (;;) {
      const std::size_t i = next.fetch_add(1);
      if (i >= count) return;
      {
        std::lock_guard<std::mutex> lock(mutex);
        if (fatal) return;
      }
      try {
        step(i);
        // The file's transient buffers (capture, grids, spectra) were freed between the small
        // results this run keeps; hand those pages back so the peak RSS stays that of one file
        // per worker whatever the number of files (glibc keeps them otherwise).
        ::malloc_trim(0);
      } catch (...) {
        std::lock_guard<std::mutex> lock(mutex);
        if (!fatal) fatal = std::current_exception();
      }
      {
        std::lock_guard<std::mutex> lock(mutex);
        ++done;
      }
      changed.notify_all();
    }
  };
  std::vector<std::thread> threads;
  threads.reserve(jobs);
  for (std::size_t t = 0; t < jobs; ++t) threads.emplace_back(worker);
  {
    std::unique_lock<std::mutex> lock(mutex);
    const auto interval = std::chrono::duration<double>(options.progress_interval_s);
    while (done < count && !fatal) {
      changed.wait_for(lock, interval);
      if (options.progress) {
        const Progress p{done, count, elapsed()};
        lock.unlock();
        options.progress(p);
        lock.lock();
      }
    }
  }
  for (auto& t : threads) t.join();
  if (fatal) std::rethrow_exception(fatal);
}

}  // namespace

void BatchOptions::validate() const {
  if (inputs.empty()) throw OptionError("inputs", "(none)", "give at least one folder or capture file");
  if (report_dir.empty()) throw OptionError("report", "\"\"", "a report folder is required");
  if (jobs < 0) throw OptionError("jobs", std::to_string(jobs), "must be >= 0 (0 = hardware threads)");
  if (!(progress_interval_s > 0))
    throw OptionError("progress_interval_s", format_shortest(progress_interval_s), "must be > 0");
  if (config.mode == AnalysisMode::identify)
    config.identify.validate();
  else
    config.analyze.validate();
}

std::vector<std::string> find_captures(const std::vector<std::string>& inputs,
                                       const FileSelection& selection, const std::string& report_dir) {
  std::vector<std::string> found;
  // The report folder of an earlier run (when it lies inside an input folder) is never read as
  // captures: its summary.csv is not a capture. periodfit's other entries beside it (the
  // staging folder, the lock) are hidden names, skipped like every hidden entry.
  std::error_code report_ec;
  const fs::path report = report_dir.empty() ? fs::path() : fs::canonical(report_dir, report_ec);
  const auto is_report = [&](const fs::path& folder) {
    std::error_code e2;
    return !report.empty() && !report_ec && fs::equivalent(folder, report, e2);
  };
  for (const auto& input : inputs) {
    std::error_code ec;
    const fs::file_status st = fs::status(input, ec);
    if (ec || !fs::exists(st)) throw IoError(input, "cannot open", ec ? ec.value() : ENOENT);
    if (!fs::is_directory(st)) {
      found.push_back(input);
      continue;
    }
    if (is_report(input)) continue;
    const auto take = [&](const fs::directory_entry& e) {
      std::error_code e2;
      if (!selected(e.path(), selection)) return;
      // A dangling symbolic link that matches is taken too, so it becomes an ERROR row that
      // says so, instead of a capture that silently goes missing from the run.
      if (e.is_regular_file(e2) || (e.is_symlink(e2) && !fs::exists(e.path(), e2)))
        found.push_back(e.path().string());
    };
    if (selection.recursive) {
      for (auto it = fs::recursive_directory_iterator(input, fs::directory_options::skip_permission_denied, ec);
           !ec && it != fs::recursive_directory_iterator(); it.increment(ec)) {
        std::error_code e2;
        if (it->is_directory(e2) &&
            (it->path().filename().string().starts_with(".") || is_report(it->path()))) {
          it.disable_recursion_pending();
          continue;
        }
        take(*it);
      }
    } else {
      for (auto it = fs::directory_iterator(input, ec); !ec && it != fs::directory_iterator();
           it.increment(ec))
        take(*it);
    }
    if (ec) throw IoError(input, "cannot list", ec.value());
  }
  std::sort(found.begin(), found.end());
  found.erase(std::unique(found.begin(), found.end()), found.end());
  if (found.empty()) {
    std::string what = "no capture files found in";
    for (const auto& i : inputs) what += " " + i;
    what += selection.patterns.empty() ? " (extensions .csv .txt .tsv .dat .wav .flac .aif .aiff .w64 .rf64)"
                                       : " matching the patterns";
    throw InputError("", 0, 0, what);
  }
  return found;
}

BatchResult run_batch(const BatchOptions& options) {
  options.validate();
  const auto start = std::chrono::steady_clock::now();
  const auto elapsed = [&] {
    return std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count();
  };
  std::vector<std::string> paths = find_captures(options.inputs, options.config.files, options.report_dir);
  // A shard takes its share of the whole list (batch/shard.hpp) and records the whole list, so
  // the gather can name the captures of a shard that never ran.
  std::vector<std::pair<std::string, int>> listing;
  if (options.shard.active()) paths = shard_share(paths, options, listing);

  // Everything is written into a staging folder that replaces the report folder whole at the
  // end (batch/report_folder.hpp); an error or an interrupt before then leaves it untouched.
  ReportFolder folder(options.report_dir);
  const fs::path staging(folder.staging());

  BatchResult result;
  result.report_dir = options.report_dir;
  const unsigned hardware = std::max(1u, std::thread::hardware_concurrency());
  const std::size_t jobs = std::min<std::size_t>(
      paths.size(), options.jobs > 0 ? static_cast<std::size_t>(options.jobs) : hardware);  // 0: an empty shard
  result.jobs = static_cast<int>(jobs);

  // Each worker takes the next index; outcomes land in their slot, so order never depends on
  // timing. As soon as a file is done its JSON is written and its report section (text and
  // plots, tens of kB) is rendered into the spill file, so memory does not grow with the
  // number of files; report.html is assembled from the spill file in path order at the end.
  io::ScratchFile sections(folder.staging());
  std::vector<FileDone> works(paths.size());

  std::unique_ptr<store::RunRecording> recording = open_recording(options, staging, paths.size(), result);
  run_pool(paths.size(), jobs, options, elapsed, [&](std::size_t i) {
    FileWork w = process(i, paths[i], options);
    io::write_file_atomic((staging / w.result.json_file).string(), output::json_text(w.document));
    if (recording) recording->record({paths[i], std::nullopt, std::move(w.document), store::utc_now_text()});
    FileDone& kept = works[i];
    kept.section = sections.append(report::render_section_body(w.section));
    kept.row = report::report_row(w.section);
    kept.result = std::move(w.result);
  });
  if (options.progress) options.progress(Progress{paths.size(), paths.size(), elapsed()});

  std::vector<FileResult> files;
  std::vector<report::ReportRow> rows;
  files.reserve(works.size());
  rows.reserve(works.size());
  for (auto& w : works) {
    files.push_back(std::move(w.result));
    rows.push_back(std::move(w.row));
  }
  const auto body = [&](std::size_t i, const report::HtmlSink& sink) { sections.copy(works[i].section, sink); };
  write_report_outputs(folder.staging(), options.config, files, rows, body);
  if (options.shard.active()) write_shard_record(folder.staging(), options, listing, files, rows, body);
  if (recording) {
    recording->finish();
    result.recorded_new = recording->added();
    result.recorded_known = recording->known();
    result.database_error = recording->error();
    recording.reset();  // closes the database (SQLite folds its WAL back) before the folder is published
  }
  folder.publish();
  const fs::path dir(options.report_dir);
  result.summary_csv = (dir / "summary.csv").string();
  result.summary_json = (dir / "summary.json").string();
  result.report_html = (dir / "report.html").string();

  count_statuses(files, result);
  result.files = std::move(files);
  for (const auto& f : result.files) result.analysis_s += f.analysis_s;
  result.elapsed_s = elapsed();
  return result;
}

std::string per_file_json_name(std::size_t index, const std::string& path) {
  return "files/" + index_prefix(index) + "-" + safe_name(path) + ".json";
}

void count_statuses(const std::vector<FileResult>& files, BatchResult& result) {
  result.passed = result.failed = result.errors = 0;
  for (const auto& f : files) {
    switch (f.status) {
      case report::FileStatus::pass: ++result.passed; break;
      case report::FileStatus::fail: ++result.failed; break;
      case report::FileStatus::error: ++result.errors; break;
    }
  }
}

void write_report_outputs(const std::string& folder, const BatchConfig& config,
                          const std::vector<FileResult>& files, const std::vector<report::ReportRow>& rows,
                          const std::function<void(std::size_t, const report::HtmlSink&)>& section_body) {
  const fs::path staging(folder);
  BatchResult totals;
  count_statuses(files, totals);
  io::write_file_atomic((staging / "summary.csv").string(), summary_csv(files, config));
  io::write_file_atomic((staging / "summary.json").string(), output::json_text(summary_json(files, totals, config)));

  report::ReportOverview overview;
  overview.title = config.title;
  overview.settings.emplace_back("mode", mode_name(config.mode));
  if (!config.source.empty()) overview.settings.emplace_back("config", config.source);
  for (const auto& [key, value] : analysis_settings_rows(config)) overview.settings.emplace_back(key, value);
  overview.settings.emplace_back("limits", std::to_string(config.limits.size()));
  overview.settings.emplace_back("plots", plot_selection_name(config.plots));
  overview.rows = rows;
  overview.boards = cross_board_view(files, config);
  io::AtomicFile page((staging / "report.html").string());
  report::write_html_report(
      overview,
      [&](std::size_t i, const report::HtmlSink& sink) {
        sink(report::render_section_heading(files[i].path, files[i].status, i + 1));
        section_body(i, sink);
      },
      [&](std::string_view bytes) { page.write(bytes); });
  page.commit();
}

std::string failing_limit_text(const Limit& l, const LimitOutcome& o) {
  return l.describe() + " = " + o.measured_text + ", allowed " + l.allowed_text();
}

std::string failing_flag_text(const std::string& flag) {
  const FlagInfo* info = find_flag(flag_code(flag));
  return "flag " + flag + " (" + (info ? severity_name(info->severity) : "unknown") + ")";
}

std::string file_reason(const FileResult& file, const BatchConfig& config) {
  if (!file.error.empty()) return file.error;
  std::vector<std::string> reasons;
  for (const auto& flag : file.failing_flags) reasons.push_back(failing_flag_text(flag));
  for (std::size_t i = 0; i < file.limits.size() && i < config.limits.size(); ++i)
    if (!file.limits[i].passed) reasons.push_back(failing_limit_text(config.limits[i], file.limits[i]));
  if (reasons.empty()) return "";
  return reasons.front() + (reasons.size() > 1 ? " (+" + std::to_string(reasons.size() - 1) + " more)" : "");
}

ExitCode batch_exit_code(const BatchResult& result) {
  if (result.errors > 0) return ExitCode::error;
  if (result.failed > 0) return ExitCode::fail;
  return ExitCode::ok;
}

std::string batch_totals_line(const BatchResult& result) {
  return std::to_string(result.passed) + " pass, " + std::to_string(result.failed) + " fail, " +
         std::to_string(result.errors) + " error";
}

}  // namespace periodfit::batch
