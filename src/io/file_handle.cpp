#include "io/file_handle.hpp"

#include <fcntl.h>
#include <sys/stat.h>
#include <unistd.h>

#include <cerrno>
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

FileHandle::FileHandle(FileHandle&& other) noexcept
    : path_(std::move(other.path_)), fd_(std::exchange(other.fd_, -1)), regular_(other.regular_),
      size_(other.size_) {}

FileHandle::~FileHandle() { close(); }

void FileHandle::close() {
  // A reader's close cannot lose data, so its result carries nothing to report.
  if (fd_ >= 0) ::close(std::exchange(fd_, -1));
}

}  // namespace periodfit::io
