// Where outputs may go and what a failed run leaves (docs/robustness.md, issue 11 classes 2, 3
// and 11): device nodes and FIFOs written in place, links followed, folders and block devices
// refused, an output never replacing an input or another output, every write to a file or to
// standard output checked, and exit 2 leaving no output at all.
//
// Device nodes are made here with mknod inside the test's own temporary folder (a null device
// 1:3, a full device 1:7, an unassigned block device); no test names a system path as an output.
// Standard output is redirected to /dev/full, which only ever refuses writes.
#include <doctest/doctest.h>
#include <sys/stat.h>
#include <sys/sysmacros.h>
#include <unistd.h>

#include <algorithm>
#include <filesystem>
#include <nlohmann/json.hpp>
#include <string>
#include <vector>

#include "support/cli_runner.hpp"
#include "support/hostile_inputs.hpp"

using periodfit::test::CliRun;
using periodfit::test::describe;
using periodfit::test::is_clear_error;
using periodfit::test::run_cli;
using periodfit::test::run_shell;
using periodfit::test::slurp;
using periodfit::test::TempDir;
using periodfit::test::write_text;
namespace fs = std::filesystem;

namespace {

std::string q(const std::string& path) { return "'" + path + "'"; }

/// A 50 Hz capture with harmonics 1, 3, 5 (8 periods at 5 kHz): analyze locks onto it and its
/// JSON (about 14 KB) is larger than the file-size limit used below.
std::string write_capture(const TempDir& dir) {
  periodfit::test::Signal s;
  s.amplitudes = {1.0, 0, 0.3, 0, 0.2};
  s.noise_rms = 1e-3;
  const std::string path = dir.file("x.csv");
  write_text(path, periodfit::test::capture_csv(5000, {periodfit::test::synthesize(s, 5000, 800)}, {"v"}));
  return path;
}

/// Input u and output y of a two-channel capture for identify (y: u's lines halved and delayed).
std::string write_pair(const TempDir& dir) {
  periodfit::test::Signal u, y;
  u.amplitudes = {1.0, 0, 0.3, 0, 0.2};
  u.noise_rms = 1e-3;
  y.amplitudes = {0.5, 0, 0.1, 0, 0.05};
  y.phases_deg = {-17, 0, -34, 0, -51};
  y.noise_rms = 1e-3;
  y.seed = 2;
  const std::string path = dir.file("pair.csv");
  write_text(path, periodfit::test::capture_csv(5000, {periodfit::test::synthesize(u, 5000, 800),
                                                       periodfit::test::synthesize(y, 5000, 800)},
                                                {"u", "y"}));
  return path;
}

/// The names in `dir`, sorted: what a run left behind (temporaries start with '.').
std::vector<std::string> names_in(const TempDir& dir) {
  std::vector<std::string> names;
  for (const auto& entry : fs::directory_iterator(dir.path)) names.push_back(entry.path().filename().string());
  std::sort(names.begin(), names.end());
  return names;
}

bool is_char_device(const std::string& path, unsigned major_number, unsigned minor_number) {
  struct stat info {};
  return ::lstat(path.c_str(), &info) == 0 && S_ISCHR(info.st_mode) && major(info.st_rdev) == major_number &&
         minor(info.st_rdev) == minor_number;
}

/// mknod needs CAP_MKNOD (root in CI); elsewhere the device-node tests say so and skip.
bool make_node(const std::string& path, mode_t type, unsigned major_number, unsigned minor_number) {
  return ::mknod(path.c_str(), type | 0666, makedev(major_number, minor_number)) == 0;
}

}  // namespace

// ---- class 2: outputs replace what they must not ----

