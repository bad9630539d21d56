#include "io/interrupt_cleanup.hpp"

#include <fcntl.h>
#include <pthread.h>
#include <sys/syscall.h>
#include <unistd.h>

#include <array>
#include <atomic>
#include <cerrno>
#include <cstring>
#include <utility>

namespace periodfit::io {

namespace {

constexpr std::size_t kSlots = 256;
constexpr std::size_t kNoSlot = static_cast<std::size_t>(-1);
constexpr std::size_t kPathMax = 4096;
enum SlotState : int { slot_free = 0, slot_filling = 1, slot_ready = 2 };
struct Slot {
  std::atomic<int> state{slot_free};
  CleanupKind kind = CleanupKind::file;
  char path[kPathMax];
};
std::array<Slot, kSlots> g_slots;

// Async-signal-safe removal of a folder's entries, `depth` levels of sub-folders deep, with
// open/getdents64/unlinkat only (readdir and std::filesystem are not safe in a handler).
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

void remove_folder(const char* path) {
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

void fill(Slot& slot, const std::string& path) {
  std::memcpy(slot.path, path.c_str(), path.size() + 1);
  slot.state.store(slot_ready);
}

}  // namespace

InterruptCleanup::InterruptCleanup(const std::string& path, CleanupKind kind) {
  if (path.size() >= kPathMax) return;
  for (std::size_t i = 0; i < kSlots; ++i) {
    int expected = slot_free;
    if (g_slots[i].state.compare_exchange_strong(expected, slot_filling)) {
      g_slots[i].kind = kind;
      fill(g_slots[i], path);
      slot_ = i;
      return;
    }
  }
}

InterruptCleanup::InterruptCleanup(InterruptCleanup&& other) noexcept
    : slot_(std::exchange(other.slot_, kNoSlot)) {}

InterruptCleanup& InterruptCleanup::operator=(InterruptCleanup&& other) noexcept {
  if (this != &other) {
    release();
    slot_ = std::exchange(other.slot_, kNoSlot);
  }
  return *this;
}

void InterruptCleanup::retarget(const std::string& path) {
  if (slot_ == kNoSlot) return;
  if (path.size() >= kPathMax) {
    release();
    return;
  }
  g_slots[slot_].state.store(slot_filling);
  fill(g_slots[slot_], path);
}

void InterruptCleanup::release() noexcept {
  if (slot_ != kNoSlot) g_slots[std::exchange(slot_, kNoSlot)].state.store(slot_free);
}

void remove_interrupted_paths() noexcept {
  const int saved_errno = errno;
  // Folders first: the temporaries inside a staging folder go with it.
  for (auto& slot : g_slots)
    if (slot.state.load() == slot_ready && slot.kind == CleanupKind::folder) remove_folder(slot.path);
  for (auto& slot : g_slots)
    if (slot.state.load() == slot_ready && slot.kind == CleanupKind::file) ::unlink(slot.path);
  errno = saved_errno;
}

InterruptSignalsBlocked::InterruptSignalsBlocked() {
  sigset_t set;
  sigemptyset(&set);
  for (int s : kInterruptSignals) sigaddset(&set, s);
  pthread_sigmask(SIG_BLOCK, &set, &previous_);
}

InterruptSignalsBlocked::~InterruptSignalsBlocked() { pthread_sigmask(SIG_SETMASK, &previous_, nullptr); }

}  // namespace periodfit::io
