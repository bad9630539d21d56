// The results database from the command line: batch --db, import, production; and the fault
// cases a production line meets — a database that is down, a run killed with SIGKILL — each
// checked for nothing lost and nothing doubled (docs/results-db.md).
#include <doctest/doctest.h>
#include <fcntl.h>
#include <signal.h>
#include <sys/wait.h>
#include <unistd.h>

#include <chrono>
#include <filesystem>
#include <nlohmann/json.hpp>
#include <thread>

#include "batch_fixture.hpp"
#include "store/database.hpp"
#include "store_support.hpp"
#include "support/cli_runner.hpp"
#include "support/hostile_inputs.hpp"

using periodfit::test::run_cli;
using periodfit::test::TempDir;
using periodfit::test::write_text;
namespace store = periodfit::store;

namespace {

// Analyze-mode captures named board-NNNN_lot-L7.csv whose THD steps with the index (a3 = 0.05 …),
// and a config that takes serial and lot from the name and the station from the config.
std::string make_line(const TempDir& dir, int boards) {
  std::filesystem::create_directories(dir.path / "in");
  for (int i = 0; i < boards; ++i) {
    periodfit::test::SineCapture c;
    c.a3_v = 0.05 + 0.001 * i;  // THD 5 %, 5.1 %, …: every capture differs (its bytes are its identity)
    char name[64];
    std::snprintf(name, sizeof name, "in/board-%04d_lot-L7.csv", 400 + i);
    periodfit::test::write_sine_csv(dir.file(name), c);
  }
  write_text(dir.file("line.toml"),
             "[identity]\nname_pattern = 'board-([0-9]+)_lot-([A-Z0-9]+)'\nname_fields = [\"serial\", \"lot\"]\n"
             "station = \"ST-4\"\n\n[[limit]]\nresult = \"thd\"\nmax = \"8 %\"\n");
  return "'" + dir.file("in") + "' --config '" + dir.file("line.toml") + "'";
}

long long count(const std::string& db, const std::string& sql) {
  auto c = store::open_database(db);
  return periodfit::test::count_of(*c, sql);
}

}  // namespace

TEST_CASE("batch --db: records every capture with its results, verdicts and identity; a re-run adds nothing") {
  TempDir dir("cli_store_rec");
  const std::string inputs = make_line(dir, 6);
  const std::string db = dir.file("line.sqlite");
  const auto first = run_cli("batch " + inputs + " --report '" + dir.file("out") + "' --db '" + db + "' --operator 'A. Tester' -q");
  CHECK(first.exit_code == 0);
  CHECK(first.out == "6 pass, 0 fail, 0 error\nrecorded in " + db + ": 6 new, 0 already recorded\n");
  CHECK(count(db, "SELECT COUNT(*) FROM capture WHERE lot = 'L7' AND station = 'ST-4' AND operator = 'A. Tester'") == 6);
  CHECK(count(db, "SELECT COUNT(*) FROM capture WHERE serial = '0403' AND content_hash IS NOT NULL AND size_bytes > 0") == 1);
  CHECK(count(db, "SELECT COUNT(*) FROM verdict WHERE limit_key = 'thd' AND margin > 0") == 6);
  // Every harmonic and metric with its u and interval, not only the limited ones.
  CHECK(count(db, "SELECT COUNT(*) FROM result WHERE name = 'amplitude[n=3]' AND u IS NOT NULL AND lo95 <= value") == 6);
  CHECK(count(db, "SELECT COUNT(*) FROM result WHERE name = 'thd' AND value > 0.04") == 6);
  CHECK(count(db, "SELECT COUNT(*) FROM run WHERE status = 'complete' AND config_text LIKE '%name_pattern%'") == 1);
  // The identity is in the per-file JSON and in the report.
  const std::string html = periodfit::test::slurp(dir.path / "out" / "report.html");
  CHECK(html.find("0403") != std::string::npos);
  CHECK(html.find("ST-4") != std::string::npos);
  const auto second = run_cli("batch " + inputs + " --report '" + dir.file("out") + "' --db '" + db + "' -q");
  CHECK(second.out == "6 pass, 0 fail, 0 error\nrecorded in " + db + ": 0 new, 6 already recorded\n");
  CHECK(count(db, "SELECT COUNT(*) FROM capture") == 6);
  CHECK(count(db, "SELECT COUNT(*) FROM run_capture") == 12);
  // --db alone: results.sqlite inside the report folder, published with it.
  const auto inside = run_cli("batch " + inputs + " --report '" + dir.file("out2") + "' --db -q");
  CHECK(inside.exit_code == 0);
  CHECK(count(dir.file("out2/results.sqlite"), "SELECT COUNT(*) FROM capture") == 6);
}

