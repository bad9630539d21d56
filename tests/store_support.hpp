#pragma once
// Helpers for the results-database tests: the PostgreSQL test server's URL (tools/pg-cluster.sh
// exports PERIODFIT_TEST_PG_URL; without it the PostgreSQL cases MESSAGE and skip), a fresh
// schema per test case on it so cases running in parallel never see each other's rows, and a
// per-file JSON document shaped like a batch's (docs/batch-output.md).
#include <atomic>
#include <cstdlib>
#include <nlohmann/json.hpp>
#include <optional>
#include <string>
#include <unistd.h>

#include "store/database.hpp"

namespace periodfit::test {

/// The server's URL, or nullopt when the suite runs without one.
inline std::optional<std::string> pg_test_url() {
  const char* url = std::getenv("PERIODFIT_TEST_PG_URL");
  if (!url || !*url) return std::nullopt;
  return std::string(url);
}

/// A URL on the test server whose search_path is a new, empty schema named after `tag`.
inline std::string pg_fresh_schema_url(const std::string& base, const std::string& tag) {
  static std::atomic<int> counter{0};
  const std::string schema = "t_" + tag + "_" + std::to_string(::getpid()) + "_" + std::to_string(counter++);
  auto db = store::open_database(base);
  db->execute_script("DROP SCHEMA IF EXISTS " + schema + " CASCADE; CREATE SCHEMA " + schema);
  return base + (base.find('?') == std::string::npos ? "?" : "&") + "options=-csearch_path%3D" + schema;
}

/// A per-file JSON document for capture `path` with content hash `sha`, one measured result and
/// one limit verdict (value, pass) and one flag.
inline nlohmann::ordered_json file_document(const std::string& path, const std::string& sha, double value,
                                            bool passed, const std::string& serial = "") {
  nlohmann::ordered_json d;
  d["path"] = path;
  d["status"] = passed ? "PASS" : "FAIL";
  d["error"] = nullptr;
  d["mode"] = "frf";
  d["flags"] = {"few-periods"};
  d["failing_flags"] = nlohmann::ordered_json::array();
  d["limits"] = {{{"index", 1}, {"key", "damping[pole=1]"}, {"passed", passed}, {"evaluated", true},
                  {"value", value}, {"u", 0.004}, {"k", 1.96}, {"lo95", value - 0.008}, {"hi95", value + 0.008},
                  {"min", 0.45}, {"max", 0.55}, {"allowed", "0.45 … 0.55"}, {"margin", 0.05 - std::abs(value - 0.5)},
                  {"margin_fraction", (0.05 - std::abs(value - 0.5)) / 0.1}, {"measured", ""},
                  {"verdict", passed ? "pass" : "fail"}}};
  d["measurements"] = {{"damping[pole=1]", {{"value", value}, {"lo95", value - 0.008}, {"hi95", value + 0.008},
                                            {"u", 0.004}, {"k", 1.96}}}};
  d["result"] = nullptr;
  d["identity"] = nlohmann::ordered_json::object();
  if (!serial.empty()) d["identity"]["serial"] = serial;
  d["capture"] = {{"size_bytes", 100}, {"sha256", sha}};
  d["metadata"] = {{{"name", "Operator note"}, {"value", "none"}}};
  return d;
}

/// One integer from a COUNT(*)-style query.
inline long long count_of(store::Connection& db, const std::string& sql) {
  const auto rows = db.query(sql);
  return std::stoll(*rows.at(0).at(0));
}

}  // namespace periodfit::test
