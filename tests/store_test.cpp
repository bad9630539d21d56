// The results database (src/store): content hashes, capability statistics and control charts
// against published formulas and constants, schema migration, and the recorder's promises —
// nothing lost, nothing doubled — on SQLite always and on a real PostgreSQL server when
// tools/pg-cluster.sh runs one (PERIODFIT_TEST_PG_URL).
#include <doctest/doctest.h>

#include <cmath>
#include <filesystem>
#include <random>
#include <sstream>
#include <thread>

#include "store/clock.hpp"
#include "store/content_hash.hpp"
#include "store/identity.hpp"
#include "core/error.hpp"
#include "store/database.hpp"
#include "store/production.hpp"
#include "store/production_stats.hpp"
#include "store/recorder.hpp"
#include "store/schema.hpp"
#include "store_support.hpp"
#include "support/cli_runner.hpp"
#include "support/hostile_inputs.hpp"
#include "support/python_ref.hpp"
#include "support/code_table.hpp"

using namespace periodfit;
using periodfit::test::TempDir;

namespace {

// Both sides compute the same closed forms in double precision; Boost's and scipy's χ² and
// normal quantiles agree to ~1e-13 relative.
constexpr double kReferenceTol = 1e-9;

std::vector<double> seeded_values(std::size_t n, double mean, double sd, unsigned seed) {
  std::mt19937 rng(seed);
  std::normal_distribution<double> d(mean, sd);
  std::vector<double> v(n);
  for (auto& x : v) x = d(rng);
  return v;
}

std::vector<int> rule_indices(const store::ControlChart& c, int rule) {
  std::vector<int> out;
  for (const auto& s : c.signals)
    if (s.rule == rule) out.push_back(static_cast<int>(s.index));
  return out;
}

// The backends the recorder cases run on: SQLite always, PostgreSQL when a server is given.
std::vector<std::string> database_targets(const TempDir& dir, const std::string& tag) {
  std::vector<std::string> targets{dir.file(tag + ".sqlite")};
  if (const auto url = test::pg_test_url())
    targets.push_back(test::pg_fresh_schema_url(*url, tag));
  else
    MESSAGE("PERIODFIT_TEST_PG_URL not set (tools/pg-cluster.sh): the PostgreSQL half of this case is SKIPPED");
  return targets;
}

store::RunInfo run_info(const std::string& config = "[analysis]\nmode = \"frf\"\n") {
  store::RunInfo info;
  info.mode = "frf";
  info.config_text = config;
  info.station = "ST-9";
  return info;
}

}  // namespace

TEST_CASE("content hash: SHA-256 of the FIPS 180-4 example messages and of a file as hashlib sees it") {
  // NIST CSRC "Examples with intermediate values", SHA-256 (FIPS 180-4): one-block "abc",
  // two-block message, and the empty message (from memory; also checked by hashlib below).
  CHECK(store::sha256_hex("abc") == "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad");
  CHECK(store::sha256_hex("abcdbcdecdefdefgefghfghighijhijkijkljklmklmnlmnomnopnopq") ==
        "248d6a61d20638b8e5c026930c3e6039a33ce45964ff2167f6ecedd419db06c1");
  CHECK(store::sha256_hex("") == "e3b0c44298fc1c149afbf4c8996fb92427ae41e4649b934ca495991b7852b855");
  TempDir dir("sha");
  std::string bytes;
  std::mt19937 rng(7);
  for (int i = 0; i < 200003; ++i) bytes += static_cast<char>(rng() & 0xFF);  // spans many 64 kB reads
  test::write_text(dir.file("blob"), bytes);
  const store::FileDigest d = store::sha256_file(dir.file("blob"));
  CHECK(d.size == bytes.size());
  const test::CliRun py = test::run_shell(std::string(test::kPython) +
                                          " -c \"import hashlib,sys; print(hashlib.sha256(open(sys.argv[1],'rb').read()).hexdigest())\" '" +
                                          dir.file("blob") + "'");
  if (py.exit_code != 0) {
    MESSAGE("python3 unavailable: the hashlib cross-check is SKIPPED");
    return;
  }
  CHECK(d.sha256 + "\n" == py.out);
}

