#include "io/file_handle.hpp"

#include <fcntl.h>
#include <sys/stat.h>
#include <unistd.h>

#include <cerrno>
#include <cstdio>
#include <cstdlib>
#include <utility>

#include "core/error.hpp"

namespace periodfit::io {

FileHandle FileHandle::open_readable(const std::string& path) {
  const int fd = ::open(path.c_str(), O_RDONLY | O_CLOEXEC);
  if (fd < 0) throw IoError(path, "cannot open", errno);
  FileHandle file(path, fd);  // closed by its destructor if a check below throws
  struct stat info {};
  if (::fstat(fd, &info) != 0) throw IoError(path, "cannot read", errno);
  if (S_ISDIR(info.st_mode)) throw IoError(path, "cannot read", EISDIR);
  file.regular_ = S_ISREG(info.st_mode);
  file.size_ = info.st_size > 0 ? static_cast<std::uint64_t>(info.st_size) : 0;
  return file;
}

FileHandle FileHandle::open_writable(const std::string& path) {
  int fd = -1;
  do fd = ::open(path.c_str(), O_WRONLY | O_CLOEXEC | O_NOCTTY);
  while (fd < 0 && errno == EINTR);  // a FIFO's open waits for a reader, and may be interrupted
  if (fd < 0) throw IoError(path, "cannot open", errno);
  return FileHandle(path, fd);
}

FileHandle FileHandle::create_temporary(std::string& pattern, const std::string& name) {
  const int fd = ::mkostemp(pattern.data(), O_CLOEXEC);
  if (fd < 0) throw IoError(name, "cannot create", errno);
  FileHandle file(name, fd);
  file.regular_ = true;
  return file;
}

FileHandle FileHandle::open_lock_file(const std::string& path) {
  const int fd = ::open(path.c_str(), O_RDWR | O_CREAT | O_CLOEXEC, 0666);
  if (fd < 0) throw IoError(path, "cannot create", errno);
  FileHandle file(path, fd);
  file.regular_ = true;
  return file;
}

std::optional<FileHandle> FileHandle::open_readable_if_present(const std::string& path) {
  const int fd = ::open(path.c_str(), O_RDONLY | O_CLOEXEC);
  if (fd < 0 && errno == ENOENT) return std::nullopt;
  if (fd < 0) throw IoError(path, "cannot open", errno);
  FileHandle file(path, fd);
  struct stat info {};
  if (::fstat(fd, &info) == 0) {
    file.regular_ = S_ISREG(info.st_mode);
    file.size_ = info.st_size > 0 ? static_cast<std::uint64_t>(info.st_size) : 0;
  }
  return file;
}

std::optional<FileHandle> FileHandle::create_unnamed(const std::string& folder, int& os_error) {
  const int fd = ::open(folder.c_str(), O_TMPFILE | O_RDWR | O_CLOEXEC, 0600);
  if (fd < 0) {
    os_error = errno;
    return std::nullopt;
  }
  FileHandle file(folder, fd);
  file.regular_ = true;
  return file;
}

FileHandle::FileHandle(FileHandle&& other) noexcept
    : path_(std::move(other.path_)), fd_(std::exchange(other.fd_, -1)), regular_(other.regular_),
      size_(other.size_) {}

FileHandle::~FileHandle() { close(); }

void FileHandle::write_all(std::string_view bytes) {
  while (!bytes.empty()) {
    const ssize_t n = ::write(fd_, bytes.data(), bytes.size());
    if (n < 0) {
      if (errno == EINTR) continue;
      throw IoError(path_, "cannot write", errno);
    }
    bytes.remove_prefix(static_cast<std::size_t>(n));
  }
}

void FileHandle::set_mode(unsigned mode) { ::fchmod(fd_, static_cast<mode_t>(mode)); }

void FileHandle::close_after_sync(bool sync) {
  // fsync before a rename: otherwise a crash soon after can leave the new name on an empty
  // file (ext4/xfs delayed allocation). close() reports a write error the kernel deferred.
  const bool synced = !sync || ::fsync(fd_) == 0;
  const int sync_errno = errno;
  const bool closed = ::close(std::exchange(fd_, -1)) == 0;
  const int close_errno = errno;
  if (!synced || !closed) throw IoError(path_, "cannot write", synced ? close_errno : sync_errno);
}

void rename_path(const std::string& from, const std::string& to) {
  if (::rename(from.c_str(), to.c_str()) != 0) throw IoError(to, "cannot replace with " + from, errno);
}

bool exchange_paths(const std::string& from, const std::string& to) {
  if (::renameat2(AT_FDCWD, from.c_str(), AT_FDCWD, to.c_str(), RENAME_EXCHANGE) == 0) return true;
  if (errno == EINVAL || errno == ENOSYS || errno == EOPNOTSUPP) return false;
  throw IoError(to, "cannot replace with " + from, errno);
}

void sync_folder(const std::string& path) noexcept {
  const int fd = ::open(path.c_str(), O_RDONLY | O_DIRECTORY | O_CLOEXEC);
  if (fd < 0) return;
  ::fsync(fd);
  ::close(fd);
}

void FileHandle::close() {
  // A reader's close cannot lose data, so its result carries nothing to report.
  if (fd_ >= 0) ::close(std::exchange(fd_, -1));
}

}  // namespace periodfit::io
