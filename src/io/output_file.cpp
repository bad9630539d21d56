#include "io/output_file.hpp"

#include <fcntl.h>
#include <sys/stat.h>
#include <unistd.h>

#include <cerrno>
#include <cstdio>
#include <cstring>
#include <filesystem>

#include "core/error.hpp"
#include "core/memory_budget.hpp"
#include "io/file_handle.hpp"
#include "io/interrupt_cleanup.hpp"

namespace periodfit::io {

namespace {

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

OutputTarget inspect_output(const std::string& path) {
  if (path == "-") return {OutputKind::standard_output, "-"};
  // What the path leads to, every link followed by the kernel (including /proc's fd links,
  // whose text is not always a path: "pipe:[…]").
  struct stat followed {};
  const bool exists = ::stat(path.c_str(), &followed) == 0;
  if (!exists && errno == ELOOP) throw IoError(path, "cannot write", ELOOP);
  if (exists) {
    // Written in place through the path as given: renaming a file over the node would destroy
    // it (a terminal, a null device, a FIFO someone reads).
    if (S_ISCHR(followed.st_mode) || S_ISFIFO(followed.st_mode)) return {OutputKind::in_place, path};
    // A result written over a block device would overwrite a disk's sectors, and a rename
    // over a folder or socket fails late or destroys the node: refused up front.
    if (S_ISDIR(followed.st_mode)) throw IoError(path, "cannot write", EISDIR);
    if (!S_ISREG(followed.st_mode)) {
      const char* what = S_ISBLK(followed.st_mode) ? "a block device" : S_ISSOCK(followed.st_mode) ? "a socket" : "not a file";
      throw Error(path + ": cannot write: " + what +
                  " (outputs go to regular files, character devices, FIFOs or standard output)");
    }
  }
  // A regular file or a new name: find where the rename must land by following symbolic links
  // by hand (realpath() fails on a link to a name that does not exist yet), so the link's
  // target is replaced and the link stays. 40 hops is the kernel's own limit (MAXSYMLINKS,
  // path_resolution(7)).
  std::filesystem::path current(path);
  for (int hop = 0;; ++hop) {
    struct stat info {};
    if (::lstat(current.c_str(), &info) != 0) {
      if (exists) break;  // the kernel found a file the link text does not name (see below)
      return {OutputKind::replace, current.string()};
    }
    if (!S_ISLNK(info.st_mode)) {
      if (!exists || (info.st_dev == followed.st_dev && info.st_ino == followed.st_ino))
        return {OutputKind::replace, current.string()};
      break;
    }
    if (hop == 40) throw IoError(path, "cannot write", ELOOP);
    std::string link(static_cast<std::size_t>(info.st_size > 0 ? info.st_size : 255) + 1, '\0');
    const ssize_t n = ::readlink(current.c_str(), link.data(), link.size());
    if (n < 0) throw IoError(path, "cannot write", errno);
    link.resize(static_cast<std::size_t>(n));
    const std::filesystem::path next(link);
    current = next.is_absolute() ? next : current.parent_path() / next;
  }
  // A /proc fd link to a deleted file, or a link changed while we looked: no name to rename
  // onto that is surely the file the path means.
  throw Error(path + ": cannot write: the link does not lead to a file name that can be replaced");
}

void write_stdout(std::string_view bytes) {
  if (!bytes.empty() && std::fwrite(bytes.data(), 1, bytes.size(), stdout) != bytes.size())
    throw IoError("standard output", "cannot write", errno);
  if (std::fflush(stdout) != 0) throw IoError("standard output", "cannot write", errno);
}

AtomicFile::AtomicFile(std::string path) : path_(std::move(path)) {
  const OutputTarget target = inspect_output(path_);
  kind_ = target.kind;
  target_ = target.resolved;
  if (kind_ == OutputKind::standard_output) return;
  if (kind_ == OutputKind::in_place) {
    file_.emplace(FileHandle::open_writable(target_));
    buffer_ = std::make_unique<char[]>(kBufferBytes);
    return;
  }
  const std::filesystem::path destination(target_);
  const auto folder =
      destination.has_parent_path() ? destination.parent_path() : std::filesystem::path(".");
  std::string tmp = (folder / ("." + destination.filename().string() + ".tmp-XXXXXX")).string();
  {
    // A signal between mkostemp and the registration would leave one empty temporary.
    const InterruptSignalsBlocked blocked;
    file_.emplace(FileHandle::create_temporary(tmp, path_));
    cleanup_ = InterruptCleanup(tmp, CleanupKind::file);
  }
  temp_ = std::move(tmp);
  // mkostemp makes 0600; results are ordinary files, readable as the umask allows.
  file_->set_mode(0666 & ~g_umask);
  buffer_ = std::make_unique<char[]>(kBufferBytes);
}

AtomicFile::~AtomicFile() {
  file_.reset();
  // Unlink before the registration goes (cleanup_'s destructor): a signal in between unlinks
  // a name that is already gone.
  if (!committed_ && !temp_.empty()) ::unlink(temp_.c_str());
}

void AtomicFile::write_through(std::string_view bytes) {
  try {
    file_->write_all(bytes);
  } catch (const IoError&) {
    failed_ = true;
    throw;
  }
}

void AtomicFile::flush_buffer() {
  if (buffered_ == 0) return;
  write_through(std::string_view(buffer_.get(), buffered_));
  buffered_ = 0;
}

void AtomicFile::write(std::string_view bytes) {
  if (failed_ || finished_) throw IoError(path_, "cannot write", EBADF);
  if (kind_ == OutputKind::standard_output) {
    if (!bytes.empty() && std::fwrite(bytes.data(), 1, bytes.size(), stdout) != bytes.size()) {
      failed_ = true;
      throw IoError("standard output", "cannot write", errno);
    }
    return;
  }
  if (bytes.size() <= kBufferBytes - buffered_) {
    std::memcpy(buffer_.get() + buffered_, bytes.data(), bytes.size());
    buffered_ += bytes.size();
    return;
  }
  flush_buffer();
  if (bytes.size() < kBufferBytes) {
    std::memcpy(buffer_.get(), bytes.data(), bytes.size());
    buffered_ = bytes.size();
  } else {
    write_through(bytes);
  }
}

void AtomicFile::finish() {
  if (failed_ || finished_) throw IoError(path_, "cannot write", EBADF);
  if (kind_ == OutputKind::standard_output) {
    if (std::fflush(stdout) != 0) {
      failed_ = true;
      throw IoError("standard output", "cannot write", errno);
    }
    finished_ = true;
    return;
  }
  flush_buffer();
  // fsync before the rename: otherwise a crash soon after can leave the new name on an empty
  // file (ext4/xfs delayed allocation), which is the half-written state this class exists to
  // rule out. A device or FIFO has nothing to sync (fsync fails with EINVAL there).
  try {
    file_->close_after_sync(kind_ == OutputKind::replace);
  } catch (const IoError&) {
    failed_ = true;
    throw;
  }
  finished_ = true;
}

void AtomicFile::publish() {
  if (failed_ || !finished_ || committed_) throw IoError(path_, "cannot write", EBADF);
  if (kind_ == OutputKind::replace) {
    try {
      rename_path(temp_, target_);
    } catch (const IoError&) {
      failed_ = true;
      throw;
    }
  }
  committed_ = true;
  cleanup_.release();
}

void AtomicFile::commit() {
  finish();
  publish();
}

void write_file_atomic(const std::string& path, std::string_view content) {
  AtomicFile file(path);
  file.write(content);
  file.commit();
}

std::string read_file(const std::string& path, std::size_t max_bytes, const ReadCheck& check) {
  // Closed on every way out, the throws of `check` included.
  const FileHandle file = FileHandle::open_readable(path);
  const int fd = file.fd();
  const auto too_large = [&] {
    throw InputError(path, 0, 0,
                     "larger than the " + format_bytes(static_cast<double>(max_bytes)) + " limit for this input");
  };
  std::string bytes;
  if (file.size() > max_bytes) too_large();
  if (file.size() > 0) bytes.reserve(static_cast<std::size_t>(file.size()));
  char buffer[1 << 16];
  for (;;) {
    const ssize_t n = ::read(fd, buffer, sizeof buffer);
    if (n < 0) {
      if (errno == EINTR) continue;
      throw IoError(path, "cannot read", errno);
    }
    if (n == 0) break;
    if (static_cast<std::size_t>(n) > max_bytes - bytes.size()) too_large();
    const std::size_t before = bytes.size();
    bytes.append(buffer, static_cast<std::size_t>(n));
    if (check) check(bytes, before);
  }
  return bytes;
}

}  // namespace periodfit::io