TEST_CASE("production stats: Cp and Cpk with their confidence intervals match the NIST/SEMATECH formulas in scipy") {
  const std::vector<double> x = seeded_values(30, 0.508, 0.012, 3);
  const double lsl = 0.45, usl = 0.55;
  for (const double confidence : {0.95, 0.90}) {
    store::CapabilityOptions o;
    o.confidence = confidence;
    const store::Capability c = store::capability(x, lsl, usl, o);
    REQUIRE(c.status == store::StatisticStatus::ok);
    std::ostringstream args;
    args.precision(17);
    args << lsl << ' ' << usl << ' ' << confidence;
    for (double v : x) args << ' ' << v;
    const auto out = test::run_python("capability_ref.py", args.str());
    if (!out) {
      MESSAGE("python3 with numpy/scipy unavailable: the capability reference check is SKIPPED");
      return;
    }
    std::istringstream in(*out);
    double ref[6];
    for (double& r : ref) in >> r;
    const double got[6] = {c.cp, c.cp_lo, c.cp_hi, c.cpk, c.cpk_lo, c.cpk_hi};
    for (int i = 0; i < 6; ++i) {
      CAPTURE(i);
      CAPTURE(confidence);
      CHECK(got[i] == doctest::Approx(ref[i]).epsilon(kReferenceTol));
    }
  }
}

TEST_CASE("production stats: a one-sided limit has Cpk from its side only and no Cp; degenerate data say why") {
  const std::vector<double> x = {1.0, 2.0, 3.0, 4.0};  // mean 2.5, s = sqrt(5/3) (closed form)
  const store::Capability c = store::capability(x, -std::numeric_limits<double>::infinity(), 10.0);
  CHECK(std::isnan(c.cp));
  // NIST §6.1.6: Cpu = (USL − x̄)/(3s).
  CHECK(c.cpk == doctest::Approx((10.0 - 2.5) / (3 * std::sqrt(5.0 / 3.0))).epsilon(1e-14));
  CHECK(store::capability({1.0}, 0, 2).status == store::StatisticStatus::too_few_values);
  CHECK(std::isnan(store::capability({1.0}, 0, 2).cpk));
  CHECK(store::capability({1.0, 1.0, 1.0}, 0, 2).status == store::StatisticStatus::no_spread);
  CHECK(std::isnan(store::capability({1.0, 1.0, 1.0}, 0, 2).cpk));
}

TEST_CASE("control chart: limits are x-bar +- 2.66 MR-bar and MR UCL 3.267 MR-bar (d2 = 1.128, D4 = 3.267)") {
  // Moving ranges 2, 1, 2, 1: MR̄ = 1.5; x̄ = 2.6 (hand computation).
  const store::ControlChart c = store::individuals_chart({1, 3, 2, 4, 3});
  CHECK(c.centre == doctest::Approx(2.6).epsilon(1e-15));
  CHECK(c.mr_bar == doctest::Approx(1.5).epsilon(1e-15));
  CHECK(c.ucl == doctest::Approx(2.6 + 2.66 * 1.5).epsilon(1e-15));
  CHECK(c.lcl == doctest::Approx(2.6 - 2.66 * 1.5).epsilon(1e-15));
  CHECK(c.mr_ucl == doctest::Approx(3.267 * 1.5).epsilon(1e-15));
  CHECK(c.sigma == doctest::Approx(1.5 / 1.128).epsilon(1e-15));
  // E2 = 3/d2 (Montgomery §6.4): the published 2.66 is 3/1.128 rounded to 3 digits.
  CHECK(store::kE2 == doctest::Approx(3 / store::kD2).epsilon(0.005));
  CHECK(c.signals.empty());
  CHECK(store::individuals_chart({5.0}).status == store::StatisticStatus::too_few_values);
}

TEST_CASE("control chart: Nelson rules 1-4 each signal at the point that completes the pattern") {
  // Rule 1: a point beyond the limits after in-control noise.
  const auto r1 = store::individuals_chart({0.1, -0.2, 0.15, 0.05, -0.1, 0.2, -0.05, 0.0, 0.1, -0.15, 5.0});
  CHECK(rule_indices(r1, 1) == std::vector<int>{10});
  // Rule 2: nine in a row below, then nine above the centre line (x̄ = 0).
  std::vector<double> two(9, -1.0);
  two.insert(two.end(), 9, 1.0);
  CHECK(rule_indices(store::individuals_chart(two), 2) == std::vector<int>{8, 17});
  // Rule 3: six points 1, 2, … 6 in a row increasing, after a step down.
  CHECK(rule_indices(store::individuals_chart({3, 3, 1, 2, 3, 4, 5, 6}), 3) == std::vector<int>{7});
  // Rule 4: fourteen points alternating up and down (0, 1, 0, 1, …), then a fifteenth.
  std::vector<double> four;
  for (int i = 0; i < 15; ++i) four.push_back(i % 2);
  CHECK(rule_indices(store::individuals_chart(four), 4) == std::vector<int>{13, 14});
  // In-control values: no rule fires.
  CHECK(store::individuals_chart({0.3, -0.1, 0.2, 0.25, -0.3, 0.1, -0.05, 0.0}).signals.empty());
}

