#include "batch/report_folder.hpp"

#include <fcntl.h>
#include <pthread.h>
#include <sys/file.h>
#include <sys/stat.h>
#include <sys/syscall.h>
#include <unistd.h>

#include <array>
#include <atomic>
#include <cerrno>
#include <csignal>
#include <cstdio>
#include <cstring>
#include <filesystem>
#include <mutex>

#include "core/error.hpp"

namespace periodfit::batch {

namespace fs = std::filesystem;

namespace {

constexpr int kCleanupSignals[] = {SIGINT, SIGTERM, SIGHUP};

// Folders to remove on an interrupt, visible to the signal handler (the io::AtomicFile
// registry's pattern: slots claimed lock-free, the handler reads only slots marked ready).
constexpr std::size_t kSlots = 8;
constexpr std::size_t kPathMax = 4096;
enum SlotState : int { slot_free = 0, slot_filling = 1, slot_ready = 2 };
struct FolderSlot {
  std::atomic<int> state{slot_free};
  char path[kPathMax];
};
std::array<FolderSlot, kSlots> g_folders;
struct sigaction g_previous[3];

std::size_t track_folder(const std::string& path) {
  if (path.size() >= kPathMax) return kSlots;
  for (std::size_t i = 0; i < kSlots; ++i) {
    int expected = slot_free;
    if (g_folders[i].state.compare_exchange_strong(expected, slot_filling)) {
      std::memcpy(g_folders[i].path, path.c_str(), path.size() + 1);
      g_folders[i].state.store(slot_ready);
      return i;
    }
  }
  return kSlots;
}

void retrack_folder(std::size_t slot, const std::string& path) {
  if (slot >= kSlots || path.size() >= kPathMax) return;
  g_folders[slot].state.store(slot_filling);
  std::memcpy(g_folders[slot].path, path.c_str(), path.size() + 1);
  g_folders[slot].state.store(slot_ready);
}

void untrack_folder(std::size_t slot) {
  if (slot < kSlots) g_folders[slot].state.store(slot_free);
}

// Async-signal-safe removal of a folder two levels deep (the report layout: files/ inside),
// with open/getdents64/unlinkat only (readdir and std::filesystem are not safe in a handler).
struct LinuxDirent64 {
  unsigned long long d_ino;
  long long d_off;
  unsigned short d_reclen;
  unsigned char d_type;
  char d_name[1];
};

void empty_folder(int fd, int depth) {
  alignas(8) char buffer[4096];
  // Bounded: a listing that shows only "." and ".." ends it, and an entry that cannot be
  // removed (permissions) must not keep a dying process spinning.
  for (int pass = 0; pass < 1000; ++pass) {
    const long n = ::syscall(SYS_getdents64, fd, buffer, sizeof buffer);
    if (n <= 0) return;
    bool any = false;
    for (long offset = 0; offset < n;) {
      const auto* entry = reinterpret_cast<const LinuxDirent64*>(buffer + offset);
      offset += entry->d_reclen;
      const char* name = entry->d_name;
      if (name[0] == '.' && (name[1] == 0 || (name[1] == '.' && name[2] == 0))) continue;
      any = true;
      if (::unlinkat(fd, name, 0) == 0 || errno != EISDIR || depth == 0) continue;
      const int sub = ::openat(fd, name, O_RDONLY | O_DIRECTORY | O_NOFOLLOW | O_CLOEXEC);
      if (sub < 0) continue;
      empty_folder(sub, depth - 1);
      ::close(sub);
      ::unlinkat(fd, name, AT_REMOVEDIR);
    }
    if (!any) return;
    ::lseek(fd, 0, SEEK_SET);  // entries were removed under the listing: list again
  }
}

void remove_folder_in_handler(const char* path) {
  // Workers may still add a file between the listing and the rmdir; once the rmdir succeeds
  // nothing can be created inside any more, so a few passes always finish.
  for (int pass = 0; pass < 100; ++pass) {
    const int fd = ::open(path, O_RDONLY | O_DIRECTORY | O_NOFOLLOW | O_CLOEXEC);
    if (fd < 0) return;
    empty_folder(fd, 2);
    ::close(fd);
    if (::rmdir(path) == 0 || errno == ENOENT) return;
  }
}

extern "C" void remove_folders_and_pass_on(int signal_number, siginfo_t* info, void* context) {
  const int saved_errno = errno;
  for (auto& slot : g_folders)
    if (slot.state.load() == slot_ready) remove_folder_in_handler(slot.path);
  std::size_t k = 0;
  while (k < 3 && kCleanupSignals[k] != signal_number) ++k;
  const struct sigaction& previous = g_previous[k < 3 ? k : 0];
  errno = saved_errno;
  if (previous.sa_flags & SA_SIGINFO) {
    if (previous.sa_sigaction) previous.sa_sigaction(signal_number, info, context);
  } else if (previous.sa_handler == SIG_IGN) {
    return;
  } else if (previous.sa_handler != SIG_DFL && previous.sa_handler != nullptr) {
    previous.sa_handler(signal_number);
  } else {
    std::signal(signal_number, SIG_DFL);
    std::raise(signal_number);  // blocked until this handler returns, then ends the process
  }
}

// Installed once, chained in front of whatever handles the signals at that moment (the CLI
// installs io::install_interrupt_cleanup first). A signal the process ignores stays ignored.
void install_folder_cleanup() {
  static std::once_flag once;
  std::call_once(once, [] {
    for (std::size_t k = 0; k < 3; ++k) {
      struct sigaction current {};
      ::sigaction(kCleanupSignals[k], nullptr, &current);
      g_previous[k] = current;
      if (!(current.sa_flags & SA_SIGINFO) && current.sa_handler == SIG_IGN) continue;
      struct sigaction action {};
      action.sa_sigaction = remove_folders_and_pass_on;
      sigemptyset(&action.sa_mask);
      for (int s : kCleanupSignals) sigaddset(&action.sa_mask, s);
      action.sa_flags = SA_SIGINFO;
      ::sigaction(kCleanupSignals[k], &action, nullptr);
    }
  });
}

/// Blocks the cleanup signals on this thread for its lifetime.
class SignalsBlocked {
 public:
  SignalsBlocked() {
    sigset_t set;
    sigemptyset(&set);
    for (int s : kCleanupSignals) sigaddset(&set, s);
    pthread_sigmask(SIG_BLOCK, &set, &previous_);
  }
  ~SignalsBlocked() { pthread_sigmask(SIG_SETMASK, &previous_, nullptr); }
  SignalsBlocked(const SignalsBlocked&) = delete;
  SignalsBlocked& operator=(const SignalsBlocked&) = delete;

