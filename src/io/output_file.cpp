#include "io/output_file.hpp"

#include <fcntl.h>
#include <pthread.h>
#include <sys/stat.h>
#include <unistd.h>

#include <array>
#include <atomic>
#include <cerrno>
#include <csignal>
#include <cstdio>
#include <cstdint>
#include <cstring>
#include <filesystem>

#include "core/error.hpp"
#include "core/memory_budget.hpp"
#include "io/file_handle.hpp"

namespace periodfit::io {

namespace {

// Temporaries in flight, visible to the signal handler. Slots are claimed lock-free; the
// handler only reads slots marked ready and calls unlink(), which is async-signal-safe.
constexpr std::size_t kSlots = 256;
constexpr std::size_t kPathMax = 4096;
enum SlotState : int { slot_free = 0, slot_filling = 1, slot_ready = 2 };
struct TempSlot {
  std::atomic<int> state{slot_free};
  char path[kPathMax];
};
std::array<TempSlot, kSlots> g_temps;

/// Registers `path`; returns the slot index, or kSlots when the path cannot be tracked (too
/// long, or more concurrent writes than slots: cleanup is then best effort).
std::size_t track_temp(const std::string& path) {
  if (path.size() >= kPathMax) return kSlots;
  for (std::size_t i = 0; i < kSlots; ++i) {
    int expected = slot_free;
    if (g_temps[i].state.compare_exchange_strong(expected, slot_filling)) {
      std::memcpy(g_temps[i].path, path.c_str(), path.size() + 1);
      g_temps[i].state.store(slot_ready);
      return i;
    }
  }
  return kSlots;
}

void untrack_temp(std::size_t slot) {
  if (slot < kSlots) g_temps[slot].state.store(slot_free);
}

extern "C" void remove_temps_and_reraise(int signal_number) {
  for (auto& slot : g_temps)
    if (slot.state.load() == slot_ready) ::unlink(slot.path);
  std::signal(signal_number, SIG_DFL);
  std::raise(signal_number);
}

bool write_all(int fd, std::string_view content) {
  while (!content.empty()) {
    const ssize_t n = ::write(fd, content.data(), content.size());
    if (n < 0) {
      if (errno == EINTR) continue;
      return false;
    }
    content.remove_prefix(static_cast<std::size_t>(n));
  }
  return true;
}

// The process's umask, read once while static initialisation is still single-threaded: umask()
// can only be read by setting it, and setting it while workers create files would let them
// create files with the wrong mode.
mode_t read_umask() {
  const mode_t mask = ::umask(0);
  ::umask(mask);
  return mask;
}
const mode_t g_umask = read_umask();

constexpr std::size_t kBufferBytes = 1 << 16;
}  // namespace

OutputTarget inspect_output(const std::string& path) {
  if (path == "-") return {OutputKind::standard_output, "-"};
  // What the path leads to, every link followed by the kernel (including /proc's fd links,
  // whose text is not always a path: "pipe:[…]").
  struct stat followed {};
  const bool exists = ::stat(path.c_str(), &followed) == 0;
  if (!exists && errno == ELOOP) throw IoError(path, "cannot write", ELOOP);
  if (exists) {
    // Written in place through the path as given: renaming a file over the node would destroy
    // it (a terminal, a null device, a FIFO someone reads).
    if (S_ISCHR(followed.st_mode) || S_ISFIFO(followed.st_mode)) return {OutputKind::in_place, path};
    // A result written over a block device would overwrite a disk's sectors, and a rename
    // over a folder or socket fails late or destroys the node: refused up front.
    if (S_ISDIR(followed.st_mode)) throw IoError(path, "cannot write", EISDIR);
    if (!S_ISREG(followed.st_mode)) {
      const char* what = S_ISBLK(followed.st_mode) ? "a block device" : S_ISSOCK(followed.st_mode) ? "a socket" : "not a file";
      throw Error(path + ": cannot write: " + what +
                  " (outputs go to regular files, character devices, FIFOs or standard output)");
    }
  }
  // A regular file or a new name: find where the rename must land by following symbolic links
  // by hand (realpath() fails on a link to a name that does not exist yet), so the link's
  // target is replaced and the link stays. 40 hops is the kernel's own limit (MAXSYMLINKS,
  // path_resolution(7)).
  std::filesystem::path current(path);
  for (int hop = 0;; ++hop) {
    struct stat info {};
    if (::lstat(current.c_str(), &info) != 0) {
      if (exists) break;  // the kernel found a file the link text does not name (see below)
      return {OutputKind::replace, current.string()};
    }
    if (!S_ISLNK(info.st_mode)) {
      if (!exists || (info.st_dev == followed.st_dev && info.st_ino == followed.st_ino))
        return {OutputKind::replace, current.string()};
      break;
    }
    if (hop == 40) throw IoError(path, "cannot write", ELOOP);
    std::string link(static_cast<std::size_t>(info.st_size > 0 ? info.st_size : 255) + 1, '\0');
    const ssize_t n = ::readlink(current.c_str(), link.data(), link.size());
    if (n < 0) throw IoError(path, "cannot write", errno);
    link.resize(static_cast<std::size_t>(n));
    const std::filesystem::path next(link);
    current = next.is_absolute() ? next : current.parent_path() / next;
  }
  // A /proc fd link to a deleted file, or a link changed while we looked: no name to rename
  // onto that is surely the file the path means.
  throw Error(path + ": cannot write: the link does not lead to a file name that can be replaced");
}

void write_stdout(std::string_view bytes) {
  if (!bytes.empty() && std::fwrite(bytes.data(), 1, bytes.size(), stdout) != bytes.size())
    throw IoError("standard output", "cannot write", errno);
  if (std::fflush(stdout) != 0) throw IoError("standard output", "cannot write", errno);
}

AtomicFile::AtomicFile(std::string path) : path_(std::move(path)), slot_(kSlots) {
  const OutputTarget target = inspect_output(path_);
  kind_ = target.kind;
  target_ = target.resolved;
  if (kind_ == OutputKind::standard_output) return;
  if (kind_ == OutputKind::in_place) {
    // No O_CREAT (the node exists), no O_TRUNC (meaningless for a device or FIFO), O_NOCTTY so
    // a terminal never becomes the controlling one.
    for (;;) {
      fd_ = ::open(target_.c_str(), O_WRONLY | O_CLOEXEC | O_NOCTTY);
      if (fd_ >= 0 || errno != EINTR) break;
    }
    if (fd_ < 0) throw IoError(path_, "cannot open", errno);
    buffer_ = std::make_unique<char[]>(kBufferBytes);
    return;
  }
  const std::filesystem::path destination(target_);
  const auto folder =
      destination.has_parent_path() ? destination.parent_path() : std::filesystem::path(".");
  std::string tmp = (folder / ("." + destination.filename().string() + ".tmp-XXXXXX")).string();
  // A signal between mkostemp and track_temp would leave one empty temporary; blocking the
  // cleanup signals for those few instructions closes the gap.
  sigset_t cleanup_signals, previous;
  sigemptyset(&cleanup_signals);
  for (int s : {SIGINT, SIGTERM, SIGHUP}) sigaddset(&cleanup_signals, s);
  pthread_sigmask(SIG_BLOCK, &cleanup_signals, &previous);
  const int fd = ::mkostemp(tmp.data(), O_CLOEXEC);
  const int create_errno = errno;
  const std::size_t slot = fd >= 0 ? track_temp(tmp) : kSlots;
  pthread_sigmask(SIG_SETMASK, &previous, nullptr);
  if (fd < 0) throw IoError(path_, "cannot create", create_errno);
  fd_ = fd;
  slot_ = slot;
  temp_ = std::move(tmp);
  // mkostemp makes 0600; results are ordinary files, readable as the umask allows.
  ::fchmod(fd_, 0666 & ~g_umask);
  buffer_ = std::make_unique<char[]>(kBufferBytes);
}

AtomicFile::~AtomicFile() {
  if (fd_ >= 0) ::close(fd_);
  // Unlink before untracking: a signal in between unlinks a name that is already gone.
  if (!committed_ && !temp_.empty()) ::unlink(temp_.c_str());
  untrack_temp(slot_);
}

void AtomicFile::flush_buffer() {
  if (buffered_ == 0) return;
  if (!write_all(fd_, std::string_view(buffer_.get(), buffered_))) {
    failed_ = true;
    throw IoError(path_, "cannot write", errno);
  }
  buffered_ = 0;
}

void AtomicFile::write(std::string_view bytes) {
  if (failed_ || finished_) throw IoError(path_, "cannot write", EBADF);
  if (kind_ == OutputKind::standard_output) {
    if (!bytes.empty() && std::fwrite(bytes.data(), 1, bytes.size(), stdout) != bytes.size()) {
      failed_ = true;
      throw IoError("standard output", "cannot write", errno);
    }
    return;
  }
  if (bytes.size() <= kBufferBytes - buffered_) {
    std::memcpy(buffer_.get() + buffered_, bytes.data(), bytes.size());
    buffered_ += bytes.size();
    return;
  }
  flush_buffer();
  if (bytes.size() < kBufferBytes) {
    std::memcpy(buffer_.get(), bytes.data(), bytes.size());
    buffered_ = bytes.size();
  } else if (!write_all(fd_, bytes)) {
    failed_ = true;
    throw IoError(path_, "cannot write", errno);
  }
}

void AtomicFile::finish() {
  if (failed_ || finished_) throw IoError(path_, "cannot write", EBADF);
  if (kind_ == OutputKind::standard_output) {
    if (std::fflush(stdout) != 0) {
      failed_ = true;
      throw IoError("standard output", "cannot write", errno);
    }
    finished_ = true;
    return;
  }
  flush_buffer();
  // fsync before the rename: otherwise a crash soon after can leave the new name on an empty
  // file (ext4/xfs delayed allocation), which is the half-written state this class exists to
  // rule out. A device or FIFO has nothing to sync (fsync fails with EINVAL there).
  const bool synced = kind_ != OutputKind::replace || ::fsync(fd_) == 0;
  const int sync_errno = errno;
  const bool closed = ::close(fd_) == 0;
  const int close_errno = errno;
  fd_ = -1;
  if (!synced || !closed) {
    failed_ = true;
    throw IoError(path_, "cannot write", synced ? close_errno : sync_errno);
  }
  finished_ = true;
}

void AtomicFile::publish() {
  if (failed_ || !finished_ || committed_) throw IoError(path_, "cannot write", EBADF);
  if (kind_ == OutputKind::replace && ::rename(temp_.c_str(), target_.c_str()) != 0) {
    failed_ = true;
    throw IoError(path_, "cannot write", errno);
  }
  committed_ = true;
  untrack_temp(slot_);
  slot_ = kSlots;
}

void AtomicFile::commit() {
  finish();
  publish();
}

void write_file_atomic(const std::string& path, std::string_view content) {
  AtomicFile file(path);
  file.write(content);
  file.commit();
}

void install_interrupt_cleanup() {
  for (int s : {SIGINT, SIGTERM, SIGHUP}) {
    struct sigaction action {};
    action.sa_handler = remove_temps_and_reraise;
    sigemptyset(&action.sa_mask);
    action.sa_flags = static_cast<int>(SA_RESETHAND);
    ::sigaction(s, &action, nullptr);
  }
}

std::string read_file(const std::string& path, std::size_t max_bytes, const ReadCheck& check) {
  // Closed on every way out, the throws of `check` included.
  const FileHandle file = FileHandle::open_readable(path);
  const int fd = file.fd();
  const auto too_large = [&] {
    throw InputError(path, 0, 0,
                     "larger than the " + format_bytes(static_cast<double>(max_bytes)) + " limit for this input");
  };
  std::string bytes;
  if (file.size() > max_bytes) too_large();
  if (file.size() > 0) bytes.reserve(static_cast<std::size_t>(file.size()));
  char buffer[1 << 16];
  for (;;) {
    const ssize_t n = ::read(fd, buffer, sizeof buffer);
    if (n < 0) {
      if (errno == EINTR) continue;
      throw IoError(path, "cannot read", errno);
    }
    if (n == 0) break;
    if (static_cast<std::size_t>(n) > max_bytes - bytes.size()) too_large();
    const std::size_t before = bytes.size();
    bytes.append(buffer, static_cast<std::size_t>(n));
    if (check) check(bytes, before);
  }
  return bytes;
}

}  // namespace periodfit::io