TEST_CASE("results db: a version-1 database is migrated forward with every row kept") {
  TempDir dir("migrate");
  for (const auto& target : database_targets(dir, "migrate")) {
    CAPTURE(target);
    {
      auto db = store::open_database(target);
      CHECK(store::migrate(*db, 1) == 0);
      // A version-1 run and capture, as that schema stored them.
      db->execute("INSERT INTO run (tool_version, mode, config_text, config_hash, host, origin, started_at, status)"
                  " VALUES ('0.1.0', 'frf', '', 'h', 'bench', 'batch', '2026-11-30T10:00:00.000Z', 'complete')");
      db->execute("INSERT INTO capture (identity_hash, run_id, path, tool_version, config_hash, tested_at, status)"
                  " VALUES ('id1', 1, 'old.csv', '0.1.0', 'h', '2026-11-30T10:00:01.000Z', 'PASS')");
      db->execute("INSERT INTO result (capture_id, name, value) VALUES (1, 'dc_gain', 0.998)");
    }
    auto db = store::open_database(target);
    CHECK(store::schema_version(*db) == 1);
    CHECK(store::migrate(*db) == 1);
    CHECK(store::schema_version(*db) == store::kSchemaVersion);
    CHECK(test::count_of(*db, "SELECT COUNT(*) FROM capture WHERE path = 'old.csv' AND serial IS NULL") == 1);
    CHECK(*db->query("SELECT value FROM result WHERE name = 'dc_gain'").at(0).at(0) == "0.998");
    // Migrating again is a no-op; a newer database is refused, not written.
    CHECK(store::migrate(*db) == store::kSchemaVersion);
    db->execute("INSERT INTO schema_version (version, migrated_at) VALUES (99, 'x')");
    CHECK_THROWS_WITH_AS(store::migrate(*db), doctest::Contains("newer periodfit"), store::DatabaseError);
  }
}

TEST_CASE("results db: recording the same captures again under the same config and version adds nothing") {
  TempDir dir("idem");
  for (const auto& target : database_targets(dir, "idem")) {
    CAPTURE(target);
    for (int run = 0; run < 2; ++run) {
      store::Recorder r(target, run_info());
      for (int i = 0; i < 3; ++i)
        CHECK(r.record({"b" + std::to_string(i) + ".csv", std::nullopt,
                        test::file_document("b.csv", "sha" + std::to_string(i), 0.5 + 0.01 * i, true), "2026-12-01T08:00:00.000Z"}) ==
              (run == 0));
      r.finish();
    }
    // A changed config is another identity: recorded anew.
    store::Recorder other(target, run_info("[analysis]\nmode = \"frf\"\norder = \"0/2\"\n"));
    CHECK(other.record({"b0.csv", std::nullopt, test::file_document("b0.csv", "sha0", 0.5, true), "2026-12-02T08:00:00.000Z"}));
    other.finish();
    auto db = store::open_database(target);
    CHECK(test::count_of(*db, "SELECT COUNT(*) FROM run WHERE status = 'complete'") == 3);
    CHECK(test::count_of(*db, "SELECT COUNT(*) FROM capture") == 4);
    CHECK(test::count_of(*db, "SELECT COUNT(*) FROM result") == 4);
    CHECK(test::count_of(*db, "SELECT COUNT(*) FROM verdict") == 4);
    CHECK(test::count_of(*db, "SELECT COUNT(*) FROM flag") == 4);
    CHECK(test::count_of(*db, "SELECT COUNT(*) FROM capture_metadata") == 4);
    CHECK(test::count_of(*db, "SELECT COUNT(*) FROM run_capture") == 7);
    CHECK(test::count_of(*db, "SELECT COUNT(*) FROM capture WHERE station IS NULL") == 4);
    CHECK(test::count_of(*db, "SELECT COUNT(*) FROM run WHERE station = 'ST-9'") == 3);
  }
}

