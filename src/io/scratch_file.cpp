#include "io/scratch_file.hpp"

#include <sys/types.h>
#include <unistd.h>

#include <cerrno>
#include <memory>

#include "core/error.hpp"

namespace periodfit::io {

namespace {
constexpr std::size_t kCopyBytes = 1 << 16;
}  // namespace

ScratchFile::ScratchFile(const std::string& folder) : location_(folder.empty() ? "." : folder) {
  int tmpfile_errno = 0;
  if (std::optional<FileHandle> unnamed = FileHandle::create_unnamed(location_, tmpfile_errno)) {
    fd_ = file_.emplace(std::move(*unnamed)).fd();
    return;
  }
  // EOPNOTSUPP/EISDIR/EINVAL: the file system (or an old kernel) has no unnamed files.
  stream_ = std::tmpfile();
  if (stream_ == nullptr) throw IoError(location_, "cannot create a scratch file", tmpfile_errno);
  fd_ = ::fileno(stream_);
  location_ = P_tmpdir;
}

ScratchFile::~ScratchFile() {
  if (stream_ != nullptr) std::fclose(stream_);  // file_ closes itself
}

ScratchFile::Span ScratchFile::append(std::string_view bytes) {
  std::lock_guard<std::mutex> lock(mutex_);
  Span span{size_, bytes.size()};
  // A part that failed half-way is not counted: size_ only moves past whole parts, and the
  // next one overwrites the remains.
  std::uint64_t at = size_;
  while (!bytes.empty()) {
    const ssize_t n = ::pwrite(fd_, bytes.data(), bytes.size(), static_cast<off_t>(at));
    if (n < 0) {
      if (errno == EINTR) continue;
      throw IoError(location_, "cannot write the scratch file", errno);
    }
    bytes.remove_prefix(static_cast<std::size_t>(n));
    at += static_cast<std::uint64_t>(n);
  }
  size_ = at;
  return span;
}

void ScratchFile::copy(Span span, const std::function<void(std::string_view)>& sink) const {
  const auto buffer = std::make_unique<char[]>(kCopyBytes);
  std::uint64_t at = span.offset;
  std::uint64_t left = span.size;
  while (left > 0) {
    const std::size_t want = left < kCopyBytes ? static_cast<std::size_t>(left) : kCopyBytes;
    const ssize_t n = ::pread(fd_, buffer.get(), want, static_cast<off_t>(at));
    if (n < 0 && errno == EINTR) continue;
    if (n < 0) throw IoError(location_, "cannot read the scratch file", errno);
    if (n == 0) throw IoError(location_, "cannot read the scratch file", EIO);  // shorter than appended: truncated by someone
    sink(std::string_view(buffer.get(), static_cast<std::size_t>(n)));
    at += static_cast<std::uint64_t>(n);
    left -= static_cast<std::uint64_t>(n);
  }
}

std::uint64_t ScratchFile::size() const {
  std::lock_guard<std::mutex> lock(mutex_);
  return size_;
}

}  // namespace periodfit::io