TEST_CASE("batch --db: a database that cannot be reached leaves a complete report, one error line and exit 2; import catches up") {
  TempDir dir("cli_store_down");
  const std::string inputs = make_line(dir, 4);
  const std::string down = "postgresql:///line?host=" + dir.file("no-server") + "&connect_timeout=1";
  const auto r = run_cli("batch " + inputs + " --report '" + dir.file("out") + "' --db '" + down + "' -q");
  CHECK(r.exit_code == 2);
  CHECK(r.out == "4 pass, 0 fail, 0 error\n");
  CHECK(r.err.rfind("periodfit: error: results database ", 0) == 0);
  CHECK(r.err.find("periodfit import") != std::string::npos);
  CHECK(std::count(r.err.begin(), r.err.end(), '\n') == 1);
  REQUIRE(std::filesystem::exists(dir.path / "out" / "summary.json"));
  // Later, into a database that works: every capture, and a live run afterwards finds them all.
  const std::string db = dir.file("line.sqlite");
  const auto imported = run_cli("import '" + dir.file("out") + "' --db '" + db + "'");
  CHECK(imported.exit_code == 0);
  CHECK(imported.out == dir.file("out") + ": 4 captures, 4 new, 0 already recorded\n");
  CHECK(count(db, "SELECT COUNT(*) FROM verdict") == 4);
  CHECK(count(db, "SELECT COUNT(*) FROM capture WHERE serial = '0401' AND lot = 'L7'") == 1);
  const auto live = run_cli("batch " + inputs + " --report '" + dir.file("out") + "' --db '" + db + "' -q");
  CHECK(live.out == "4 pass, 0 fail, 0 error\nrecorded in " + db + ": 0 new, 4 already recorded\n");
  CHECK(count(db, "SELECT COUNT(*) FROM capture") == 4);
}

TEST_CASE("batch --db: a run killed with SIGKILL leaves whole captures and the run incomplete; a re-run completes it without doubles") {
  TempDir dir("cli_store_kill");
  constexpr int kBoards = 120;
  make_line(dir, kBoards);
  const std::string db = dir.file("line.sqlite");
  const std::string report = dir.file("out");
  const pid_t pid = ::fork();
  REQUIRE(pid >= 0);
  if (pid == 0) {
    const int null = ::open("/dev/null", O_WRONLY);
    ::dup2(null, 1);
    ::dup2(null, 2);
    const std::string in = dir.file("in"), config = dir.file("line.toml");
    ::execl(PERIODFIT_EXE, "periodfit", "batch", in.c_str(), "--config", config.c_str(), "--report", report.c_str(),
            "--db", db.c_str(), "--jobs", "1", "-q", static_cast<char*>(nullptr));
    ::_exit(127);
  }
  // Kill it once a few captures are in: mid-run, between or inside a capture's transaction.
  long long seen = 0;
  const auto deadline = std::chrono::steady_clock::now() + std::chrono::seconds(20);
  while (seen < 3 && std::chrono::steady_clock::now() < deadline) {
    std::this_thread::sleep_for(std::chrono::milliseconds(2));
    try {
      seen = count(db, "SELECT COUNT(*) FROM capture");
    } catch (const std::exception&) {
      // not created or not migrated yet
    }
  }
  ::kill(pid, SIGKILL);
  int status = 0;
  ::waitpid(pid, &status, 0);
  REQUIRE_MESSAGE(WIFSIGNALED(status), "the run ended before it could be killed: make it longer");
  const long long kept = count(db, "SELECT COUNT(*) FROM capture");
  CHECK(kept >= 3);
  CHECK(kept < kBoards);
  // Whole captures only: each has its verdict, its flags' rows as written and its results.
  CHECK(count(db, "SELECT COUNT(*) FROM capture c WHERE (SELECT COUNT(*) FROM verdict v WHERE v.capture_id = c.id) <> 1") == 0);
  CHECK(count(db, "SELECT COUNT(*) FROM capture c WHERE NOT EXISTS (SELECT 1 FROM result r WHERE r.capture_id = c.id)") == 0);
  CHECK(count(db, "SELECT COUNT(*) FROM run WHERE status = 'incomplete' AND ended_at IS NULL") == 1);
  CHECK(!std::filesystem::exists(report));  // the report folder is published whole or not at all
  const auto rerun = run_cli("batch '" + dir.file("in") + "' --config '" + dir.file("line.toml") + "' --report '" + report +
                             "' --db '" + db + "' -q");
  CHECK(rerun.out.find("recorded in " + db + ": " + std::to_string(kBoards - kept) + " new, " + std::to_string(kept) +
                       " already recorded\n") != std::string::npos);
  CHECK(count(db, "SELECT COUNT(*) FROM capture") == kBoards);
  CHECK(count(db, "SELECT COUNT(*) FROM verdict") == kBoards);
}

