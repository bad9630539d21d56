#pragma once
/// Writing result files so that a reader never sees half of one: content goes to a temporary
/// file in the destination folder, is flushed, and is renamed over the destination (rename is
/// atomic on POSIX file systems). A failure leaves the destination untouched and no temporary
/// behind, and throws IoError naming the path and the OS reason.
///
/// What an output path may be (docs/robustness.md, issue 11 class 2): a new name or a regular
/// file is replaced atomically as above; a symbolic link is followed, and the file it points to
/// is replaced (the temporary goes beside the target, so the link stays a link); a character
/// device (a terminal, a null device) or a FIFO is written in place, opened write-only without
/// truncation, because renaming a regular file over it would destroy the node; a directory, a
/// block device or a socket is refused before anything is written.
///
/// Usage (a file too large to hold in memory at once):
///   io::AtomicFile out("report/report.html");
///   for (const auto& part : parts) out.write(part);
///   out.commit();  // leaving the scope without commit() removes the temporary
#include <cstddef>
#include <functional>
#include <memory>
#include <optional>
#include <string>
#include <string_view>

#include "io/file_handle.hpp"
#include "io/input_limits.hpp"
#include "io/interrupt_cleanup.hpp"

namespace periodfit::io {

/// How an output path is written, decided from what it is now (see the header comment).
enum class OutputKind {
  standard_output,  ///< "-"
  replace,          ///< missing or a regular file: temporary + rename
  in_place,         ///< a character device or a FIFO: opened write-only and written through
};

/// What `path` leads to: its kind and the path written (symbolic links resolved, so a link's
/// target is replaced and the link kept). Throws IoError for what is never written: a directory,
/// a block device, a socket, a link loop.
struct OutputTarget {
  OutputKind kind = OutputKind::replace;
  std::string resolved;  ///< `path` with every symbolic link followed; "-" for standard output
};
OutputTarget inspect_output(const std::string& path);

/// Writes all of `bytes` to standard output and flushes it; throws IoError("standard output",
/// "cannot write", reason) when the stream refuses (disk full behind a redirection, I/O error).
void write_stdout(std::string_view bytes);

/// One output file written in pieces and published whole: the constructor creates the
/// temporary `.<name>.tmp-XXXXXX` beside `path`, write() appends (through a 64 KiB buffer, so
/// memory stays bounded whatever the file's size), commit() flushes, fsyncs and renames it over
/// `path`. Destroyed without commit() (an exception, an early return) it removes the temporary
/// and leaves `path` as it was. While it exists the temporary is registered with
/// io::InterruptCleanup, so SIGINT/SIGTERM/SIGHUP remove it too (with the handler main installs). `path == "-"` writes to
/// standard output instead, and a character device or FIFO is written in place (neither can be
/// atomic; commit() flushes and checks). A FIFO's open waits for a reader, as FIFOs do. Not
/// thread-safe: one writer.
class AtomicFile {
 public:
  /// Throws IoError(path, "cannot create", reason) when the temporary cannot be made (missing
  /// folder, permission).
  explicit AtomicFile(std::string path);
  ~AtomicFile();
  AtomicFile(const AtomicFile&) = delete;
  AtomicFile& operator=(const AtomicFile&) = delete;

  /// Appends bytes. Throws IoError(path, "cannot write", reason) (disk full, I/O error); the
  /// file can then only be abandoned.
  void write(std::string_view bytes);
  /// Publishes the file: finish() then publish(). Throws IoError(path, "cannot write", reason)
  /// and removes the temporary when flushing, fsync or the rename fails. Call once.
  void commit();
  /// The first half of commit(): flushes, fsyncs and closes the temporary (in place: flushes
  /// and closes the destination; standard output: flushes), so that only the rename is left.
  /// Lets a caller with several outputs finish them all before publishing any.
  void finish();
  /// The second half: renames the finished temporary over the destination (nothing to do in
  /// place or on standard output).
  void publish();

  const std::string& path() const noexcept { return path_; }
  OutputKind kind() const noexcept { return kind_; }

 private:
  void flush_buffer();
  void write_through(std::string_view bytes);  ///< unbuffered; marks the file failed on an error

  std::string path_;
  OutputKind kind_ = OutputKind::replace;
  std::string target_;       ///< path_ with symbolic links resolved: what the rename replaces
  std::string temp_;         ///< the temporary's path; empty unless kind_ == replace
  std::optional<FileHandle> file_;  ///< open while writing; closed by finish or the destructor
  InterruptCleanup cleanup_;  ///< the temporary, registered until published or removed
  std::unique_ptr<char[]> buffer_;
  std::size_t buffered_ = 0;
  bool failed_ = false;      ///< a write failed: commit() refuses
  bool finished_ = false;
  bool committed_ = false;
};

/// Writes `content` to `path` atomically (one AtomicFile). `path == "-"` writes to standard
/// output instead.
void write_file_atomic(const std::string& path, std::string_view content);

/// Called after each chunk read by read_file with the bytes so far and how many there were
/// before the chunk; it may throw to stop the read (the file is closed either way).
using ReadCheck = std::function<void(const std::string& bytes, std::size_t before)>;

/// Whole file as bytes; IoError names the path and reason (missing, a directory, permission).
/// More than `max_bytes` (a pipe or device never ends: /dev/zero) is an InputError naming the
/// path and the limit, raised before the excess is held in memory. `check`, when given, sees
/// every chunk as it arrives (capture_reader refuses binary data on a pipe this way).
std::string read_file(const std::string& path, std::size_t max_bytes = kMaxTextFileBytes,
                      const ReadCheck& check = {});

}  // namespace periodfit::io
