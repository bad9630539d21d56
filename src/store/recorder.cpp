#include "store/recorder.hpp"

#include <algorithm>
#include <cmath>

#include "store/clock.hpp"
#include "store/schema.hpp"

namespace periodfit::store {

using json = nlohmann::ordered_json;

std::string config_hash(const RunInfo& info) { return sha256_hex(info.config_text); }

namespace {

Value text_or_null(const json& j) {
  if (j.is_string()) return j.get<std::string>();
  return std::monostate{};
}

Value number_or_null(const json& j) {
  if (j.is_boolean()) return j.get<bool>() ? 1.0 : 0.0;
  if (j.is_number()) return j.get<double>();
  return std::monostate{};
}

const json& field(const json& j, const char* name) {
  static const json null;
  if (!j.is_object()) return null;
  const auto it = j.find(name);
  return it == j.end() ? null : *it;
}

// Multi-row INSERTs of up to kRowsPerStatement rows: one statement per chunk instead of one per
// row, which is most of the time on a server round trip (PostgreSQL) and half of it on SQLite.
constexpr std::size_t kRowsPerStatement = 100;

void insert_rows(Connection& db, const std::string& table, const std::vector<std::string>& columns,
                 const std::vector<std::vector<Value>>& rows) {
  std::string head = "INSERT INTO " + table + " (";
  std::string one = "(";
  for (std::size_t c = 0; c < columns.size(); ++c) {
    head += (c ? ", " : "") + columns[c];
    one += c ? ", ?" : "?";
  }
  head += ") VALUES ";
  one += ")";
  for (std::size_t start = 0; start < rows.size(); start += kRowsPerStatement) {
    const std::size_t end = std::min(rows.size(), start + kRowsPerStatement);
    std::string sql = head;
    std::vector<Value> params;
    params.reserve((end - start) * columns.size());
    for (std::size_t r = start; r < end; ++r) {
      sql += (r > start ? ", " : "") + one;
      params.insert(params.end(), rows[r].begin(), rows[r].end());
    }
    db.execute(sql, params);
  }
}

}  // namespace

Recorder::Recorder(const std::string& target, RunInfo info)
    : db_(open_database(target)), info_(std::move(info)), config_hash_(config_hash(info_)) {
  if (info_.host.empty()) info_.host = host_name();
  migrate(*db_);
  in_transaction(*db_, [&] {
    run_id_ = *db_->insert_returning_id(
        "INSERT INTO run (tool_version, mode, config_source, config_text, config_hash, host, report_dir, origin,"
        " started_at, status, files_total, station, operator, batch_run_id, shard_index, shard_count)"
        " VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, 'incomplete', ?, ?, ?, ?, ?, ?)",
        {info_.tool_version, info_.mode, info_.config_source, info_.config_text, config_hash_, info_.host,
         info_.report_dir, info_.origin, utc_now_text(), info_.files_total,
         info_.station.empty() ? Value{} : Value{info_.station},
         info_.operator_name.empty() ? Value{} : Value{info_.operator_name},
         info_.batch_run_id.empty() ? Value{} : Value{info_.batch_run_id},
         info_.shard_count > 0 ? Value{static_cast<std::int64_t>(info_.shard_index)} : Value{},
         info_.shard_count > 0 ? Value{static_cast<std::int64_t>(info_.shard_count)} : Value{}});
  });
}

bool Recorder::record(const CaptureRecord& c) {
  const json& d = c.document;
  std::optional<FileDigest> digest = c.digest;
  if (const json& cap = field(d, "capture"); !digest && field(cap, "sha256").is_string())
    digest = FileDigest{field(cap, "sha256").get<std::string>(),
                        field(cap, "size_bytes").is_number_unsigned() ? field(cap, "size_bytes").get<std::uint64_t>() : 0};
  const std::string content = digest ? digest->sha256 : "json:" + sha256_hex(d.dump());
  const std::string identity = sha256_hex(info_.tool_version + "\n" + config_hash_ + "\n" + content);
  const json& id = field(d, "identity");
  const auto who = [&](const char* name) -> Value {
    const json& v = field(id, name);
    return v.is_string() ? Value{v.get<std::string>()} : Value{};
  };
  std::lock_guard<std::mutex> lock(mutex_);
  bool added = false;
  in_transaction(*db_, [&] {
    const auto capture_id = db_->insert_returning_id(
        "INSERT INTO capture (identity_hash, run_id, path, size_bytes, content_hash, tool_version, config_hash,"
        " tested_at, status, error, serial, lot, fixture, station, operator)"
        " VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?) ON CONFLICT (identity_hash) DO NOTHING",
        {identity, run_id_, c.path,
         digest ? Value{static_cast<std::int64_t>(digest->size)} : Value{},
         digest ? Value{digest->sha256} : Value{}, info_.tool_version, config_hash_, c.tested_at,
         field(d, "status").is_string() ? field(d, "status").get<std::string>() : std::string("ERROR"),
         text_or_null(field(d, "error")), who("serial"), who("lot"), who("fixture"), who("station"),
         who("operator")});
    std::int64_t cid = 0;
    if (capture_id) {
      added = true;
      cid = *capture_id;
      std::vector<std::vector<Value>> rows;
      std::int64_t position = 0;
      for (const auto& m : field(d, "metadata"))
        rows.push_back({cid, ++position, text_or_null(field(m, "name")), text_or_null(field(m, "value"))});
      insert_rows(*db_, "capture_metadata", {"capture_id", "position", "name", "value"}, rows);
      rows.clear();
      const json& measurements = field(d, "measurements");
      if (measurements.is_object())
        for (const auto& [key, q] : measurements.items())
          rows.push_back({cid, key, number_or_null(field(q, "value")), number_or_null(field(q, "u")),
                          number_or_null(field(q, "k")), number_or_null(field(q, "lo95")),
                          number_or_null(field(q, "hi95"))});
      insert_rows(*db_, "result", {"capture_id", "name", "value", "u", "k", "lo95", "hi95"}, rows);
      rows.clear();
      position = 0;
      for (const auto& l : field(d, "limits"))
        rows.push_back({cid, ++position, text_or_null(field(l, "key")),
                        static_cast<std::int64_t>(field(l, "evaluated") == true),
                        static_cast<std::int64_t>(field(l, "passed") == true), number_or_null(field(l, "value")),
                        number_or_null(field(l, "u")), number_or_null(field(l, "lo95")),
                        number_or_null(field(l, "hi95")), number_or_null(field(l, "min")),
                        number_or_null(field(l, "max")), text_or_null(field(l, "allowed")),
                        number_or_null(field(l, "margin")), number_or_null(field(l, "margin_fraction")),
                        text_or_null(field(l, "verdict"))});
      insert_rows(*db_, "verdict",
                  {"capture_id", "position", "limit_key", "evaluated", "passed", "value", "u", "lo95", "hi95",
                   "min", "max", "allowed", "margin", "margin_fraction", "verdict"},
                  rows);
      rows.clear();
      position = 0;
      const json& failing = field(d, "failing_flags");
      for (const auto& f : field(d, "flags")) {
        const bool fails = failing.is_array() && std::find(failing.begin(), failing.end(), f) != failing.end();
        rows.push_back({cid, ++position, text_or_null(f), static_cast<std::int64_t>(fails)});
      }
      insert_rows(*db_, "flag", {"capture_id", "position", "flag", "failing"}, rows);
    } else {
      const auto existing = db_->query("SELECT id FROM capture WHERE identity_hash = ?", {identity});
      if (existing.empty() || !existing.front().front())
        throw DatabaseError(db_->target(), "capture " + c.path + " was neither inserted nor found");
      cid = std::stoll(*existing.front().front());
    }
    db_->execute("INSERT INTO run_capture (run_id, capture_id) VALUES (?, ?) ON CONFLICT (run_id, capture_id) DO NOTHING",
                 {run_id_, cid});
  });
  ++(added ? added_ : known_);
  return added;
}

void Recorder::finish() {
  std::lock_guard<std::mutex> lock(mutex_);
  in_transaction(*db_, [&] {
    db_->execute("UPDATE run SET status = 'complete', ended_at = ?, captures_new = ?, captures_known = ? WHERE id = ?",
                 {utc_now_text(), added_, known_, run_id_});
  });
}

RunRecording::RunRecording(const std::string& target, RunInfo info) noexcept : target_(redact_target(target)) {
  try {
    recorder_ = std::make_unique<Recorder>(target, std::move(info));
  } catch (const std::exception& e) {
    error_ = e.what();
  }
}

void RunRecording::record(const CaptureRecord& capture) noexcept {
  {
    std::lock_guard<std::mutex> lock(mutex_);
    if (!recorder_ || !error_.empty()) return;
  }
  try {
    recorder_->record(capture);
  } catch (const std::exception& e) {
    std::lock_guard<std::mutex> lock(mutex_);
    if (error_.empty()) error_ = e.what();
  }
}

void RunRecording::finish() noexcept {
  {
    std::lock_guard<std::mutex> lock(mutex_);
    if (!recorder_ || !error_.empty()) return;
  }
  try {
    recorder_->finish();
  } catch (const std::exception& e) {
    std::lock_guard<std::mutex> lock(mutex_);
    if (error_.empty()) error_ = e.what();
  }
}

std::string RunRecording::error() const {
  std::lock_guard<std::mutex> lock(mutex_);
  return error_;
}
std::int64_t RunRecording::added() const { return recorder_ ? recorder_->added() : 0; }
std::int64_t RunRecording::known() const { return recorder_ ? recorder_->known() : 0; }

}  // namespace periodfit::store
