#pragma once
/// One open file descriptor that closes itself, for every reader that opens a file by path:
/// open, fstat and the folder check are done once, here, and each failure throws IoError naming
/// the path and the OS reason (core/error.hpp) — "cannot open" for open, "cannot read" for a
/// failed fstat or a folder (EISDIR).
///
/// Usage:
///   const io::FileHandle file = io::FileHandle::open_readable(path);
///   if (file.regular()) … ::pread(file.fd(), …) …   // closed when `file` goes out of scope
#include <cstdint>
#include <string>
#include <utility>

namespace periodfit::io {

class FileHandle {
 public:
  /// Opens `path` read-only (O_CLOEXEC) and stats it; refuses a folder.
  static FileHandle open_readable(const std::string& path);

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

 private:
  FileHandle(std::string path, int fd) : path_(std::move(path)), fd_(fd) {}
  std::string path_;
  int fd_ = -1;
  bool regular_ = false;
  std::uint64_t size_ = 0;
};

}  // namespace periodfit::io
