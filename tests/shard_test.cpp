// Sharded batch runs and their gather (batch/shard.hpp, docs/scale-out.md): the gathered report
// folder is byte-identical to the single run over the same captures, and every way a run can be
// incomplete (a shard missing, killed, run twice, out of date) is named with its captures.
#include <doctest/doctest.h>
#include <signal.h>
#include <sys/wait.h>
#include <unistd.h>

#include <algorithm>
#include <chrono>
#include <filesystem>
#include <string>
#include <thread>
#include <vector>

#include "batch/config.hpp"
#include "batch/shard.hpp"
#include "batch_fixture.hpp"
#include "core/error.hpp"
#include "support/cli_runner.hpp"

using namespace periodfit;
using namespace periodfit::batch;
namespace fs = std::filesystem;
using periodfit::test::slurp;

namespace {

// An analyze-mode limit set: THD ≤ 8 % (IEEE Std 1241 THD of a two-line signal is a3/a1, so
// captures with a3 = 0.02 … 0.12 V on a1 = 1 V pass below 8 % and fail above).
constexpr const char* kConfig = "[[limit]]\nresult = \"thd\"\nmax = \"8 %\"\n";

struct Archive {
  periodfit::test::TempDir dir{"shard_archive"};
  fs::path captures = dir.path / "captures";
  explicit Archive(int n = 9) {
    fs::create_directories(captures / "line2");
    for (int i = 0; i < n; ++i) add("cap_" + std::to_string(i) + ".csv", 0.02 + 0.0125 * i);
    // A capture in a sub-folder (recursive selection) and one that cannot be read: ERROR.
    add("line2/cap_x.csv", 0.05);
    test::write_text((captures / "broken.csv").string(), "time (s),v (V)\n0,1\n0.1,x\n");
  }
  void add(const std::string& name, double a3) const {
    test::SineCapture c;
    c.a3_v = a3;
    test::write_sine_csv((captures / name).string(), c);
  }
  BatchOptions options(const std::string& report) const {
    BatchOptions o;
    o.inputs = {captures.string()};
    o.report_dir = (dir.path / report).string();
    o.jobs = 1;
    o.config = parse_batch_config(kConfig, "limits.toml");
    o.config.files.recursive = true;
    o.settings = {"limits.toml", kConfig, {"--recursive"}};
    return o;
  }
  std::string run_shard(int k, int n, const std::string& name = "") const {
    BatchOptions o = options(name.empty() ? "shards/" + shard_folder_name({k, n}) : name);
    o.shard = {k, n};
    run_batch(o);
    return o.report_dir;
  }
  GatherResult gather(const std::vector<std::string>& shards, const std::string& report = "gathered") const {
    GatherOptions g;
    g.shards = shards;
    g.report_dir = (dir.path / report).string();
    g.rebuild_config = [](const SettingsRecord& s) {
      BatchConfig c = parse_batch_config(s.config_text, s.config_source);
      c.files.recursive = true;  // the one recorded setting word
      return c;
    };
    return gather_shards(g);
  }
};

// The outputs of a report folder, relative path → bytes; gather.json is the gather's own record.
std::vector<std::pair<std::string, std::string>> outputs(const fs::path& folder) {
  return periodfit::test::folder_files(folder, "gather.json");
}

bool mentions(const std::vector<std::string>& lines, const std::string& text) {
  return std::any_of(lines.begin(), lines.end(), [&](const std::string& l) { return l.find(text) != std::string::npos; });
}

}  // namespace

TEST_CASE("shard: the partition is FNV-1a 64 of the relative path, mod N, plus one") {
  // FNV-1a 64 test vectors of the reference implementation (Noll, "FNV hash" page, test suite):
  // "" → cbf29ce484222325, "a" → af63dc4c8601ec8c, "foobar" → 85944171f73967e8.
  CHECK(hex64(fnv1a_64("")) == "cbf29ce484222325");
  CHECK(hex64(fnv1a_64("a")) == "af63dc4c8601ec8c");
  CHECK(hex64(fnv1a_64("foobar")) == "85944171f73967e8");
  CHECK(shard_of("foobar", 7) == static_cast<int>(0x85944171f73967e8ull % 7) + 1);
  // The key does not depend on where the archive is mounted, and adding captures moves none.
  CHECK(partition_key("/mnt/a/archive/line2/x.csv", {"/mnt/a/archive"}) == "line2/x.csv");
  CHECK(partition_key("archive/line2/x.csv", {"archive/"}) == "line2/x.csv");
  CHECK(partition_key("single.csv", {"single.csv"}) == "single.csv");
  CHECK(parse_shard("3/8").index == 3);
  CHECK(parse_shard("3/8").count == 8);
  for (const char* bad : {"0/4", "5/4", "4", "a/b", "1/0", "-1/4", "1/4x"})
    CHECK_THROWS_AS(parse_shard(bad), OptionError);
}