TEST_CASE("outputs: a character device node as any command's output is written in place, never replaced") {
  const TempDir dir("outputs_chr");
  const std::string capture = write_capture(dir);
  const std::string pair = write_pair(dir);
  const std::string node = dir.file("null-node");
  if (!make_node(node, S_IFCHR, 1, 3)) {
    MESSAGE("SKIPPED: mknod is not permitted here (needs CAP_MKNOD)");
    return;
  }
  const std::vector<std::string> commands = {
      "analyze " + q(capture) + " --json " + q(node),
      "analyze " + q(capture) + " --plot " + q(node),
      "frf " + q(pair) + " --input u --output y --f0-hint 50 --order 0/1 --save-model " + q(node),
      "excite " + q(node) + " --format csv --signal sine --f0 50 --rate 5000 --periods 2",
  };
  for (const auto& command : commands) {
    const CliRun r = run_cli(command);
    CHECK_MESSAGE(r.exit_code == 0, command << ": " << describe(r));
    CHECK_MESSAGE(is_char_device(node, 1, 3), command << " replaced the device node");
  }
  const std::vector<std::string> expected = {"null-node", "pair.csv", "x.csv"};
  CHECK(names_in(dir) == expected);
}

TEST_CASE("outputs: a FIFO as --json is written in place; its reader gets the whole document") {
  const TempDir dir("outputs_fifo");
  const std::string capture = write_capture(dir);
  const std::string fifo = dir.file("pipe");
  REQUIRE(::mkfifo(fifo.c_str(), 0600) == 0);
  // Both ends under a timeout: a binary that replaced the FIFO would leave the reader waiting
  // for a writer that never comes.
  const CliRun r = run_shell("timeout 20 cat " + q(fifo) + " > " + q(dir.file("got.json")) + " & timeout 20 \"$PF\" analyze " +
                             q(capture) + " --json " + q(fifo) + "; status=$?; wait; exit $status");
  REQUIRE_MESSAGE(r.exit_code == 0, describe(r));
  struct stat info {};
  REQUIRE(::lstat(fifo.c_str(), &info) == 0);
  CHECK(S_ISFIFO(info.st_mode));
  const auto doc = nlohmann::json::parse(slurp(dir.file("got.json")));
  CHECK(doc.contains("channels"));
}

TEST_CASE("outputs: a symbolic link as an output is followed: its target is replaced and the link stays") {
  const TempDir dir("outputs_link");
  const std::string capture = write_capture(dir);
  write_text(dir.file("old.json"), "old");
  fs::create_symlink("old.json", dir.file("link.json"));
  fs::create_symlink("new.svg", dir.file("dangling.svg"));
  const CliRun r = run_cli("analyze " + q(capture) + " --json " + q(dir.file("link.json")) + " --plot " +
                           q(dir.file("dangling.svg")));
  REQUIRE_MESSAGE(r.exit_code == 0, describe(r));
  CHECK(fs::is_symlink(dir.file("link.json")));
  CHECK(fs::read_symlink(dir.file("link.json")) == "old.json");
  CHECK(nlohmann::json::parse(slurp(dir.file("old.json"))).contains("channels"));
  CHECK(fs::is_symlink(dir.file("dangling.svg")));
  CHECK(slurp(dir.file("new.svg")).find("<svg") != std::string::npos);
  const std::vector<std::string> expected = {"dangling.svg", "link.json", "new.svg", "old.json", "x.csv"};
  CHECK(names_in(dir) == expected);
  // A loop has no target: refused with the kernel's reason, both links left as they were.
  fs::create_symlink("loop-b", dir.file("loop-a"));
  fs::create_symlink("loop-a", dir.file("loop-b"));
  const CliRun loop = run_cli("analyze " + q(capture) + " --json " + q(dir.file("loop-a")));
  CHECK_MESSAGE(is_clear_error(loop), describe(loop));
  CHECK(loop.err == "periodfit: error: " + dir.file("loop-a") + ": cannot write: Too many levels of symbolic links\n");
  CHECK(fs::read_symlink(dir.file("loop-a")) == "loop-b");
}

