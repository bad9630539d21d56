// The interrupt-cleanup registry (io/interrupt_cleanup.hpp) and the writer half of
// io::FileHandle: what the one handler main installs removes, and that the library itself
// installs no signal handler (DEVELOPERS.md, "Process-wide state").
#include <doctest/doctest.h>

#include <signal.h>

#include <cerrno>
#include <cstring>
#include <filesystem>
#include <fstream>
#include <string>

#include "batch/report_folder.hpp"
#include "core/error.hpp"
#include "io/file_handle.hpp"
#include "io/interrupt_cleanup.hpp"
#include "io/output_file.hpp"
#include "support/cli_runner.hpp"

namespace fs = std::filesystem;
using namespace periodfit;

namespace {

bool same_action(const struct sigaction& a, const struct sigaction& b) {
  return a.sa_handler == b.sa_handler && (a.sa_flags & SA_SIGINFO) == (b.sa_flags & SA_SIGINFO);
}

}  // namespace

TEST_CASE("interrupt cleanup: registered files and folders are removed, released ones stay") {
  const test::TempDir dir("interrupt_cleanup");
  const std::string file = dir.file("partial.tmp");
  const std::string kept = dir.file("kept.tmp");
  const fs::path folder = dir.path / ".out.run-abc";
  fs::create_directories(folder / "files");
  test::write_text(file, "half");
  test::write_text(kept, "whole");
  test::write_text((folder / "summary.csv").string(), "x");
  test::write_text((folder / "files" / "0001-a.json").string(), "{}");

  io::InterruptCleanup file_entry(file, io::CleanupKind::file);
  io::InterruptCleanup folder_entry(folder.string(), io::CleanupKind::folder);
  io::InterruptCleanup released(kept, io::CleanupKind::file);
  released.release();
  io::remove_interrupted_paths();
  CHECK_FALSE(fs::exists(file));
  CHECK_FALSE(fs::exists(folder));  // two levels deep: files/ and what it holds
  CHECK(fs::exists(kept));
}

TEST_CASE("interrupt cleanup: a retargeted registration removes the new path, a moved one the same") {
  const test::TempDir dir("interrupt_retarget");
  const std::string before = dir.file("before");
  const std::string after = dir.file("after");
  test::write_text(before, "a");
  io::InterruptCleanup entry(before, io::CleanupKind::file);
  fs::rename(before, after);
  entry.retarget(after);
  io::InterruptCleanup moved(std::move(entry));
  entry.release();  // moved-from: registers nothing, so this must not free `moved`'s slot
  io::remove_interrupted_paths();
  CHECK_FALSE(fs::exists(after));
}

TEST_CASE("interrupt cleanup: writing outputs and a report folder installs no signal handler") {
  // The library registers paths; only main installs the handler. The test runner installs
  // none for these signals, so every disposition must be as it was before the writes.
  struct sigaction before[3] {};
  for (int k = 0; k < 3; ++k) ::sigaction(io::kInterruptSignals[k], nullptr, &before[k]);
  const test::TempDir dir("interrupt_no_handler");
  {
    io::AtomicFile out(dir.file("a.txt"));
    out.write("text");
    batch::ReportFolder folder(dir.file("report"));
    io::write_file_atomic(folder.staging() + "/summary.csv", "path,status\n");
    folder.publish();
    out.commit();
  }
  for (int k = 0; k < 3; ++k) {
    struct sigaction now {};
    ::sigaction(io::kInterruptSignals[k], nullptr, &now);
    CHECK_MESSAGE(same_action(before[k], now), "signal ", io::kInterruptSignals[k], " changed");
  }
  CHECK(fs::exists(dir.file("report/summary.csv")));
}

TEST_CASE("file handle: a temporary is written, synced, closed and renamed into place") {
  const test::TempDir dir("file_handle_write");
  const std::string destination = dir.file("result.csv");
  std::string temporary = dir.file(".result.csv.tmp-XXXXXX");
  io::FileHandle out = io::FileHandle::create_temporary(temporary, destination);
  CHECK(temporary.find("XXXXXX") == std::string::npos);  // mkostemp filled the pattern in
  out.write_all("a,b\n1,2\n");
  out.close_after_sync(true);
  CHECK(out.fd() < 0);
  io::rename_path(temporary, destination);
  std::ifstream in(destination);
  const std::string text((std::istreambuf_iterator<char>(in)), std::istreambuf_iterator<char>());
  CHECK(text == "a,b\n1,2\n");
  CHECK_FALSE(fs::exists(temporary));
}

TEST_CASE("file handle: errors name the path and the OS reason; a failed rename names both paths") {
  const test::TempDir dir("file_handle_errors");
  std::string pattern = dir.file("missing/.x.tmp-XXXXXX");
  const std::string name = dir.file("missing/x.csv");
  // strerror(ENOENT) is the C library's own text, so the message is built the same way.
  CHECK_THROWS_WITH_AS(io::FileHandle::create_temporary(pattern, name),
                       (name + ": cannot create: " + std::strerror(ENOENT)).c_str(), IoError);
  const std::string from = dir.file("absent");
  const std::string to = dir.file("target");
  CHECK_THROWS_WITH_AS(io::rename_path(from, to),
                       (to + ": cannot replace with " + from + ": " + std::strerror(ENOENT)).c_str(), IoError);
}
