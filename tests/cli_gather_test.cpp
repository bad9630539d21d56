// `periodfit batch --shard K/N` and `periodfit gather` as commands (docs/scale-out.md): the
// settings given as flags travel in the shard records, so the gathered folder equals the single
// run's; exit codes as batch's; an incomplete run and shards of different settings are exit 2
// with the problems named and nothing written.
#include "support/test_paths.hpp"
#include <doctest/doctest.h>

#include <algorithm>
#include <filesystem>
#include <string>
#include <vector>

#include "batch_fixture.hpp"
#include "support/cli_runner.hpp"

using periodfit::test::run_cli;
using periodfit::test::slurp;
using periodfit::test::TempDir;
using periodfit::test::write_text;
namespace fs = std::filesystem;

namespace {

std::string q(const std::string& s) { return "'" + s + "'"; }

// The outputs of a report folder, relative path → bytes; gather.json is the gather's own record.
std::vector<std::pair<std::string, std::string>> outputs(const fs::path& folder) {
  return periodfit::test::folder_files(folder, "gather.json");
}

// Three passing captures, a failing one (THD 9.3 % > 8 %: IEEE Std 1241 THD = a3/a1) and, when
// asked, an unreadable one.
void write_captures(const TempDir& dir, bool with_error) {
  fs::create_directories(dir.path / "caps");
  for (int i = 0; i < 3; ++i) {
    periodfit::test::SineCapture c;
    c.a3_v = 0.02 + 0.01 * i;
    periodfit::test::write_sine_csv(dir.file("caps/pass_" + std::to_string(i) + ".csv"), c);
  }
  periodfit::test::write_sine_csv(dir.file("caps/fail.csv"), periodfit::test::SineCapture{});
  if (with_error) write_text(dir.file("caps/broken.csv"), "time (s),v (V)\n0,1\n0.1,x\n");
  write_text(dir.file("limits.toml"), "[[limit]]\nresult = \"thd\"\nmax = \"8 %\"\n");
}

}  // namespace

TEST_CASE("cli gather: shards with flag settings gather into the single run's folder, exit codes as batch") {
  for (const bool with_error : {false, true}) {
    TempDir dir(with_error ? "cli_gather_err" : "cli_gather_fail");
    write_captures(dir, with_error);
    // Flags that change the outputs (the fundamental, the plots) must reach the gather.
    const std::string settings = " --config " + q(dir.file("limits.toml")) + " --f0 1200 --plots failed --harmonics 9";
    const auto single = run_cli("batch " + q(dir.file("caps")) + settings + " --report " + q(dir.file("single")) + " -q");
    for (int k = 1; k <= 2; ++k) {
      const auto shard = run_cli("batch " + q(dir.file("caps")) + settings + " --shard " + std::to_string(k) +
                                 "/2 --report " + q(dir.file("shard" + std::to_string(k))) + " -q");
      CHECK(shard.exit_code >= 0);
      CHECK(shard.exit_code <= 2);
    }
    const auto g = run_cli("gather " + q(dir.file("shard1")) + " " + q(dir.file("shard2")) + " --report " +
                           q(dir.file("all")));
    CAPTURE(g.err);
    CHECK(g.exit_code == (with_error ? 2 : 1));
    CHECK(g.exit_code == single.exit_code);
    CHECK(g.out.ends_with(single.out));  // the totals line
    CHECK(g.out.starts_with("gathered 2 shards of run pf-"));
    CHECK(g.err.empty());
    CHECK(outputs(dir.path / "all") == outputs(dir.path / "single"));
  }
}

TEST_CASE("cli gather: a missing shard is exit 2 naming it and its captures; nothing is written") {
  TempDir dir("cli_gather_missing");
  write_captures(dir, false);
  const std::string run = "batch " + q(dir.file("caps")) + " --config " + q(dir.file("limits.toml")) + " -q";
  run_cli(run + " --shard 1/2 --report " + q(dir.file("s1")));
  const auto g = run_cli("gather " + q(dir.file("s1")) + " " + q(dir.file("s2")) + " --report " + q(dir.file("all")));
  CHECK(g.exit_code == 2);
  CHECK(g.out.empty());
  CHECK(g.err.find("periodfit: warning: " + dir.file("s2") + " does not exist: its shard never ran\n") != std::string::npos);
  CHECK(g.err.find("periodfit: warning: shard 2/2 is missing; it holds ") != std::string::npos);
  CHECK(g.err.ends_with("periodfit: error: the run is incomplete (2 problems above); nothing was written; run the "
                        "shards named and gather again\n"));
  CHECK_FALSE(fs::exists(dir.path / "all"));
  run_cli(run + " --shard 2/2 --report " + q(dir.file("s2")));
  const auto done = run_cli("gather " + q(dir.file("s1")) + " " + q(dir.file("s2")) + " --report " + q(dir.file("all")));
  CHECK(done.exit_code == 1);
}

TEST_CASE("cli gather: shards made with different settings are refused in one line") {
  TempDir dir("cli_gather_settings");
  write_captures(dir, false);
  const std::string run = "batch " + q(dir.file("caps")) + " --config " + q(dir.file("limits.toml")) + " -q";
  run_cli(run + " --shard 1/2 --report " + q(dir.file("s1")));
  run_cli(run + " --plots none --shard 2/2 --report " + q(dir.file("s2")));
  const auto g = run_cli("gather " + q(dir.file("s1")) + " " + q(dir.file("s2")) + " --report " + q(dir.file("all")));
  CHECK(g.exit_code == 2);
  CHECK(std::count(g.err.begin(), g.err.end(), '\n') == 1);
  CHECK(g.err.starts_with("periodfit: error: " + dir.file("s2") + "/shard.json: made with settings (config hash) "));
  CHECK(g.err.find("gather only the shards of one run") != std::string::npos);
  // --run-id belongs to sharded runs only.
  const auto id = run_cli(run + " --run-id x --report " + q(dir.file("plain")));
  CHECK(id.exit_code == 2);
  CHECK(id.err == "periodfit: error: invalid option: --run-id = x (only with --shard)\n");
  const auto bad = run_cli(run + " --shard 3/2 --report " + q(dir.file("bad")));
  CHECK(bad.exit_code == 2);
  CHECK(bad.err.find("--shard") != std::string::npos);
}