TEST_CASE("production: yield, capability and control chart as text, CSV, JSON and HTML from recorded runs") {
  TempDir dir("cli_store_prod");
  const std::string inputs = make_line(dir, 12);
  const std::string db = dir.file("line.sqlite");
  // One worker, so the tests are recorded in board order and the THD rise is a time trend.
  REQUIRE(run_cli("batch " + inputs + " --report '" + dir.file("out") + "' --db '" + db + "' -j 1 -q").exit_code == 0);
  const auto text = run_cli("production --db '" + db + "' --lot L7 --board 0411");
  CHECK(text.exit_code == 0);
  // Boards 0400…0411 have THD 5.0 … 6.1 %: all pass (limit 8 %).
  CHECK(text.out.find("tests: 12 (12 pass, 0 fail, 0 error), yield 100.0 %") != std::string::npos);
  CHECK(text.out.find("board 0411: 1 tests") != std::string::npos);
  const auto js = run_cli("production --db '" + db + "' --format json");
  const auto j = nlohmann::json::parse(js.out);
  CHECK(j["tests"]["total"] == 12);
  REQUIRE(j["limits"].size() == 1);
  CHECK(j["limits"][0]["key"] == "thd");
  CHECK(j["limits"][0]["capability"]["n"] == 12);
  CHECK(j["limits"][0]["chart"]["points"].size() == 12);
  // A steady rise of THD over the boards: rule 3 (six in a row increasing) must fire.
  bool rule3 = false;
  for (const auto& s : j["limits"][0]["chart"]["signals"]) rule3 = rule3 || s["rule"] == 3;
  CHECK(rule3);
  const auto csv = run_cli("production --db '" + db + "' --format csv");
  CHECK(csv.out.rfind("limit,allowed,lsl,usl,tests,failed,n,mean,sd,", 0) == 0);
  const auto html = run_cli("production --db '" + db + "' --format html --out '" + dir.file("p.html") + "'");
  CHECK(html.exit_code == 0);
  CHECK(html.out.empty());
  const std::string page = periodfit::test::slurp(dir.path / "p.html");
  CHECK(page.find("<svg") != std::string::npos);
  CHECK(page.find("Bissell") != std::string::npos);
  CHECK(page.rfind("</html>\n") == page.size() - 8);
  const auto empty = run_cli("production --db '" + dir.file("none.sqlite") + "'");
  CHECK(empty.exit_code == 2);
  CHECK(empty.err.find("holds no periodfit results") != std::string::npos);
}

TEST_CASE("import: a folder that is not a batch report is refused and nothing is recorded") {
  TempDir dir("cli_store_import_bad");
  std::filesystem::create_directories(dir.path / "fake");
  write_text(dir.file("fake/summary.json"), "{\"format\": \"something else\"}");
  const auto r = run_cli("import '" + dir.file("fake") + "' --db '" + dir.file("x.sqlite") + "'");
  CHECK(r.exit_code == 2);
  CHECK(r.err.find("not a periodfit batch summary") != std::string::npos);
  CHECK(!std::filesystem::exists(dir.file("x.sqlite")));
}