TEST_CASE("results db: a capture is one transaction: a failing statement leaves none of its rows") {
  TempDir dir("atomic");
  for (const auto& target : database_targets(dir, "atomic")) {
    CAPTURE(target);
    store::Recorder r(target, run_info());
    auto bad = test::file_document("bad.csv", "shabad", 0.5, true);
    bad["limits"][0]["key"] = nullptr;  // verdict.limit_key is NOT NULL: fails after the capture row
    CHECK_THROWS_AS(r.record({"bad.csv", std::nullopt, bad, "2026-12-01T08:00:00.000Z"}), store::DatabaseError);
    CHECK(r.record({"good.csv", std::nullopt, test::file_document("good.csv", "shagood", 0.5, true), "2026-12-01T08:00:01.000Z"}));
    auto db = store::open_database(target);
    CHECK(test::count_of(*db, "SELECT COUNT(*) FROM capture") == 1);
    CHECK(test::count_of(*db, "SELECT COUNT(*) FROM result") == 1);
    CHECK(test::count_of(*db, "SELECT COUNT(*) FROM capture_metadata") == 1);
    // Not finished: the run stays incomplete, as a killed run does.
    CHECK(test::count_of(*db, "SELECT COUNT(*) FROM run WHERE status = 'incomplete' AND ended_at IS NULL") == 1);
  }
}

TEST_CASE("results db: several writers at once on one database lose nothing and double nothing") {
  TempDir dir("writers");
  constexpr int kWriters = 4, kOwn = 15, kShared = 8;
  for (const auto& target : database_targets(dir, "writers")) {
    CAPTURE(target);
    { auto db = store::open_database(target); store::migrate(*db); }
    std::vector<std::string> errors(kWriters);
    std::vector<std::thread> threads;
    for (int w = 0; w < kWriters; ++w)
      threads.emplace_back([&errors, &target, w] {
        try {
          store::Recorder r(target, run_info());
          // Interleaved: each writer's own captures and the captures every writer records.
          for (int i = 0; i < kOwn + kShared; ++i) {
            const std::string sha = i < kOwn ? "w" + std::to_string(w) + "-" + std::to_string(i)
                                             : "shared-" + std::to_string(i);
            r.record({sha + ".csv", std::nullopt, test::file_document(sha + ".csv", sha, 0.5, true), store::utc_now_text()});
          }
          r.finish();
        } catch (const std::exception& e) {
          errors[static_cast<std::size_t>(w)] = e.what();
        }
      });
    for (auto& t : threads) t.join();
    for (const auto& e : errors) CHECK(e == "");
    auto db = store::open_database(target);
    CHECK(test::count_of(*db, "SELECT COUNT(*) FROM capture") == kWriters * kOwn + kShared);
    CHECK(test::count_of(*db, "SELECT COUNT(*) FROM result") == kWriters * kOwn + kShared);
    CHECK(test::count_of(*db, "SELECT COUNT(*) FROM run_capture") == kWriters * (kOwn + kShared));
    CHECK(test::count_of(*db, "SELECT SUM(captures_new) FROM run") == kWriters * kOwn + kShared);
  }
}

TEST_CASE("results db: a PostgreSQL connection lost mid-run stops recording with one error and keeps whole captures") {
  const auto url = test::pg_test_url();
  if (!url) {
    MESSAGE("PERIODFIT_TEST_PG_URL not set (tools/pg-cluster.sh): this PostgreSQL case is SKIPPED");
    return;
  }
  const std::string base = test::pg_fresh_schema_url(*url, "lost");
  const std::string name = "pf_victim_" + std::to_string(::getpid());
  store::RunRecording rec(base + "&application_name=" + name, run_info());
  REQUIRE(rec.error() == "");
  for (int i = 0; i < 3; ++i)
    rec.record({"k.csv", std::nullopt, test::file_document("k.csv", "k" + std::to_string(i), 0.5, true), store::utc_now_text()});
  // The server ends the recorder's session, as a restart or a dropped network does.
  auto admin = store::open_database(*url);
  admin->execute("SELECT pg_terminate_backend(pid) FROM pg_stat_activity WHERE application_name = ?", {name});
  rec.record({"k.csv", std::nullopt, test::file_document("k.csv", "k3", 0.5, true), store::utc_now_text()});
  rec.finish();
  CHECK(rec.error().find("results database") != std::string::npos);
  CHECK(rec.error().find('\n') == std::string::npos);
  auto db = store::open_database(base);
  CHECK(test::count_of(*db, "SELECT COUNT(*) FROM capture") == 3);
  CHECK(test::count_of(*db, "SELECT COUNT(*) FROM verdict") == 3);
  CHECK(test::count_of(*db, "SELECT COUNT(*) FROM run WHERE status = 'incomplete'") == 1);
}

