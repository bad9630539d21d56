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

AtomicFile::AtomicFile(std::string path) : path_(std::move(path)), slot_(kSlots) {
  if (path_ == "-") return;
  const std::filesystem::path target(path_);
  const auto folder = target.has_parent_path() ? target.parent_path() : std::filesystem::path(".");
  std::string tmp = (folder / ("." + target.filename().string() + ".tmp-XXXXXX")).string();
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
  if (temp_.empty()) {
    std::fwrite(bytes.data(), 1, bytes.size(), stdout);
    return;
  }
  if (failed_ || committed_) throw IoError(path_, "cannot write", EBADF);
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

void AtomicFile::commit() {
  if (temp_.empty()) {
    std::fflush(stdout);
    return;
  }
  if (failed_ || committed_) throw IoError(path_, "cannot write", EBADF);
  flush_buffer();
  // fsync before the rename: otherwise a crash soon after can leave the new name on an empty
  // file (ext4/xfs delayed allocation), which is the half-written state this class exists to
  // rule out.
  const bool synced = ::fsync(fd_) == 0;
  const int sync_errno = errno;
  const bool closed = ::close(fd_) == 0;
  const int close_errno = errno;
  fd_ = -1;
  if (!synced || !closed) {
    failed_ = true;
    throw IoError(path_, "cannot write", synced ? close_errno : sync_errno);
  }
  if (::rename(temp_.c_str(), path_.c_str()) != 0) {
    failed_ = true;
    throw IoError(path_, "cannot write", errno);
  }
  committed_ = true;
  untrack_temp(slot_);
  slot_ = kSlots;
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

std::string read_file(const std::string& path, std::size_t max_bytes) {
  const int fd = ::open(path.c_str(), O_RDONLY | O_CLOEXEC);
  if (fd < 0) throw IoError(path, "cannot open", errno);
  struct stat info {};
  if (::fstat(fd, &info) == 0 && S_ISDIR(info.st_mode)) {
    ::close(fd);
    throw IoError(path, "cannot read", EISDIR);
  }
  const auto too_large = [&] {
    ::close(fd);
    throw InputError(path, 0, 0,
                     "larger than the " + format_bytes(static_cast<double>(max_bytes)) + " limit for this input");
  };
  std::string bytes;
  if (info.st_size > 0 && static_cast<std::uint64_t>(info.st_size) > max_bytes) too_large();
  if (info.st_size > 0) bytes.reserve(static_cast<std::size_t>(info.st_size));
  char buffer[1 << 16];
  for (;;) {
    const ssize_t n = ::read(fd, buffer, sizeof buffer);
    if (n < 0) {
      if (errno == EINTR) continue;
      const int read_errno = errno;
      ::close(fd);
      throw IoError(path, "cannot read", read_errno);
    }
    if (n == 0) break;
    if (static_cast<std::size_t>(n) > max_bytes - bytes.size()) too_large();
    bytes.append(buffer, static_cast<std::size_t>(n));
  }
  ::close(fd);
  return bytes;
}

}  // namespace periodfit::io
