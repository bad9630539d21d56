#pragma once
/// Writing result files so that a reader never sees half of one: content goes to a temporary
/// file in the destination folder, is flushed, and is renamed over the destination (rename is
/// atomic on POSIX file systems). A failure leaves the destination untouched and no temporary
/// behind, and throws IoError naming the path and the OS reason.
#include <string>
#include <string_view>

namespace periodfit::io {

/// Writes `content` to `path` atomically. `path == "-"` writes to standard output instead.
void write_file_atomic(const std::string& path, std::string_view content);

/// Installs SIGINT/SIGTERM/SIGHUP handlers that remove every temporary file still being written
/// by write_file_atomic, then let the signal end the process as it would have. Call once at
/// program start (the CLI does), so an interrupted run leaves no partial output behind.
void install_interrupt_cleanup();

/// Whole file as bytes; IoError names the path and reason (missing, a directory, permission).
std::string read_file(const std::string& path);

}  // namespace periodfit::io
