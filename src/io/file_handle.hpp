#pragma once
/// One open file descriptor that closes itself, for every reader and writer that opens a file
/// by path: open, fstat, the folder check, mkostemp, write, fsync and rename are done here, and
/// each failure throws IoError naming the path and the OS reason (core/error.hpp) — "cannot
/// open" for open, "cannot read" for a failed fstat or a folder (EISDIR), "cannot create" for a
/// temporary, "cannot write" for write, fsync and a writer's close. tests/layering_test.cpp
/// refuses these calls anywhere else in src/ but the two signal handlers (io/interrupt_cleanup,
/// io/mapped_file), which may only make async-signal-safe calls.
///
/// Usage:
///   const io::FileHandle file = io::FileHandle::open_readable(path);
///   if (file.regular()) … ::pread(file.fd(), …) …   // closed when `file` goes out of scope
///
///   std::string tmp = "out/.x.csv.tmp-XXXXXX";
///   io::FileHandle out = io::FileHandle::create_temporary(tmp, "out/x.csv");
///   out.write_all(text);
///   out.close_after_sync(true);
///   io::rename_path(tmp, "out/x.csv");
#include <cstdint>
#include <optional>
#include <string>
#include <string_view>
#include <utility>

namespace periodfit::io {

class FileHandle {
 public:
  /// Opens `path` read-only (O_CLOEXEC) and stats it; refuses a folder.
  static FileHandle open_readable(const std::string& path);
  /// Opens the existing node `path` write-only, without O_CREAT or O_TRUNC (a character device
  /// or a FIFO written in place; O_NOCTTY, so a terminal never becomes the controlling one).
  static FileHandle open_writable(const std::string& path);
  /// Creates a new file from `pattern` (ending in XXXXXX, replaced in place by mkostemp; mode
  /// 0600, O_CLOEXEC). Errors, this one ("cannot create") and the writes' after it, name
  /// `name`: the file the temporary stands for.
  static FileHandle create_temporary(std::string& pattern, const std::string& name);
  /// Opens `path` read-write, creating it (mode 0666 less the umask) when missing: a lock file
  /// that outlives its runs. IoError(path, "cannot create").
  static FileHandle open_lock_file(const std::string& path);
  /// Opens `path` read-only when it exists; nullopt when it does not (ENOENT), IoError(path,
  /// "cannot open") for any other failure.
  static std::optional<FileHandle> open_readable_if_present(const std::string& path);
  /// An unnamed read-write file in `folder` (Linux O_TMPFILE, mode 0600): nothing is left on
  /// disk whatever happens. nullopt, with the OS reason in `os_error`, where the file system or
  /// kernel has none, so the caller can fall back.
  static std::optional<FileHandle> create_unnamed(const std::string& folder, int& os_error);

  FileHandle(FileHandle&& other) noexcept;
  FileHandle& operator=(FileHandle&&) = delete;
  FileHandle(const FileHandle&) = delete;
  FileHandle& operator=(const FileHandle&) = delete;
  ~FileHandle();

  int fd() const { return fd_; }
  const std::string& path() const { return path_; }
  bool regular() const { return regular_; }  ///< a regular file (not a pipe or a device)
  std::uint64_t size() const { return size_; }  ///< st_size when opened (0 for a pipe)
  /// Closes now (the destructor then does nothing); for a caller that must close before it
  /// goes on, e.g. before reading the same path again another way.
  void close();
  /// Gives the descriptor to a caller that closes it itself (libsndfile's sf_open_fd).
  int release() { return std::exchange(fd_, -1); }

  /// Writes all of `bytes` (retrying short writes and EINTR); IoError(path, "cannot write").
  void write_all(std::string_view bytes);
  /// Sets the permission bits, best effort (a result file is readable as the umask allows).
  void set_mode(unsigned mode);
  /// A writer's close: fsync first when `sync` (a device or FIFO has nothing to sync), then
  /// close; closed either way, and IoError(path, "cannot write", the first failure's reason).
  void close_after_sync(bool sync);

 private:
  FileHandle(std::string path, int fd) : path_(std::move(path)), fd_(fd) {}
  std::string path_;
  int fd_ = -1;
  bool regular_ = false;
  std::uint64_t size_ = 0;
};

/// Renames `from` over `to` (atomic on POSIX file systems); IoError naming both paths:
/// "<to>: cannot replace with <from>: <reason>".
void rename_path(const std::string& from, const std::string& to);

/// Swaps the two names atomically (Linux renameat2 RENAME_EXCHANGE); false when the file
/// system or kernel cannot (EINVAL, ENOSYS, EOPNOTSUPP), IoError naming both paths otherwise.
bool exchange_paths(const std::string& from, const std::string& to);

/// fsyncs the folder `path`, so that renames and creations inside it survive a crash. Best
/// effort: it runs after the rename it protects, which a failure here cannot undo, and some
/// file systems refuse to sync a folder.
void sync_folder(const std::string& path) noexcept;

}  // namespace periodfit::io
