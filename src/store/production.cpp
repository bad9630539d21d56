#include "store/production.hpp"

#include <cmath>
#include <map>

#include "core/error.hpp"
#include "report/html_report.hpp"
#include "store/schema.hpp"

namespace periodfit::store {

void ProductionQuery::validate() const {
  capability.validate();
  for (const auto* t : {&since, &until})
    if (!t->empty() && (t->size() < 4 || !std::isdigit(static_cast<unsigned char>((*t)[0]))))
      throw OptionError(t == &since ? "since" : "until", *t, "must be an ISO 8601 date or time, e.g. 2026-12-01");
}

namespace {

double number(const std::optional<std::string>& v) {
  return v ? std::strtod(v->c_str(), nullptr) : std::numeric_limits<double>::quiet_NaN();
}
std::string text(const std::optional<std::string>& v) { return v.value_or(""); }

// A serial glob (* and ?) as a LIKE pattern with '\' escaping LIKE's own wildcards; LIKE …
// ESCAPE is the same in both engines (SQL-92).
std::string like_pattern(const std::string& glob) {
  std::string out;
  for (char c : glob) {
    if (c == '%' || c == '_' || c == '\\') out += '\\', out += c;
    else if (c == '*') out += '%';
    else if (c == '?') out += '_';
    else out += c;
  }
  return out;
}

struct Filter {
  std::string where;
  std::vector<Value> params;
};

Filter capture_filter(const ProductionQuery& q) {
  Filter f{"1 = 1", {}};
  const auto add = [&](const std::string& clause, const std::string& value) {
    f.where += " AND " + clause;
    f.params.emplace_back(value);
  };
  if (!q.since.empty()) add("c.tested_at >= ?", q.since);
  if (!q.until.empty()) add("c.tested_at < ?", q.until);
  if (!q.station.empty()) add("c.station = ?", q.station);
  if (!q.lot.empty()) add("c.lot = ?", q.lot);
  if (!q.serial.empty()) add("c.serial LIKE ? ESCAPE '\\'", like_pattern(q.serial));
  return f;
}

/// Refuses a database without periodfit's schema or with another version of it.
void check_schema(Connection& db) {
  const int version = schema_version(db);
  if (version == 0) throw DatabaseError(db.target(), "holds no periodfit results (no schema)");
  if (version != kSchemaVersion)
    throw DatabaseError(db.target(), "schema version " + std::to_string(version) + ", this periodfit reads " +
                                         std::to_string(kSchemaVersion) +
                                         (version < kSchemaVersion ? "; record or import a run with it to migrate" : ""));
}

/// Capture counts by status, the time span and the yield.
void count_captures(Connection& db, const Filter& f, ProductionReport& r) {
  for (const auto& row : db.query("SELECT c.status, COUNT(*), MIN(c.tested_at), MAX(c.tested_at) FROM capture c WHERE " +
                                       f.where + " GROUP BY c.status",
                                   f.params)) {
    const auto n = static_cast<std::size_t>(std::stoll(text(row[1])));
    r.captures += n;
    // A status other than PASS and FAIL (ERROR, or text a foreign row holds) counts as an error.
    const auto status = report::file_status_from(text(row[0]));
    (status == report::FileStatus::pass ? r.passed : status == report::FileStatus::fail ? r.failed : r.errors) += n;
    if (r.first_test.empty() || text(row[2]) < r.first_test) r.first_test = text(row[2]);
    if (text(row[3]) > r.last_test) r.last_test = text(row[3]);
  }
  if (r.captures > 0) r.yield = static_cast<double>(r.passed) / static_cast<double>(r.captures);
}

/// Per limit key (or the one asked for): verdict counts, the latest limits, and the capability
/// and control chart of the evaluated values in time order.
std::vector<LimitStats> limit_stats(Connection& db, const Filter& f, const ProductionQuery& q) {
  std::vector<Value> params = f.params;
  std::string limit_clause;
  if (!q.limit.empty()) {
    limit_clause = " AND v.limit_key = ?";
    params.emplace_back(q.limit);
  }
  std::map<std::string, LimitStats> by_key;
  std::map<std::string, std::vector<double>> values;
  for (const auto& row :
       db.query("SELECT v.limit_key, v.evaluated, v.passed, v.value, v.min, v.max, v.allowed, c.tested_at, c.serial"
                " FROM verdict v JOIN capture c ON c.id = v.capture_id WHERE " +
                    f.where + limit_clause + " ORDER BY c.tested_at, c.id",
                params)) {
    LimitStats& s = by_key[text(row[0])];
    s.key = text(row[0]);
    ++s.tests;
    if (text(row[2]) != "1") ++s.failed;
    // The latest test's limits and text win (rows come in time order).
    s.lsl = row[4] ? number(row[4]) : -std::numeric_limits<double>::infinity();
    s.usl = row[5] ? number(row[5]) : std::numeric_limits<double>::infinity();
    s.allowed = text(row[6]);
    const double v = number(row[3]);
    if (text(row[1]) == "1" && std::isfinite(v)) {
      values[s.key].push_back(v);
      s.times.push_back(text(row[7]));
      s.serials.push_back(text(row[8]));
    }
  }
  std::vector<LimitStats> out;
  for (auto& [key, s] : by_key) {
    s.capability = capability(values[key], s.lsl, s.usl, q.capability);
    s.chart = individuals_chart(values[key]);
    out.push_back(std::move(s));
  }
  return out;
}

/// Every test of one board, oldest first, with its verdicts in limit order.
std::vector<BoardTest> board_history(Connection& db, const std::string& board) {
  std::vector<BoardTest> history;
  std::map<std::int64_t, std::size_t> index;
  for (const auto& row : db.query("SELECT c.id, c.tested_at, c.path, c.status, c.lot, c.station, c.fixture, c.operator,"
                                  " c.run_id FROM capture c WHERE c.serial = ? ORDER BY c.tested_at, c.id",
                                  {board})) {
    BoardTest t;
    t.tested_at = text(row[1]);
    t.path = text(row[2]);
    t.status = text(row[3]);
    t.lot = text(row[4]);
    t.station = text(row[5]);
    t.fixture = text(row[6]);
    t.operator_name = text(row[7]);
    t.run_id = std::stoll(text(row[8]));
    index[std::stoll(text(row[0]))] = history.size();
    history.push_back(std::move(t));
  }
  for (const auto& row : db.query("SELECT v.capture_id, v.limit_key, v.value, v.margin, v.passed, v.verdict FROM verdict v"
                                  " JOIN capture c ON c.id = v.capture_id WHERE c.serial = ? ORDER BY v.capture_id, v.position",
                                  {board})) {
    const auto it = index.find(std::stoll(text(row[0])));
    if (it == index.end()) continue;
    history[it->second].verdicts.push_back(
        {text(row[1]), text(row[5]), number(row[2]), number(row[3]), text(row[4]) == "1"});
  }
  return history;
}

}  // namespace

ProductionReport production_report(Connection& db, const ProductionQuery& q) {
  q.validate();
  check_schema(db);
  ProductionReport r;
  r.query = q;
  r.database = db.target();
  const Filter f = capture_filter(q);
  count_captures(db, f, r);
  r.limits = limit_stats(db, f, q);
  if (!q.board.empty()) r.history = board_history(db, q.board);
  return r;
}

}  // namespace periodfit::store