TEST_CASE("shard: gathered shards are byte-identical to the single run, empty shards included") {
  Archive a;
  const BatchResult single = run_batch(a.options("single"));
  for (const int n : {1, 3, 13}) {  // 13 shards over 11 captures: some hold none
    std::vector<std::string> shards;
    std::size_t held = 0;
    for (int k = 1; k <= n; ++k) {
      shards.push_back(a.run_shard(k, n, "n" + std::to_string(n) + "/s" + std::to_string(k)));
      const std::string csv = slurp(fs::path(shards.back()) / "summary.csv");
      held += static_cast<std::size_t>(std::count(csv.begin(), csv.end(), '\n')) - 1;  // minus the header
    }
    CHECK(held == single.files.size());  // each capture in exactly one shard
    const GatherResult g = a.gather(shards, "gathered" + std::to_string(n));
    CAPTURE(n);
    REQUIRE(g.complete);
    CHECK(g.problems.empty());
    CHECK(g.batch.files.size() == single.files.size());
    CHECK(batch_exit_code(g.batch) == batch_exit_code(single));
    CHECK(outputs(a.dir.path / ("gathered" + std::to_string(n))) == outputs(a.dir.path / "single"));
    CHECK(fs::exists(a.dir.path / ("gathered" + std::to_string(n)) / "gather.json"));
  }
}

TEST_CASE("shard: a shard that never ran is named with its captures, and running it completes the run") {
  Archive a;
  run_batch(a.options("single"));
  const std::string s1 = a.run_shard(1, 3), s3 = a.run_shard(3, 3);
  const std::string s2 = (a.dir.path / "shards" / shard_folder_name({2, 3})).string();
  const GatherResult g = a.gather({s1, s2, s3});
  CHECK_FALSE(g.complete);
  CHECK(mentions(g.problems, s2 + " does not exist: its shard never ran"));
  // The captures of shard 2 come from the listing the other shards recorded.
  const std::vector<std::string> all = find_captures({a.captures.string()}, {{}, true});
  std::size_t in_two = 0;
  for (const auto& p : all)
    if (shard_of(partition_key(p, {a.captures.string()}), 3) == 2) {
      ++in_two;
      CHECK(mentions(g.problems, p));
    }
  CHECK(mentions(g.problems, "shard 2/3 is missing; it holds " + std::to_string(in_two) + " capture"));
  CHECK_FALSE(fs::exists(a.dir.path / "gathered"));  // nothing written

  a.run_shard(2, 3);
  const GatherResult done = a.gather({s1, s2, s3});
  REQUIRE(done.complete);
  CHECK(outputs(a.dir.path / "gathered") == outputs(a.dir.path / "single"));
}

TEST_CASE("shard: a shard killed mid-way is reported as started and not finished; its re-run completes the run") {
  Archive a;
  run_batch(a.options("single"));
  const std::string s1 = a.run_shard(1, 2);
  const std::string s2 = (a.dir.path / "shards" / shard_folder_name({2, 2})).string();
  const pid_t child = ::fork();
  REQUIRE(child >= 0);
  if (child == 0) {
    // The progress callback runs on the calling thread before the folder is published; holding
    // it there keeps the shard "mid-way" until the parent kills it.
    BatchOptions o = a.options("shards/" + shard_folder_name({2, 2}));
    o.shard = {2, 2};
    o.progress = [](const Progress&) {
      for (;;) ::pause();
    };
    try {
      run_batch(o);
    } catch (...) {
    }
    ::_exit(0);
  }
  // Wait (≤ 10 s) for the shard's staging folder: the shard is then between start and publish.
  bool started = false;
  for (int i = 0; i < 1000 && !started; ++i) {
    for (const auto& e : fs::directory_iterator(a.dir.path / "shards"))
      if (e.path().filename().string().starts_with("." + shard_folder_name({2, 2}) + ".run-")) started = true;
    if (!started) std::this_thread::sleep_for(std::chrono::milliseconds(10));
  }
  CHECK(started);
  ::kill(child, SIGKILL);
  int status = 0;
  ::waitpid(child, &status, 0);
  CHECK(WIFSIGNALED(status));
  const GatherResult g = a.gather({s1, s2});
  CHECK_FALSE(g.complete);
  CHECK(mentions(g.problems, s2 + " does not exist: its shard started (pid " + std::to_string(child) +
                                 ") but did not finish"));
  CHECK(mentions(g.problems, "shard 2/2 is missing"));

  a.run_shard(2, 2);
  const GatherResult done = a.gather({s1, s2});
  REQUIRE(done.complete);
  CHECK(outputs(a.dir.path / "gathered") == outputs(a.dir.path / "single"));
}

