#pragma once
/// The report folder of one batch run, published whole: a report folder is either the complete
/// result of one run or as it was before the run (docs/batch-output.md, "The report folder as
/// a whole").
///
/// How: the run writes into a new staging folder `.<name>.run-XXXXXX` beside the destination
/// (same parent, so the final rename is atomic), and publish() swaps it in with
/// renameat2(RENAME_EXCHANGE) (or, on a file system without it, two renames with the cleanup
/// signals blocked). The earlier run's folder is then removed: the destination is replaced
/// whole, so no stale per-file JSON of an earlier, larger run survives, and no hidden copy
/// doubles the disk use behind the user's back; keep a run by giving the next one a new folder.
/// A destination holding anything periodfit does not write there (see is_report_entry) is
/// refused, so a mistyped --report never deletes someone's files.
///
/// Concurrency: an exclusive flock on `.<name>.lock` beside the folder is held from before the
/// staging folder is made until the folder is published; a second run into the same folder
/// fails at once with the holder's pid. The lock file stays (removing it would let a waiting
/// run lock an unlinked inode while a third creates a new one).
///
/// Interrupts: the staging folder (and, after the swap, the earlier run's folder being deleted)
/// is registered with io::InterruptCleanup, so the handler main installs removes it on
/// SIGINT/SIGTERM/SIGHUP. Everything the staging folder holds goes with it, temporaries of
/// io::AtomicFile included, whichever thread was writing them.
///
/// Usage:
///   ReportFolder folder("out");               // locks, checks out/, makes .out.run-XXXXXX/files
///   io::write_file_atomic(folder.staging() + "/summary.csv", text);
///   folder.publish();                         // out/ is now this run; the old one is gone
#include <optional>
#include <string>

#include "io/file_handle.hpp"
#include "io/interrupt_cleanup.hpp"

namespace periodfit::batch {

/// The lock file beside report folder `destination`: `<parent>/.<name>.lock`.
std::string report_lock_path(const std::string& destination);

/// The pid a run wrote into its lock file (lock_file's first line), or "" when it holds none.
std::string lock_holder(const io::FileHandle& lock_file);

class ReportFolder {
 public:
  /// Throws OptionError when `destination` exists and is not a folder of earlier report files,
  /// IoError when the lock is held by another run or a folder cannot be created.
  explicit ReportFolder(const std::string& destination);
  /// Not published: removes the staging folder; the destination stays as it was.
  ~ReportFolder();
  ReportFolder(const ReportFolder&) = delete;
  ReportFolder& operator=(const ReportFolder&) = delete;

  /// The folder to write this run's outputs into (has a `files` sub-folder).
  const std::string& staging() const noexcept { return staging_; }
  const std::string& destination() const noexcept { return destination_; }
  /// Swaps the staging folder in as the destination and removes the earlier run's folder.
  /// Throws IoError when the rename fails (the destination is then as it was). Call once.
  void publish();

 private:
  std::string destination_;
  std::string parent_;
  std::string name_;
  std::string staging_;
  std::optional<io::FileHandle> lock_;  ///< `.<name>.lock`, flocked until destruction
  io::InterruptCleanup cleanup_;  ///< the staging folder, then the earlier run's, until removed
  bool published_ = false;
};

/// True for the names periodfit writes in a report folder: summary.csv, summary.json,
/// report.html, shard.json, shard-sections.html, gather.json, files/ (holding *.json), and `.<name>.tmp-XXXXXX` temporaries. `in_files` =
/// the name is inside files/.
bool is_report_entry(const std::string& name, bool is_folder, bool in_files);

}  // namespace periodfit::batch