 private:
  sigset_t previous_;
};

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

void sync_folder(const std::string& path) {
  const int fd = ::open(path.c_str(), O_RDONLY | O_DIRECTORY | O_CLOEXEC);
  if (fd < 0) return;
  ::fsync(fd);
  ::close(fd);
}

}  // namespace

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

ReportFolder::ReportFolder(const std::string& destination) : destination_(destination), slot_(kSlots) {
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
  const std::string lock_path = (fs::path(parent_) / ("." + name_ + ".lock")).string();
  lock_fd_ = ::open(lock_path.c_str(), O_RDWR | O_CREAT | O_CLOEXEC, 0666);
  if (lock_fd_ < 0) throw IoError(lock_path, "cannot create", errno);
  if (::flock(lock_fd_, LOCK_EX | LOCK_NB) != 0) {
    const int lock_errno = errno;
    char holder[32] = {};
    const ssize_t n = ::pread(lock_fd_, holder, sizeof holder - 1, 0);
    std::string pid = n > 0 ? std::string(holder, static_cast<std::size_t>(n)) : "";
    while (!pid.empty() && (pid.back() == '\n' || pid.back() == ' ')) pid.pop_back();
    ::close(lock_fd_);
    lock_fd_ = -1;
    if (lock_errno == EWOULDBLOCK)
      throw IoError(destination, "in use by another batch run" + (pid.empty() ? "" : " (pid " + pid + ")") +
                                     ", which holds " + lock_path,
                    lock_errno);
    throw IoError(lock_path, "cannot lock", lock_errno);
  }
  const std::string pid = std::to_string(::getpid()) + "\n";
  if (::ftruncate(lock_fd_, 0) == 0) {
    [[maybe_unused]] const ssize_t written = ::pwrite(lock_fd_, pid.data(), pid.size(), 0);
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
    install_folder_cleanup();
    std::string staging = (fs::path(parent_) / ("." + name_ + ".run-XXXXXX")).string();
    {
      const SignalsBlocked blocked;  // no signal between mkdtemp and the registration
      if (!::mkdtemp(staging.data())) throw IoError(parent_, "cannot create a folder in", errno);
      slot_ = track_folder(staging);
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
    untrack_folder(slot_);
    ::close(lock_fd_);
    throw;
  }
}

ReportFolder::~ReportFolder() {
  if (!published_ && !staging_.empty()) {
    std::error_code ec;
    fs::remove_all(staging_, ec);
  }
  untrack_folder(slot_);
  if (lock_fd_ >= 0) ::close(lock_fd_);
}

void ReportFolder::publish() {
  const std::string target = (fs::path(parent_) / name_).string();
  std::string earlier;  // where the earlier run's folder is after the swap, if there was one
  {
    const SignalsBlocked blocked;  // the registered path always names what is to be removed
    std::error_code ec;
    const bool exists = fs::exists(fs::symlink_status(target, ec));
    if (!exists) {
      if (::rename(staging_.c_str(), target.c_str()) != 0) throw IoError(target, "cannot create", errno);
    } else if (::renameat2(AT_FDCWD, staging_.c_str(), AT_FDCWD, target.c_str(), RENAME_EXCHANGE) == 0) {
      earlier = staging_;  // the two names swapped: the staging name now holds the old run
    } else if (errno == EINVAL || errno == ENOSYS || errno == EOPNOTSUPP) {
      // No atomic exchange on this file system: move the old folder aside, then the new one in;
      // with the signals blocked nothing runs in between.
      std::string aside = staging_;
      aside.replace(aside.rfind(".run-"), 5, ".old-");
      if (::rename(target.c_str(), aside.c_str()) != 0) throw IoError(target, "cannot replace", errno);
      if (::rename(staging_.c_str(), target.c_str()) != 0) {
        const int rename_errno = errno;
        ::rename(aside.c_str(), target.c_str());
        throw IoError(target, "cannot replace", rename_errno);
      }
      earlier = aside;
    } else {
      throw IoError(target, "cannot replace", errno);
    }
    published_ = true;
    if (earlier.empty())
      untrack_folder(slot_);
    else
      retrack_folder(slot_, earlier);
  }
  sync_folder(parent_);
  if (!earlier.empty()) {
    std::error_code ec;
    fs::remove_all(earlier, ec);
  }
  untrack_folder(slot_);
  slot_ = kSlots;
}

}  // namespace periodfit::batch
