#pragma once
/// A file for spilling intermediate bytes out of memory that no one else sees and that nothing
/// leaves behind: it has no name from the start (Linux O_TMPFILE in the given folder, else
/// std::tmpfile(), which glibc also opens unnamed or unlinks at once), so a crash, SIGKILL or
/// an interrupted run leaves nothing on disk and no cleanup registry is needed. Parts are
/// appended by any thread and read back by their Span in any order.
///
/// Usage (the batch report: sections rendered by workers, copied into the page in order):
///   io::ScratchFile spill(report_dir);
///   const io::ScratchFile::Span s = spill.append(section_html);   // any thread
///   spill.copy(s, [&](std::string_view bytes) { page.write(bytes); });
#include <cstdint>
#include <cstdio>
#include <functional>
#include <mutex>
#include <optional>
#include <string>
#include <string_view>

#include "io/file_handle.hpp"

namespace periodfit::io {

class ScratchFile {
 public:
  /// Where one appended part lies in the file.
  struct Span {
    std::uint64_t offset = 0;
    std::uint64_t size = 0;
  };

  /// Opens the unnamed file in `folder` (where the data would end up anyway, so it needs no
  /// space elsewhere), falling back to the system's temporary folder where the file system
  /// has no O_TMPFILE. Throws IoError naming the folder and the OS reason when neither works.
  explicit ScratchFile(const std::string& folder);
  ~ScratchFile();
  ScratchFile(const ScratchFile&) = delete;
  ScratchFile& operator=(const ScratchFile&) = delete;

  /// Appends `bytes` at the end; thread-safe. Throws IoError (disk full, I/O error).
  Span append(std::string_view bytes);
  /// Passes the bytes of `span` to `sink` in pieces of at most 64 KiB, so reading back needs
  /// no more memory than that whatever the part's size. Throws IoError.
  void copy(Span span, const std::function<void(std::string_view)>& sink) const;

  std::uint64_t size() const;  ///< bytes appended so far
  const std::string& location() const noexcept { return location_; }  ///< folder it lives in

 private:
  std::string location_;
  std::optional<FileHandle> file_;  ///< the unnamed file (O_TMPFILE)
  int fd_ = -1;                     ///< file_'s, or stream_'s
  std::FILE* stream_ = nullptr;  ///< set when the std::tmpfile() fallback was taken
  mutable std::mutex mutex_;
  std::uint64_t size_ = 0;
};

}  // namespace periodfit::io
