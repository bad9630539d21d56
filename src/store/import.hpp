#pragma once
/// Importing a finished batch report folder into a results database: the way to catch up after
/// the database was down during a run, and to backfill history from folders of earlier runs.
/// Reads summary.json and each file's per-file JSON (docs/batch-output.md), and records them
/// as a run with origin `import`, through the same Recorder as a live run, so the rows are the
/// same and a capture already recorded (same version, config and content) is not doubled.
///
/// The config text is read from the path summary.json names, when it is still there; without
/// it the captures are recorded under the hash of an empty config, which differs from a live
/// run's, so import a folder before changing or moving its config. A capture's time is the
/// modification time of its per-file JSON (written when the file was analysed).
#include <cstdint>
#include <string>

namespace periodfit::store {

struct ImportResult {
  std::int64_t files = 0;   ///< per-file documents read
  std::int64_t added = 0;   ///< captures new to the database
  std::int64_t known = 0;   ///< captures it already held
  bool config_found = false;
};

/// Throws InputError for a folder that is not a periodfit report folder (no or malformed
/// summary.json, a missing per-file JSON), IoError when a file cannot be read, DatabaseError.
/// Nothing is recorded for a folder that fails its checks: every document is read first.
ImportResult import_report_folder(const std::string& folder, const std::string& database);

}  // namespace periodfit::store
