#pragma once
/// Recording runs and their captures in the results database (docs/results-db.md).
///
/// Nothing lost, nothing doubled:
/// - A run row is written first with status `incomplete`; finish() sets `complete` and the end
///   time. A run killed at any moment (SIGKILL included) stays `incomplete`.
/// - Each capture is one transaction: its capture row, metadata, every measured result, every
///   limit verdict and every flag commit together or not at all.
/// - A capture's identity is SHA-256(tool version, config hash, capture content hash); it is
///   UNIQUE in the schema and inserted with ON CONFLICT DO NOTHING, so re-running the same
///   captures under the same config and version adds no rows but a run_capture link (the run
///   saw it), whichever of several concurrent writers gets there first.
///
/// The capture's content comes from the per-file JSON of a batch (docs/batch-output.md), the
/// same document `import` reads from a finished report folder, so a live run and a later import
/// store the same rows.
///
/// Usage:
///   RunRecording rec("results.sqlite", info);        // never throws; rec.error() says why not
///   rec.record({path, digest, per_file_json, utc_now_text()});   // any thread
///   rec.finish();
///   if (!rec.error().empty()) …  // the database is missing results: say so, exit non-zero
#include <cstdint>
#include <memory>
#include <mutex>
#include <nlohmann/json.hpp>
#include <optional>
#include <string>

#include "store/content_hash.hpp"
#include "store/database.hpp"

namespace periodfit::store {

struct RunInfo {
  std::string tool_version = PERIODFIT_VERSION;
  std::string origin = "batch";     ///< what wrote the run: batch, analyze, frf, import
  std::string mode;                 ///< analyze or frf
  std::string config_source;        ///< the config file's path ("" = none)
  std::string config_text;          ///< its text ("" = settings from the command line only)
  std::string host;                 ///< "" = this machine's host name
  std::string station, operator_name;
  std::string report_dir;
  std::int64_t files_total = 0;
  /// A shard of a sharded batch (batch --shard K/N): the run id all its shards share, and K, N.
  /// "" and 0 for an unsharded run.
  std::string batch_run_id;
  int shard_index = 0, shard_count = 0;
};

/// SHA-256 of the config text: the config part of a capture's identity.
std::string config_hash(const RunInfo& info);

struct CaptureRecord {
  std::string path;
  /// The capture's content hash and size; nullopt = from the document's "capture" object, and
  /// when that is null too (an unreadable capture) the identity uses the per-file JSON's hash.
  std::optional<FileDigest> digest;
  nlohmann::ordered_json document;  ///< the per-file JSON
  std::string tested_at;            ///< ISO 8601 UTC
};

/// One run's connection to the database. Throws DatabaseError from every call.
class Recorder {
 public:
  /// Opens `target`, migrates its schema, writes the run row (status incomplete).
  Recorder(const std::string& target, RunInfo info);
  /// Records one capture in one transaction; true when new, false when its identity was
  /// already recorded (then only the run_capture link is added). Thread-safe.
  bool record(const CaptureRecord& capture);
  /// Marks the run complete with its end time and counts.
  void finish();
  std::int64_t run_id() const { return run_id_; }
  std::int64_t added() const { return added_; }
  std::int64_t known() const { return known_; }
  const std::string& target() const { return db_->target(); }

 private:
  std::unique_ptr<Connection> db_;
  RunInfo info_;
  std::string config_hash_;
  std::int64_t run_id_ = 0;
  std::int64_t added_ = 0, known_ = 0;
  std::mutex mutex_;
};

/// A Recorder for a batch: never throws. The first database error stops recording (the batch
/// goes on and its report folder stays complete) and is kept in error().
class RunRecording {
 public:
  RunRecording(const std::string& target, RunInfo info) noexcept;
  void record(const CaptureRecord& capture) noexcept;
  void finish() noexcept;
  /// "" when everything was recorded; else one line saying what failed and that the report
  /// folder can be imported later.
  std::string error() const;
  std::int64_t added() const;
  std::int64_t known() const;

 private:
  std::unique_ptr<Recorder> recorder_;
  std::string target_;
  std::string error_;
  mutable std::mutex mutex_;
};

}  // namespace periodfit::store