TEST_CASE("outputs: a folder or a block device as an output is refused before any work") {
  const TempDir dir("outputs_refused");
  const std::string capture = write_capture(dir);
  fs::create_directory(dir.file("folder"));
  CliRun r = run_cli("analyze " + q(capture) + " --json " + q(dir.file("folder")));
  CHECK_MESSAGE(is_clear_error(r), describe(r));
  CHECK(r.err == "periodfit: error: " + dir.file("folder") + ": cannot write: Is a directory\n");
  CHECK(fs::is_empty(dir.file("folder")));
  // Loop-device major 7 with a minor no system creates: refused from its type, never opened.
  const std::string node = dir.file("block-node");
  if (!make_node(node, S_IFBLK, 7, 1048000)) {
    MESSAGE("SKIPPED: mknod is not permitted here (needs CAP_MKNOD)");
    return;
  }
  r = run_cli("analyze " + q(capture) + " --json " + q(dir.file("ok.json")) + " --plot " + q(node));
  CHECK_MESSAGE(is_clear_error(r), describe(r));
  CHECK(r.err.find(node + ": cannot write: a block device") != std::string::npos);
  struct stat info {};
  REQUIRE(::lstat(node.c_str(), &info) == 0);
  CHECK(S_ISBLK(info.st_mode));
  CHECK_FALSE(fs::exists(dir.file("ok.json")));
}

TEST_CASE("outputs: an output that is an input (by inode, through a link, or by spelling) is refused") {
  const TempDir dir("outputs_input");
  const std::string capture = write_capture(dir);
  const std::string before = slurp(capture);
  fs::create_symlink("x.csv", dir.file("alias.csv"));
  fs::create_hard_link(capture, dir.file("hard.csv"));
  const std::vector<std::string> outputs = {capture, dir.file("alias.csv"), dir.file("hard.csv"),
                                            (dir.path / "." / "x.csv").string()};
  for (const auto& out : outputs) {
    const CliRun r = run_cli("analyze " + q(capture) + " --json " + q(out));
    CHECK_MESSAGE(is_clear_error(r), out << ": " << describe(r));
    CHECK(r.err == "periodfit: error: invalid option: --json = " + out +
                       " (the same file as the input FILE; an output never replaces an input)\n");
  }
  CHECK(slurp(capture) == before);
  CHECK(fs::is_symlink(dir.file("alias.csv")));
  // predict's inputs are checked too: the model file it reads.
  write_text(dir.file("m.json"),
             R"({"format":"periodfit-model","version":1,"model":{"num":[1],"den":[1,0.001]}})");
  const std::string model_before = slurp(dir.file("m.json"));
  const CliRun p = run_cli("steady-state --model " + q(dir.file("m.json")) + " --wave sine --f0 50 --json " +
                           q(dir.file("m.json")));
  CHECK_MESSAGE(is_clear_error(p), describe(p));
  CHECK(slurp(dir.file("m.json")) == model_before);
}

TEST_CASE("outputs: two outputs to one file, or two to standard output, are refused before any work") {
  const TempDir dir("outputs_twice");
  const std::string capture = write_capture(dir);
  CliRun r = run_cli("analyze " + q(capture) + " --json " + q(dir.file("a.out")) + " --plot " +
                     q((dir.path / "." / "a.out").string()));
  CHECK_MESSAGE(is_clear_error(r), describe(r));
  CHECK(r.err.find("(the same file as --json; each output needs its own path)") != std::string::npos);
  r = run_cli("analyze " + q(capture) + " --json - --csv -");
  CHECK_MESSAGE(is_clear_error(r), describe(r));
  CHECK(r.err == "periodfit: error: invalid option: --csv = - (--json already writes to standard output; only one "
                 "output can)\n");
  r = run_cli("excite - --signal sine --f0 50 --rate 5000 --periods 2 --json -");
  CHECK_MESSAGE(is_clear_error(r), describe(r));
  const std::vector<std::string> expected = {"x.csv"};
  CHECK(names_in(dir) == expected);
}

// ---- class 3: write errors ignored ----

