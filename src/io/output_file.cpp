#include "io/output_file.hpp"

#include <fcntl.h>
#include <sys/stat.h>
#include <unistd.h>

#include <cerrno>
#include <cstdio>
#include <filesystem>

#include "core/error.hpp"

namespace periodfit::io {

namespace {
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
}  // namespace

void write_file_atomic(const std::string& path, std::string_view content) {
  if (path == "-") {
    std::fwrite(content.data(), 1, content.size(), stdout);
    std::fflush(stdout);
    return;
  }
  const std::filesystem::path target(path);
  const auto folder = target.has_parent_path() ? target.parent_path() : std::filesystem::path(".");
  std::string tmp = (folder / ("." + target.filename().string() + ".tmp-XXXXXX")).string();
  const int fd = ::mkstemp(tmp.data());
  if (fd < 0) throw IoError(path, "cannot create", errno);
  // mkstemp makes 0600; results are ordinary files, readable as the umask allows.
  const mode_t mask = ::umask(0);
  ::umask(mask);
  ::fchmod(fd, 0666 & ~mask);
  const bool ok = write_all(fd, content) && ::fsync(fd) == 0;
  const int write_errno = errno;
  ::close(fd);
  if (!ok) {
    ::unlink(tmp.c_str());
    throw IoError(path, "cannot write", write_errno);
  }
  if (::rename(tmp.c_str(), path.c_str()) != 0) {
    const int rename_errno = errno;
    ::unlink(tmp.c_str());
    throw IoError(path, "cannot write", rename_errno);
  }
}

std::string read_file(const std::string& path) {
  const int fd = ::open(path.c_str(), O_RDONLY | O_CLOEXEC);
  if (fd < 0) throw IoError(path, "cannot open", errno);
  struct stat info {};
  if (::fstat(fd, &info) == 0 && S_ISDIR(info.st_mode)) {
    ::close(fd);
    throw IoError(path, "cannot read", EISDIR);
  }
  std::string bytes;
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
    bytes.append(buffer, static_cast<std::size_t>(n));
  }
  ::close(fd);
  return bytes;
}

}  // namespace periodfit::io