TEST_CASE("shard: a shard run twice counts its captures once, and two differing copies are refused") {
  Archive a;
  const BatchResult single = run_batch(a.options("single"));
  const std::string s1 = a.run_shard(1, 2), s2 = a.run_shard(2, 2);
  const std::string again = a.run_shard(2, 2, "shards/again");
  const GatherResult twice = a.gather({s1, s2, again});
  REQUIRE(twice.complete);
  CHECK(mentions(twice.warnings, "shard 2/2 was run twice (" + s2 + ", " + again + ") with identical results; " +
                                     again + " is not counted"));
  CHECK(twice.batch.files.size() == single.files.size());
  CHECK(outputs(a.dir.path / "gathered") == outputs(a.dir.path / "single"));

  // A capture changed between the two runs of shard 2: the copies differ, and neither is taken.
  for (const auto& p : find_captures({a.captures.string()}, {{}, true}))
    if (shard_of(partition_key(p, {a.captures.string()}), 2) == 2 && p.ends_with(".csv") &&
        p.find("broken") == std::string::npos) {
      test::SineCapture c;
      c.a3_v = 0.2;
      test::write_sine_csv(p, c);
      break;
    }
  const std::string changed = a.run_shard(2, 2, "shards/changed");
  const GatherResult differ = a.gather({s1, s2, changed}, "gathered2");
  CHECK_FALSE(differ.complete);
  CHECK(mentions(differ.problems, "shard 2/2 was run twice with different results (" + s2));
  CHECK_FALSE(fs::exists(a.dir.path / "gathered2"));
}

TEST_CASE("shard: a capture added after its shard ran names that shard to run again") {
  Archive a;
  const std::string s1 = a.run_shard(1, 2), s2 = a.run_shard(2, 2);
  // A new capture that falls into shard 1; shard 2 is re-run after it was added, so its
  // listing (the union) carries the capture that shard 1 never saw.
  std::string name;
  for (int i = 100; name.empty(); ++i)
    if (shard_of("new_" + std::to_string(i) + ".csv", 2) == 1) name = "new_" + std::to_string(i) + ".csv";
  a.add(name, 0.03);
  a.run_shard(2, 2);
  const GatherResult g = a.gather({s1, s2});
  CHECK_FALSE(g.complete);
  CHECK(mentions(g.problems, "shard 1/2 (" + s1 + ") ran before 1 capture of its share existed: " +
                                 (a.captures / name).string() + "; run shard 1/2 again"));
  a.run_shard(1, 2);
  run_batch(a.options("single"));
  REQUIRE(a.gather({s1, s2}).complete);
  CHECK(outputs(a.dir.path / "gathered") == outputs(a.dir.path / "single"));
}

TEST_CASE("shard: shards of different settings, partitions or runs are refused in one line") {
  Archive a;
  const std::string s1 = a.run_shard(1, 2);
  BatchOptions other = a.options("shards/other");
  other.shard = {2, 2};
  other.settings.settings_words.push_back("--f0");
  other.settings.settings_words.push_back("1200");
  run_batch(other);
  const std::string refusal = "made with settings (config hash) " + other.settings.hash() + ", but " + s1 +
                              "/shard.json with " + a.options("x").settings.hash() + "; gather only the shards of one run";
  CHECK_THROWS_WITH_AS(a.gather({s1, other.report_dir}), doctest::Contains(refusal.c_str()), InputError);
  const std::string three = a.run_shard(2, 3, "shards/three");
  CHECK_THROWS_WITH_AS(a.gather({s1, three}), doctest::Contains("made with a partition into 3 shards, but"), InputError);
  BatchOptions named = a.options("shards/named");
  named.shard = {2, 2};
  named.run_id = "archive-2026";
  run_batch(named);
  CHECK_THROWS_WITH_AS(a.gather({s1, named.report_dir}), doctest::Contains("made with run id archive-2026, but"),
                       InputError);
  // The gathered folder cannot be one of the shards (it would replace the shard's record).
  CHECK_THROWS_AS(a.gather({s1, a.run_shard(2, 2)}, "shards/" + shard_folder_name({1, 2})), OptionError);
}

TEST_CASE("shard: an edited, truncated or foreign shard record is refused naming the file") {
  Archive a;
  const std::string s1 = a.run_shard(1, 2), s2 = a.run_shard(2, 2);
  const std::string record = (fs::path(s2) / "shard.json").string();
  const std::string original = slurp(record);
  const auto gather_with = [&](const std::string& text) {
    test::write_text(record, text);
    return a.gather({s1, s2});
  };
  // Settings changed by hand no longer match their hash.
  std::string edited = original;
  edited.replace(edited.find("8 %"), 3, "9 %");
  CHECK_THROWS_WITH_AS(gather_with(edited), doctest::Contains("the settings hash does not match the recorded settings"),
                       InputError);
  // A per-file JSON path that leaves the shard's files/ folder is not followed.
  std::string escaped = original;
  const auto at = escaped.find("\"json\": \"files/");
  REQUIRE(at != std::string::npos);
  escaped.replace(at, 16, "\"json\": \"files/../../");
  CHECK_THROWS_WITH_AS(gather_with(escaped), doctest::Contains("is not files/<name>.json"), InputError);
  CHECK_THROWS_WITH_AS(gather_with(original.substr(0, original.size() / 2)), doctest::Contains("malformed shard record"),
                       InputError);
  CHECK_THROWS_WITH_AS(gather_with("{\"format\": \"something else\"}"), doctest::Contains("not a shard record"),
                       InputError);
  test::write_text(record, original);
  CHECK(a.gather({s1, s2}).complete);
}
