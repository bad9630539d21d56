// The read-only file mapping read_csv parses from, and the SIGBUS guard that makes a file cut
// short under the mapping an input error (mapped_file.hpp).
#include "io/mapped_file.hpp"

#include <sys/mman.h>
#include <unistd.h>

#include <array>
#include <atomic>
#include <cerrno>
#include <csignal>
#include <cstdint>
#include <mutex>

#include "core/error.hpp"

namespace periodfit::io {

namespace {

// A file cut shorter while it is mapped (another process truncating it, a network share going
// away) makes every access past the new end raise SIGBUS. The guard below catches that for the
// mappings registered here: it maps zero pages over the rest of the mapping (mmap is a plain
// system call, safe in practice inside the handler), marks the mapping truncated and returns,
// so the parse runs on to its end and read_csv reports the truncation as an input error.
// Faults outside our mappings get the default action.
constexpr std::size_t kGuardSlots = 64;
struct GuardSlot {
  std::atomic<char*> base{nullptr};
  std::atomic<std::size_t> size{0};
  std::atomic<bool> truncated{false};
};
std::array<GuardSlot, kGuardSlots> g_guarded;
struct sigaction g_previous_sigbus {};

extern "C" void on_mapped_file_sigbus(int signal_number, siginfo_t* info, void* context) {
  char* const fault = static_cast<char*>(info->si_addr);
  for (auto& slot : g_guarded) {
    char* const base = slot.base.load();
    const std::size_t size = slot.size.load();
    if (base && fault >= base && fault < base + size) {
      const auto page = static_cast<std::uintptr_t>(::sysconf(_SC_PAGESIZE));
      char* const from = reinterpret_cast<char*>(reinterpret_cast<std::uintptr_t>(fault) / page * page);
      ::mmap(from, static_cast<std::size_t>(base + size - from), PROT_READ,
             MAP_PRIVATE | MAP_ANONYMOUS | MAP_FIXED, -1, 0);
      slot.truncated.store(true);
      return;
    }
  }
  if (g_previous_sigbus.sa_flags & SA_SIGINFO) {
    g_previous_sigbus.sa_sigaction(signal_number, info, context);
    return;
  }
  std::signal(signal_number, SIG_DFL);
  std::raise(signal_number);
}

std::atomic<bool> g_guard_installed{false};

}  // namespace

bool mapped_file_guard_installed() { return g_guard_installed.load(); }

void install_mapped_file_guard() {
  static std::once_flag once;
  std::call_once(once, [] {
    struct sigaction action {};
    action.sa_sigaction = on_mapped_file_sigbus;
    sigemptyset(&action.sa_mask);
    action.sa_flags = SA_SIGINFO;
    ::sigaction(SIGBUS, &action, &g_previous_sigbus);
    g_guard_installed.store(true);
  });
}

MappedFile::MappedFile(const FileHandle& file) : size_(static_cast<std::size_t>(file.size())) {
  base_ = ::mmap(nullptr, size_, PROT_READ, MAP_PRIVATE, file.fd(), 0);
  if (base_ == MAP_FAILED) {
    base_ = nullptr;
    throw IoError(file.path(), "cannot read", errno);
  }
  for (std::size_t i = 0; i < kGuardSlots; ++i) {
    char* expected = nullptr;
    if (g_guarded[i].base.compare_exchange_strong(expected, static_cast<char*>(base_))) {
      g_guarded[i].truncated.store(false);
      g_guarded[i].size.store(size_);
      slot_ = i;
      break;
    }
  }
  ::madvise(base_, size_, MADV_SEQUENTIAL);
}

MappedFile::~MappedFile() {
  if (slot_ < kGuardSlots) {
    g_guarded[slot_].size.store(0);
    g_guarded[slot_].base.store(nullptr);
  }
  if (base_) ::munmap(base_, size_);
}

bool MappedFile::truncated() const { return slot_ < kGuardSlots && g_guarded[slot_].truncated.load(); }

void MappedFile::release_before(std::size_t offset) {
  const auto page = static_cast<std::size_t>(::sysconf(_SC_PAGESIZE));
  const std::size_t end = offset / page * page;
  if (end > released_) {
    ::madvise(static_cast<char*>(base_) + released_, end - released_, MADV_DONTNEED);
    released_ = end;
  }
}

void MappedFile::release_all() {
  ::madvise(base_, size_, MADV_DONTNEED);
  released_ = 0;
}

}  // namespace periodfit::io
