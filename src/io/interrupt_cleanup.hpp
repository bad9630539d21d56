#pragma once
/// What an interrupted run must not leave behind: one process-wide registry of paths to remove
/// when SIGINT, SIGTERM or SIGHUP ends the process — the temporaries of io::AtomicFile and the
/// staging folders of batch::ReportFolder register here while they exist.
///
/// Signal handlers are process-wide state, so the library installs none: `main` installs the
/// one handler (src/cli/main.cpp), which calls remove_interrupted_paths() and then lets the
/// signal end the process as it would have. A process without that handler (a test runner, the
/// Python module) keeps the default action; its registrations cost a slot and nothing else.
///
/// Async-signal safety: slots are claimed lock-free; the handler reads only slots marked ready
/// and uses unlink, open, getdents64, unlinkat and rmdir, which are async-signal-safe
/// (signal-safety(7); getdents64 is a raw system call). A registration and the creation it
/// guards are made with the signals blocked (InterruptSignalsBlocked), so no signal falls
/// between them.
///
/// Usage:
///   io::InterruptSignalsBlocked blocked;
///   const int fd = ::mkostemp(tmp.data(), O_CLOEXEC);
///   io::InterruptCleanup cleanup(tmp, io::CleanupKind::file);  // removed on SIGINT until…
///   cleanup.release();                                          // …it is published
#include <csignal>
#include <cstddef>
#include <string>

namespace periodfit::io {

/// The signals after which registered paths are removed (the handler main installs).
inline constexpr int kInterruptSignals[] = {SIGINT, SIGTERM, SIGHUP};

enum class CleanupKind {
  file,    ///< unlinked
  folder,  ///< emptied two levels deep (a report folder's files/ inside), then removed
};

/// One registered path, unregistered when destroyed. More paths at once than the registry
/// holds (256) are not tracked: their cleanup is then best effort, as for a path too long.
class InterruptCleanup {
 public:
  InterruptCleanup() = default;  ///< registers nothing
  InterruptCleanup(const std::string& path, CleanupKind kind);
  ~InterruptCleanup() { release(); }
  InterruptCleanup(InterruptCleanup&& other) noexcept;
  InterruptCleanup& operator=(InterruptCleanup&& other) noexcept;
  InterruptCleanup(const InterruptCleanup&) = delete;
  InterruptCleanup& operator=(const InterruptCleanup&) = delete;

  /// The path to remove is now `path` (same kind), e.g. after a rename.
  void retarget(const std::string& path);
  /// Unregisters now: the path is the caller's to keep or remove.
  void release() noexcept;

 private:
  std::size_t slot_ = static_cast<std::size_t>(-1);
};

/// Removes every registered path. Async-signal-safe: for the interrupt handler main installs.
void remove_interrupted_paths() noexcept;

/// Blocks kInterruptSignals on the calling thread for its lifetime, so a creation and its
/// registration (or a rename and the registration's retarget) happen with no signal between.
class InterruptSignalsBlocked {
 public:
  InterruptSignalsBlocked();
  ~InterruptSignalsBlocked();
  InterruptSignalsBlocked(const InterruptSignalsBlocked&) = delete;
  InterruptSignalsBlocked& operator=(const InterruptSignalsBlocked&) = delete;

 private:
  sigset_t previous_;
};

}  // namespace periodfit::io
