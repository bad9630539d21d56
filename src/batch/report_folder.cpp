#include "batch/report_folder.hpp"

#include <fcntl.h>
#include <sys/file.h>
#include <sys/stat.h>
#include <unistd.h>

#include <cerrno>
#include <cstdio>
#include <filesystem>

#include "core/error.hpp"
#include "io/interrupt_cleanup.hpp"

namespace periodfit::batch {

namespace fs = std::filesystem;

namespace {

bool is_temporary_name(const std::string& name) {
  return name.size() > 1 && name[0] == '.' && name.find(".tmp-") != std::string::npos;
}

// The first entry of an existing destination that periodfit did not write, or "".
std::string foreign_entry(const fs::path& folder) {
  std::error_code ec;
  for (auto it = fs::directory_iterator(folder, ec); !ec && it != fs::directory_iterator(); it.increment(ec)) {
    const std::string name = it->path().filename().string();
    const bool is_folder = it->is_directory(ec) && !it->is_symlink(ec);
    if (!is_report_entry(name, is_folder, false)) return name;
    if (!is_folder) continue;
    for (auto f = fs::directory_iterator(it->path(), ec); !ec && f != fs::directory_iterator(); f.increment(ec)) {
      const std::string inner = f->path().filename().string();
      if (!f->is_regular_file(ec) || f->is_symlink(ec) || !is_report_entry(inner, false, true))
        return name + "/" + inner;
    }
  }
  if (ec) return "(cannot list: " + ec.message() + ")";
  return "";
}

}  // namespace

std::string report_lock_path(const std::string& destination) {
  fs::path target = fs::absolute(fs::path(destination)).lexically_normal();
  if (!target.has_filename()) target = target.parent_path();  // "out/" → "out"
  return (target.parent_path() / ("." + target.filename().string() + ".lock")).string();
}

std::string lock_holder(const io::FileHandle& lock_file) {
  char holder[32] = {};
  const ssize_t n = ::pread(lock_file.fd(), holder, sizeof holder - 1, 0);
  std::string pid = n > 0 ? std::string(holder, static_cast<std::size_t>(n)) : "";
  while (!pid.empty() && (pid.back() == '\n' || pid.back() == ' ')) pid.pop_back();
  return pid;
}

bool is_report_entry(const std::string& name, bool is_folder, bool in_files) {
  if (is_temporary_name(name)) return !is_folder;
  if (in_files) return !is_folder && name.size() > 5 && name.ends_with(".json");
  if (is_folder) return name == "files";
  // shard.json and shard-sections.html: a shard's record; gather.json: a gathered run's
  // (batch/shard.hpp); results.sqlite and its WAL files: `batch --db` alone (store/recorder.hpp).
  return name == "summary.csv" || name == "summary.json" || name == "report.html" || name == "shard.json" ||
         name == "shard-sections.html" || name == "gather.json" || name == "results.sqlite" ||
         name == "results.sqlite-wal" || name == "results.sqlite-shm";
}

ReportFolder::ReportFolder(const std::string& destination) : destination_(destination) {
  fs::path target = fs::absolute(fs::path(destination)).lexically_normal();
  if (!target.has_filename()) target = target.parent_path();  // "out/" → "out"
  name_ = target.filename().string();
  if (name_.empty() || name_ == "." || name_ == ".." || target == target.root_path())
    throw OptionError("report", destination, "give a folder below an existing parent, not a root");
  parent_ = target.parent_path().string();
  std::error_code ec;
  fs::create_directories(parent_, ec);
  if (ec) throw IoError(parent_, "cannot create", ec.value());

  // The lock first: a second run must not even look at the folder while this one owns it.
  const std::string lock_path = report_lock_path(destination);
  lock_.emplace(io::FileHandle::open_lock_file(lock_path));
  if (::flock(lock_->fd(), LOCK_EX | LOCK_NB) != 0) {
    const int lock_errno = errno;
    const std::string pid = lock_holder(*lock_);
    lock_.reset();
    if (lock_errno == EWOULDBLOCK)
      throw IoError(destination, "in use by another batch run" + (pid.empty() ? "" : " (pid " + pid + ")") +
                                     ", which holds " + lock_path,
                    lock_errno);
    throw IoError(lock_path, "cannot lock", lock_errno);
  }
  const std::string pid = std::to_string(::getpid()) + "\n";
  if (::ftruncate(lock_->fd(), 0) == 0) {
    [[maybe_unused]] const ssize_t written = ::pwrite(lock_->fd(), pid.data(), pid.size(), 0);
  }

  try {
    const fs::file_status st = fs::symlink_status(target, ec);
    if (fs::exists(st)) {
      if (fs::is_symlink(st))
        throw OptionError("report", destination, "is a symbolic link; give the folder itself");
      if (!fs::is_directory(st)) throw OptionError("report", destination, "exists and is not a folder");
      if (const std::string foreign = foreign_entry(target); !foreign.empty())
        throw OptionError("report", destination,
                          "holds " + foreign +
                              ", which a batch run does not write; a report folder is replaced "
                              "whole, so give a new folder, an empty one or an earlier report folder");
    }
    std::string staging = (fs::path(parent_) / ("." + name_ + ".run-XXXXXX")).string();
    {
      const io::InterruptSignalsBlocked blocked;  // no signal between mkdtemp and the registration
      if (!::mkdtemp(staging.data())) throw IoError(parent_, "cannot create a folder in", errno);
      cleanup_ = io::InterruptCleanup(staging, io::CleanupKind::folder);
    }
    staging_ = staging;
    // mkdtemp makes 0700; the report is an ordinary folder, as open as the umask allows.
    const mode_t mask = ::umask(0);
    ::umask(mask);
    ::chmod(staging_.c_str(), 0777 & ~mask);
    fs::create_directory(fs::path(staging_) / "files", ec);
    if (ec) throw IoError(staging_ + "/files", "cannot create", ec.value());
  } catch (...) {
    if (!staging_.empty()) fs::remove_all(staging_, ec);
    cleanup_.release();
    lock_.reset();
    throw;
  }
}

ReportFolder::~ReportFolder() {
  if (!published_ && !staging_.empty()) {
    std::error_code ec;
    fs::remove_all(staging_, ec);
  }
  cleanup_.release();
}

void ReportFolder::publish() {
  const std::string target = (fs::path(parent_) / name_).string();
  std::string earlier;  // where the earlier run's folder is after the swap, if there was one
  {
    const io::InterruptSignalsBlocked blocked;  // the registered path always names what is to be removed
    std::error_code ec;
    const bool exists = fs::exists(fs::symlink_status(target, ec));
    if (!exists) {
      io::rename_path(staging_, target);
    } else if (io::exchange_paths(staging_, target)) {
      earlier = staging_;  // the two names swapped: the staging name now holds the old run
    } else {
      // No atomic exchange on this file system: move the old folder aside, then the new one in;
      // with the signals blocked nothing runs in between.
      std::string aside = staging_;
      aside.replace(aside.rfind(".run-"), 5, ".old-");
      io::rename_path(target, aside);
      try {
        io::rename_path(staging_, target);
      } catch (const IoError&) {
        // Put the earlier run back; the error to report is the one that stopped the publish.
        try {
          io::rename_path(aside, target);
        } catch (const IoError&) {
        }
        throw;
      }
      earlier = aside;
    }
    published_ = true;
    if (earlier.empty())
      cleanup_.release();
    else
      cleanup_.retarget(earlier);
  }
  io::sync_folder(parent_);
  if (!earlier.empty()) {
    std::error_code ec;
    fs::remove_all(earlier, ec);
  }
  cleanup_.release();
}

}  // namespace periodfit::batch