TEST_CASE("batch: an [identity] section that cannot work is refused at its line before any capture is read") {
  TempDir dir("cli_store_identity_bad");
  make_line(dir, 1);
  write_text(dir.file("bad.toml"), "[identity]\nname_pattern = 'board-([0-9]+)_lot-(.*)'\nname_fields = [\"serial\"]\n");
  const auto r = run_cli("batch '" + dir.file("in") + "' --config '" + dir.file("bad.toml") + "' --report '" +
                         dir.file("out") + "' --db '" + dir.file("x.sqlite") + "'");
  CHECK(r.exit_code == 2);
  CHECK(r.err.find("bad.toml:1:1: invalid option: name_pattern") != std::string::npos);
  CHECK(r.err.find("has 2 groups but name_fields names 1 fields") != std::string::npos);
  CHECK(!std::filesystem::exists(dir.path / "out"));
  CHECK(!std::filesystem::exists(dir.file("x.sqlite")));
}

TEST_CASE("batch --db: three processes recording the same captures into one SQLite file at once lose and double nothing") {
  TempDir dir("cli_store_procs");
  const std::string inputs = make_line(dir, 5);
  const std::string db = dir.file("line.sqlite");
  std::string script;
  for (int p = 0; p < 3; ++p)
    script += "\"$PF\" batch " + inputs + " --report '" + dir.file("out" + std::to_string(p)) + "' --db '" + db +
              "' -j 1 -q > '" + dir.file("log" + std::to_string(p)) + "' 2>&1 & ";
  script += "wait";
  const auto r = periodfit::test::run_shell(script);
  CHECK(r.exit_code == 0);
  long long added = 0;
  for (int p = 0; p < 3; ++p) {
    const std::string log = periodfit::test::slurp(dir.path / ("log" + std::to_string(p)));
    CAPTURE(log);
    CHECK(log.find("5 pass, 0 fail, 0 error\nrecorded in ") == 0);
    const auto at = log.find(": ");
    added += at == std::string::npos ? 0 : std::stoll(log.substr(at + 2));
  }
  CHECK(added == 5);  // each capture was new to exactly one of the three
  CHECK(count(db, "SELECT COUNT(*) FROM capture") == 5);
  CHECK(count(db, "SELECT COUNT(*) FROM verdict") == 5);
  CHECK(count(db, "SELECT COUNT(*) FROM run_capture") == 15);
  CHECK(count(db, "SELECT COUNT(*) FROM run WHERE status = 'complete'") == 3);
}

TEST_CASE("batch --shard --db: the shards of one run record into one database under their shared run id; nothing doubled") {
  // docs/scale-out.md, "A shared database": every shard derives the same run id alone, records
  // its captures in its own run row carrying that id and K/N, and a shard run twice adds no
  // capture (the identity is the capture's content under the same version and config).
  TempDir dir("cli_store_shards");
  const std::string inputs = make_line(dir, 7);
  const std::string db = dir.file("line.sqlite");
  for (int k = 1; k <= 3; ++k) {
    const auto r = run_cli("batch " + inputs + " --shard " + std::to_string(k) + "/3 --report '" +
                           dir.file("s" + std::to_string(k)) + "' --db '" + db + "' -q");
    CHECK_MESSAGE(r.exit_code == 0, r.err);
  }
  CHECK(count(db, "SELECT COUNT(*) FROM capture") == 7);
  CHECK(count(db, "SELECT COUNT(*) FROM run WHERE shard_count = 3 AND status = 'complete'") == 3);
  CHECK(count(db, "SELECT COUNT(DISTINCT batch_run_id) FROM run") == 1);
  CHECK(count(db, "SELECT COUNT(DISTINCT shard_index) FROM run") == 3);
  // Shard 2 again (a re-submitted array task): a fourth run row, no new capture.
  const auto again = run_cli("batch " + inputs + " --shard 2/3 --report '" + dir.file("s2") + "' --db '" + db + "' -q");
  CHECK(again.exit_code == 0);
  CHECK(again.out.find(": 0 new,") != std::string::npos);
  CHECK(count(db, "SELECT COUNT(*) FROM capture") == 7);
  CHECK(count(db, "SELECT COUNT(*) FROM run") == 4);
  // The shards still gather into one report folder.
  const auto g = run_cli("gather '" + dir.file("s1") + "' '" + dir.file("s2") + "' '" + dir.file("s3") +
                         "' --report '" + dir.file("all") + "'");
  CHECK_MESSAGE(g.exit_code == 0, g.err);
}