TEST_CASE("outputs: a full standard output is exit 2 with one line for every command that prints") {
  const TempDir dir("outputs_full_stdout");
  const std::string capture = write_capture(dir);
  const std::vector<std::string> commands = {
      "info " + q(capture),
      "analyze " + q(capture),
      "analyze " + q(capture) + " --json -",
      "excite - --format csv --signal sine --f0 50 --rate 5000 --periods 2",
      "steady-state --system '1/(1 + 0.001*s)' --wave sine --f0 50 --csv -",
      "batch " + q(capture) + " --report " + q(dir.file("report")) + " --quiet",
      "--help",
  };
  for (const auto& command : commands) {
    const CliRun r = run_shell("\"$PF\" " + command + " > /dev/full");
    CHECK_MESSAGE(is_clear_error(r), command << ": " << describe(r));
    CHECK_MESSAGE(r.err == "periodfit: error: standard output: cannot write: No space left on device\n",
                  command << ": " << r.err);
  }
}

TEST_CASE("outputs: a file write that fails (size limit, full device) is exit 2, no partial file, no temporary") {
  const TempDir dir("outputs_write_fails");
  const std::string capture = write_capture(dir);
  // RLIMIT_FSIZE of 4 KiB (`ulimit -f` counts 1024-byte blocks) with SIGXFSZ ignored: write()
  // then fails with EFBIG once the ~14 KB JSON reaches the limit, as a full disk fails with ENOSPC.
  const CliRun r = run_shell("trap '' XFSZ; ulimit -f 4; \"$PF\" analyze " + q(capture) + " --json " +
                             q(dir.file("big.json")));
  CHECK_MESSAGE(is_clear_error(r), describe(r));
  CHECK(r.err == "periodfit: error: " + dir.file("big.json") + ": cannot write: File too large\n");
  std::vector<std::string> expected = {"x.csv"};
  CHECK(names_in(dir) == expected);
  const std::string node = dir.file("full-node");
  if (!make_node(node, S_IFCHR, 1, 7)) {
    MESSAGE("SKIPPED: mknod is not permitted here (needs CAP_MKNOD)");
    return;
  }
  const CliRun f = run_cli("analyze " + q(capture) + " --json " + q(node));
  CHECK_MESSAGE(is_clear_error(f), describe(f));
  CHECK(f.err == "periodfit: error: " + node + ": cannot write: No space left on device\n");
  CHECK(is_char_device(node, 1, 7));
}

// ---- class 11: exit 2 means no outputs ----

TEST_CASE("outputs: analyze with one unwritable output writes none of them and prints no result") {
  const TempDir dir("outputs_none_analyze");
  const std::string capture = write_capture(dir);
  const CliRun r = run_cli("analyze " + q(capture) + " --json " + q(dir.file("ok.json")) + " --csv " +
                           q(dir.file("ok.csv")) + " --plot " + q(dir.file("missing/x.svg")));
  CHECK_MESSAGE(is_clear_error(r), describe(r));
  CHECK(r.err == "periodfit: error: " + dir.file("missing/x.svg") + ": cannot create: No such file or directory\n");
  const std::vector<std::string> expected = {"x.csv"};
  CHECK(names_in(dir) == expected);
}

TEST_CASE("outputs: frf with an unwritable --plot writes no JSON and no model and prints no report") {
  const TempDir dir("outputs_none_identify");
  const std::string pair = write_pair(dir);
  const CliRun r = run_cli("frf " + q(pair) + " --input u --output y --f0-hint 50 --order 0/1 --json " +
                           q(dir.file("id.json")) + " --save-model " + q(dir.file("m.json")) + " --plot " +
                           q(dir.file("missing/b.svg")));
  CHECK_MESSAGE(is_clear_error(r), describe(r));
  const std::vector<std::string> expected = {"pair.csv"};
  CHECK(names_in(dir) == expected);
}

TEST_CASE("outputs: a standard output that cannot be written publishes none of the files") {
  const TempDir dir("outputs_none_stdout");
  const std::string capture = write_capture(dir);
  const CliRun r = run_shell("\"$PF\" analyze " + q(capture) + " --json " + q(dir.file("ok.json")) + " > /dev/full");
  CHECK_MESSAGE(is_clear_error(r), describe(r));
  const std::vector<std::string> expected = {"x.csv"};
  CHECK(names_in(dir) == expected);
}