TEST_CASE("production report: yield, per-limit statistics and a board's history from recorded captures") {
  TempDir dir("prod");
  for (const auto& target : database_targets(dir, "prod")) {
    CAPTURE(target);
    {
      store::Recorder r(target, run_info());
      const std::vector<double> v = {0.50, 0.51, 0.49, 0.56, 0.50};
      for (std::size_t i = 0; i < v.size(); ++i) {
        const bool pass = v[i] <= 0.55;
        r.record({"c.csv", std::nullopt,
                  test::file_document("c.csv", "p" + std::to_string(i), v[i], pass, i == 3 ? "0412" : "07" + std::to_string(i)),
                  "2026-12-01T08:00:0" + std::to_string(i) + ".000Z"});
      }
      r.finish();
    }
    auto db = store::open_database(target);
    store::ProductionQuery q;
    q.board = "0412";
    const store::ProductionReport rep = store::production_report(*db, q);
    CHECK(rep.captures == 5);
    CHECK(rep.passed == 4);
    CHECK(rep.yield == doctest::Approx(0.8).epsilon(1e-15));
    REQUIRE(rep.limits.size() == 1);
    CHECK(rep.limits[0].failed == 1);
    CHECK(rep.limits[0].capability.n == 5);
    CHECK(rep.limits[0].lsl == 0.45);
    CHECK(rep.limits[0].usl == 0.55);
    CHECK(rep.limits[0].serials[3] == "0412");
    REQUIRE(rep.history.size() == 1);
    CHECK(rep.history[0].status == "FAIL");
    CHECK(rep.history[0].verdicts.at(0).value == 0.56);
    // Selections: a serial glob and a time range.
    q = {};
    q.serial = "07*";
    CHECK(store::production_report(*db, q).captures == 4);
    q = {};
    q.since = "2026-12-01T08:00:02";
    CHECK(store::production_report(*db, q).captures == 3);
  }
}

TEST_CASE("identity: command line over sidecar over preamble over file name over config, per field") {
  TempDir dir("identity");
  store::IdentitySettings s;
  s.name_pattern = "board-([0-9]+)_lot-([A-Z0-9]+)";
  s.name_fields = {"serial", "lot"};
  s.preamble_keys = {{"lot", "Lot"}, {"fixture", "Fixture"}};
  s.sidecar = true;
  s.config_values = {{"station", "ST-1"}, {"serial", "config-serial"}};
  s.command_values = {{"operator", "B. Operator"}};
  s.validate();
  const std::string capture = dir.file("board-0412_lot-A7.csv");
  const std::vector<std::pair<std::string, std::string>> preamble = {{"Lot", "A8"}, {"Fixture", "F-2"}};
  const store::Identity plain = store::resolve_identity(s, capture, preamble);
  CHECK(plain.get("serial") == "0412");   // file name over config
  CHECK(plain.get("lot") == "A8");        // preamble over file name
  CHECK(plain.get("fixture") == "F-2");
  CHECK(plain.get("station") == "ST-1");  // config only
  CHECK(plain.get("operator") == "B. Operator");
  test::write_text(capture + ".id", "# rework\nlot = A9\n  station =  ST-2 \noperator = sidecar\n");
  const store::Identity side = store::resolve_identity(s, capture, preamble);
  CHECK(side.get("lot") == "A9");
  CHECK(side.get("station") == "ST-2");
  CHECK(side.get("operator") == "B. Operator");  // the command line still wins
  test::write_text(capture + ".id", "lot = A9\nserail = 7\n");
  CHECK_THROWS_WITH_AS(store::resolve_identity(s, capture, preamble), doctest::Contains(".id:2:1:"), InputError);
  // Settings that cannot work are refused before any capture is read.
  store::IdentitySettings bad = s;
  bad.name_fields = {"serial"};
  CHECK_THROWS_WITH_AS(bad.validate(), doctest::Contains("has 2 groups but name_fields names 1"), OptionError);
  bad = s;
  bad.name_pattern = "board-([0-9]+";
  CHECK_THROWS_AS(bad.validate(), OptionError);
  bad = s;
  bad.config_values = {{"seriall", "x"}};
  CHECK_THROWS_WITH_AS(bad.validate(), doctest::Contains("serial"), UnknownNameError);
}

TEST_CASE("production statistics: each status has its own code, the ones docs/results-db.md lists") {
  const auto c = test::codes_of(store::StatisticStatus::no_limits, [](store::StatisticStatus s) { return code(s); });
  CHECK(c.front() == "ok");
  CHECK(test::distinct(c));
  // The page lists the statuses that leave the indices undefined, in backquotes.
  test::check_documented(std::vector<std::string>(c.begin() + 1, c.end()), "results-db.md", "  - status `", "`", "`");
}
