#pragma once
/// Sharded batch runs: N independent processes (a job array on a cluster, a local parallel
/// runner, N hosts) each take their share of one capture list with no coordination, and
/// gather_shards combines their report folders into the report folder one process would have
/// written (docs/scale-out.md).
///
/// The partition: capture c belongs to shard  K = (FNV-1a-64(key(c)) mod N) + 1, where key(c)
/// is c's path relative to the input folder it was found in (a file named directly: its file
/// name), as UTF-8 bytes with '/' separators. FNV-1a 64 (Fowler, Noll, Vo; offset basis
/// 14695981039346656037, prime 1099511628211, as in the IETF draft "The FNV Non-Cryptographic
/// Hash Algorithm") depends only on the key, so a capture added to the archive never moves
/// another one to a different shard, and the partition does not depend on where the archive is
/// mounted. It is not a cryptographic hash; nothing here needs one (a collision only puts two
/// captures into the same shard).
///
/// Each shard's report folder is an ordinary report folder of the captures it held (summary.csv,
/// summary.json, files/, report.html) plus two files only gather_shards reads:
///   shard.json          the run identity (tool version, config hash, run id, inputs, K/N), the
///                       whole capture list the shard saw with each capture's shard, and one
///                       record per capture it held (the summary row, the overview row, where
///                       its per-file JSON and report section are) — docs/scale-out.md
///   shard-sections.html the report.html sections of its captures without their headings
/// The gathered folder's outputs are written by the same writers as a single run's
/// (write_report_outputs), from these records, so they are byte-identical to the single run
/// over the same captures; it also holds gather.json (the only file a single run has not).
///
/// Usage:
///   BatchOptions o = …; o.shard = parse_shard("2/8"); o.settings = …;  run_batch(o);   // ×8
///   GatherOptions g; g.shards = {"s1", …, "s8"}; g.report_dir = "all";
///   g.rebuild_config = [](const SettingsRecord& s) { return …; };
///   const GatherResult r = gather_shards(g);   // r.complete, r.problems
#include <cstdint>
#include <functional>
#include <string>
#include <string_view>
#include <vector>

#include "batch/runner.hpp"

namespace periodfit::batch {

/// FNV-1a, 64 bit, of `bytes` (see the header).
std::uint64_t fnv1a_64(std::string_view bytes);

/// 16 lower-case hex digits.
std::string hex64(std::uint64_t value);

/// Parses "K/N" (1 ≤ K ≤ N ≤ 100000); throws OptionError naming `field` otherwise.
ShardSpec parse_shard(std::string_view text, std::string_view field = "--shard");

/// The shard (1 … count) of the capture with partition key `key`.
int shard_of(std::string_view key, int count);

/// The partition key of `path` (as find_captures returned it) among `inputs`: its path relative
/// to the input folder it was found under (the longest such folder), else its file name.
std::string partition_key(const std::string& path, const std::vector<std::string>& inputs);

/// The name of shard K/N's report folder in the ready recipes (tools/shards-*.sh): "shard-K-of-N".
std::string shard_folder_name(const ShardSpec& shard);

/// Writes shard-sections.html (the section bodies of `files`, through `section_body`) and
/// shard.json into `folder` for a sharded run_batch; `listing` is every capture the shard saw
/// with its shard number, `files`/`rows` the captures it held, in path order.
void write_shard_record(const std::string& folder, const BatchOptions& options,
                        const std::vector<std::pair<std::string, int>>& listing,
                        const std::vector<FileResult>& files, const std::vector<report::ReportRow>& rows,
                        const std::function<void(std::size_t, const report::HtmlSink&)>& section_body);

struct GatherOptions {
  std::vector<std::string> shards;  ///< shard report folders, in any order
  std::string report_dir;           ///< the gathered report folder (replaced whole, as a batch's)
  /// Rebuilds the run's BatchConfig from what the shards recorded (the CLI parses the recorded
  /// settings words and config text as batch does); required.
  std::function<BatchConfig(const SettingsRecord&)> rebuild_config;
  void validate() const;
};

struct GatherResult {
  /// false: some shard is missing, unfinished, out of date or given twice with different
  /// results; `problems` says which and which captures it holds, and nothing was written.
  bool complete = false;
  std::vector<std::string> problems;  ///< one line each, for people
  std::vector<std::string> warnings;  ///< e.g. a shard given twice with identical results
  BatchResult batch;                  ///< the gathered run (totals, files) when complete
  std::string run_id;
  ShardSpec partition;                ///< count = N (index 0)
  std::string gather_json;            ///< path of gather.json when written
};

/// The run id a shard records (shard.json) and its database run row carries: options.run_id,
/// else "pf-" + FNV-1a 64 of the tool version, settings hash, N and inputs, which every shard of
/// the run derives alone (docs/scale-out.md).
std::string shard_run_id(const BatchOptions& options);

/// Checks the shards and, when they make one complete run, writes the gathered report folder.
/// Throws InputError (one line naming two folders and what differs) for shards of different
/// runs: another tool version, config hash, run id, partition count or inputs; IoError/
/// InputError for an unreadable or malformed shard.json; OptionError for bad options.
GatherResult gather_shards(const GatherOptions& options);

}  // namespace periodfit::batch
