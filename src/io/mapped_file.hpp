#pragma once
/// A read-only mapping of a regular file, for parsing a large file without a copy of its text:
/// the pages behind the parse are given back (MADV_DONTNEED) as it advances.
///
/// A file cut shorter while it is mapped (another process truncating it, a network share going
/// away) makes every access past the new end raise SIGBUS. With the guard installed, such a
/// fault inside a MappedFile maps zero pages over the rest of it and marks it truncated(), so
/// the reader runs on and reports the truncation as an input error.
///
/// Usage (main):   io::install_mapped_file_guard();
/// Usage (reader): if (io::mapped_file_guard_installed()) { io::MappedFile m(handle); parse(m.text()); }
#include <cstddef>
#include <string_view>

#include "io/file_handle.hpp"

namespace periodfit::io {

/// Installs the process's SIGBUS handler that lets read_csv map files: a file cut shorter while
/// it is mapped then becomes an InputError instead of killing the process. Signal handlers are
/// process-wide state, so the library never installs one itself: main calls this once at start
/// (the CLI and the test runner do). Without it read_csv reads the file (up to the piped-input
/// limit, io/input_limits.hpp) instead of mapping it. Faults outside read_csv's mappings are
/// passed to the handler installed before, or get the default action.
void install_mapped_file_guard();

/// True once install_mapped_file_guard has run: only then may a reader map a file.
bool mapped_file_guard_installed();

class MappedFile {
 public:
  /// Maps the whole of `file` (a regular file of size > 0); IoError naming the path when mmap fails.
  /// The mapping outlives the descriptor, so `file` may be closed afterwards.
  explicit MappedFile(const FileHandle& file);
  MappedFile(const MappedFile&) = delete;
  MappedFile& operator=(const MappedFile&) = delete;
  ~MappedFile();

  /// True once an access found the file shorter than when it was mapped.
  bool truncated() const;
  std::string_view text() const { return {static_cast<const char*>(base_), size_}; }
  /// Gives back the whole pages before `offset`.
  void release_before(std::size_t offset);
  /// Gives back every page (they are read again from the file when touched).
  void release_all();

 private:
  void* base_ = nullptr;
  std::size_t size_;
  std::size_t released_ = 0;
  std::size_t slot_ = static_cast<std::size_t>(-1);  ///< guard slot; none when all are busy
};

}  // namespace periodfit::io
