#pragma once
/// The production view of a results database: over a time range, station, lot and serial
/// pattern — the yield, each limit's distribution with Cp/Cpk and their confidence intervals,
/// its individuals control chart with run-rule signals and its trend over time, and one
/// board's test history (store/production_stats.hpp has the statistics and their sources).
///
/// Every test counts: a board tested twice contributes two captures (test yield, not
/// first-pass yield). A limit's LSL/USL are those of its most recent test in the selection.
/// Values enter the statistics only where the limit was evaluated (a missing result is a
/// failure in the yield but has no value).
///
/// Usage:
///   auto db = open_database("results.sqlite");
///   ProductionQuery q; q.lot = "L-2026-11";
///   const ProductionReport r = production_report(*db, q);
#include <string>
#include <vector>

#include "store/database.hpp"
#include "store/production_stats.hpp"

namespace periodfit::store {

struct ProductionQuery {
  std::string since;    ///< ISO 8601 UTC prefix, tests at or after it ("2026-12-01"); "" = no bound
  std::string until;    ///< tests before it; "" = no bound
  std::string station;  ///< exact; "" = any
  std::string lot;      ///< exact; "" = any
  std::string serial;   ///< glob with * and ?; "" = any
  std::string limit;    ///< one limit key ("damping[pole=1]"); "" = every limit
  std::string board;    ///< a serial whose test history to list; "" = none
  CapabilityOptions capability;
  void validate() const;  ///< throws OptionError
};

struct LimitStats {
  std::string key;
  std::string allowed;            ///< as written in the config of the latest test
  double lsl = -std::numeric_limits<double>::infinity();
  double usl = std::numeric_limits<double>::infinity();
  std::size_t tests = 0, failed = 0;  ///< verdicts, and failing ones
  std::vector<std::string> times;    ///< per value, ISO 8601
  std::vector<std::string> serials;  ///< per value ("" = unknown)
  Capability capability;
  ControlChart chart;  ///< of the values in time order (its x holds them)
};

struct BoardTest {
  /// status: as the database holds it ("PASS", "FAIL", "ERROR"; report::file_status_from reads it)
  std::string tested_at, path, status, lot, station, fixture, operator_name;
  std::int64_t run_id = 0;
  struct Verdict {
    std::string key, verdict;
    double value = std::numeric_limits<double>::quiet_NaN();
    double margin = std::numeric_limits<double>::quiet_NaN();
    bool passed = false;
  };
  std::vector<Verdict> verdicts;
};

struct ProductionReport {
  ProductionQuery query;
  std::string database;  ///< target, password redacted
  std::size_t captures = 0, passed = 0, failed = 0, errors = 0;
  double yield = std::numeric_limits<double>::quiet_NaN();  ///< passed / captures
  std::string first_test, last_test;
  std::vector<LimitStats> limits;  ///< by key
  std::vector<BoardTest> history;  ///< query.board's tests, oldest first
};

ProductionReport production_report(Connection& db, const ProductionQuery& query);

/// Renderings (docs/results-db.md, "Production statistics"): text for a terminal; CSV (one row
/// per limit, or per test of the board with --board); JSON (everything); a self-contained HTML
/// page with a histogram against the tolerance band, the control chart and the trend per limit.
std::string production_text(const ProductionReport& report);
std::string production_csv(const ProductionReport& report);
std::string production_json(const ProductionReport& report);
std::string production_html(const ProductionReport& report);

}  // namespace periodfit::store
